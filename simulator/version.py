"""The version of partload (also the package's ``__version__``)."""

__version__ = "0.1.0"
