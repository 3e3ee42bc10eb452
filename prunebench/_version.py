"""The package version, in a module of its own so any module can read it without the package."""

__version__ = "0.2.0"
