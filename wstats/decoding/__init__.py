"""Decoding: raw codes -> decoded columns (a value and, when missing, its reason).

Owns the reason vocabulary, decoded columns and datasets, the codebook and its TOML, the
expression language, ``codebook draft``/``check`` and ``wstats.read``. May import
``wstats.readers`` and ``wstats.errors``.
"""
