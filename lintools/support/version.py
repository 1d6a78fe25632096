"""The version of lintools (one place; the package, model files and PMML documents state it)."""

__version__ = "0.1.0"
