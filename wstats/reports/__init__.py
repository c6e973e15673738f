"""Reports built from estimates: nonresponse breakdowns and bounds, group comparisons,
publication tables and their specs, cell formatting, the methods paragraph, provenance and
plots.

May import ``wstats.estimation`` and every layer below it.
"""
