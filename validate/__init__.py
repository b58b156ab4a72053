"""Readers, checks, reports, database loading and the `milepost` command line."""

__version__ = "0.1.0"
