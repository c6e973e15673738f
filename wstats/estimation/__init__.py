"""Estimation: weighted sums by (stratum, PSU, domain), the statistics, variance and the
covariance of many estimates, intervals, distributions, reliability flags, data-sanity
warnings, the tidy result table and the public ``estimate``.

May import ``wstats.design``, ``wstats.decoding``, ``wstats.readers`` and ``wstats.errors``.
"""
