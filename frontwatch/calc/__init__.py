"""Pure meteorology: each function states its units, formula and published source."""
