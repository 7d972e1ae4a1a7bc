"""Ingest: read result files (native or mapped foreign formats), validate, write to the store."""

from monitor.ingest.load import LoadReport, load_file

__all__ = ["LoadReport", "load_file"]
