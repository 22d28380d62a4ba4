"""The version of tomo (one place; the run files and reports record it)."""

__version__ = "0.1.0"
