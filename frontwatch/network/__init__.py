"""Front tracking across the network, arrival forecasts at sites, race-course monitors (SiteWatch)."""
