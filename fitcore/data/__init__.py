"""Data in: which columns hold what, reading CSV/TSV/Parquet files with every row accounted for,
row-level validation, the ``Dataset`` the engine takes, plan prices, the settings file, series keys.

May import: the shared modules of ``fitcore`` (errors, text, arrays). Nothing from the other rooms.
"""
