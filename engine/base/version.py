"""The one source of the version number (pyproject.toml reads it from here)."""

__version__ = "0.4.0"
