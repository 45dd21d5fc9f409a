"""Command groups of the CLI; each module has register(app) and imports heavy parts lazily."""
