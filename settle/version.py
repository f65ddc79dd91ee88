"""The version of settle, in one place (summary.json, reports and `settle --version` print it)."""
__version__ = "0.1.0"
