"""The version, in one place: pyproject.toml reads it from here when building."""

__version__ = "0.1.0"
