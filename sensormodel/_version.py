"""The package version, in one place (the package ``__init__`` and provenance records read it)."""

__version__ = "0.1.0"
