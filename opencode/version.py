"""The version of oecode (one place; the package, the study files and the report read it)."""

__version__ = "0.1.0"
