"""The installed forecastaudit version (kept apart so no module imports the package root)."""

__version__ = "0.1.0"
