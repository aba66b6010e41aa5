"""The package version, in one place for the package and the documents it writes."""

__version__ = "0.1.0"
