"""The package version, read by the build and written into provenance records."""

__version__ = "0.1.0"
