"""The package version, apart from the package's ``__init__`` so that any module can read it without importing
the package's lazy entry points (which import the engine)."""

__version__ = "0.1.0"
