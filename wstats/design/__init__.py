"""The sample design: what the user declares (``Design``), binding it to data
(``BoundDesign``: checked weights, coded strata and PSUs, FPC, replicate matrices), replicate
rules and the pooling of several files.

May import ``wstats.decoding``, ``wstats.readers`` and ``wstats.errors``.
"""
