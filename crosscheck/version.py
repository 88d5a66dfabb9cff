"""The package version, at the bottom of the import map so that any stage may record it."""

__version__ = "0.1.0"
