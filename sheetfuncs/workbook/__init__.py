"""Workbook files: reading formula cells and writing cached results."""
