"""Results files: the JSON and Parquet writers, readers that give plain records, and stored
results (a Parquet file opened as ``Results`` arrays without refitting).

May import: ``review``, ``fit``, ``data`` and the shared modules.
"""
