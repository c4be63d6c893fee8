"""The package version, in a module of its own so any module can read it without a cycle."""

__all__ = ["__version__"]

__version__ = "0.1.0"
