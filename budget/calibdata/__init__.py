"""Measured calibration data in: CSV tables and SDK JSON files become a TOML error model.

See docs/import.md for the accepted layouts and :func:`budget.calibdata.importer.import_tables`.
"""
