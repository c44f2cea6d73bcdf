"""sheetfuncs: s-domain toolkit for spreadsheets."""
__version__ = "0.1.0"
