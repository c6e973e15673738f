"""Reading files: path -> raw columns with their metadata, the Parquet cache, safe output files.

Owns the format readers (one module per format family), ``wstats convert`` and atomic,
never-overwriting output files. Imports only ``wstats.errors``: it is the bottom layer.
"""
