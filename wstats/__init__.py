"""wstats: survey-weighted descriptive statistics that keep the reason every value is missing.

The public door. Names are imported lazily so that ``wstats --help`` starts fast; everything
listed in ``__all__`` is importable as ``from wstats import X``.
"""

from __future__ import annotations

import importlib
from typing import Any

__version__ = "0.1.0"

_EXPORTS: dict[str, str] = {
    "AnalysisError": "wstats.errors",
    "Codebook": "wstats.decoding.codebook",
    "CodebookError": "wstats.errors",
    "ColumnError": "wstats.errors",
    "Comparison": "wstats.reports.compare_result",
    "Dataset": "wstats.decoding.columns",
    "DecodedColumn": "wstats.decoding.columns",
    "Design": "wstats.design.declared",
    "DesignError": "wstats.errors",
    "EstimateTable": "wstats.estimation.results",
    "EstimationError": "wstats.errors",
    "ExpressionError": "wstats.errors",
    "NonresponseTable": "wstats.reports.nonresponse",
    "OutputError": "wstats.errors",
    "ReadError": "wstats.errors",
    "Reasons": "wstats.decoding.reasons",
    "ReliabilityStandard": "wstats.estimation.reliability",
    "SingletonStratumError": "wstats.errors",
    "UsageError": "wstats.errors",
    "WeightError": "wstats.errors",
    "WstatsError": "wstats.errors",
    "bounds": "wstats.reports.bounds",
    "build_table": "wstats.reports.tables",
    "check_codebook": "wstats.decoding.draft",
    "compare": "wstats.reports.compare",
    "convert": "wstats.readers.cache",
    "decode": "wstats.decoding.codebook",
    "describe_columns": "wstats.readers.overview",
    "draft_codebook": "wstats.decoding.draft",
    "estimate": "wstats.estimation.estimate",
    "load_codebook": "wstats.decoding.codebook",
    "load_table_spec": "wstats.reports.tables",
    "look": "wstats.reports.look",
    "methods_paragraph": "wstats.reports.methods",
    "nonresponse": "wstats.reports.nonresponse",
    "read": "wstats.decoding.load",
    "read_raw": "wstats.readers.dispatch",
    "run_analysis": "wstats.cli.analysis",
}

__all__ = sorted([*_EXPORTS, "__version__"])


def __getattr__(name: str) -> Any:
    try:
        module = _EXPORTS[name]
    except KeyError:
        raise AttributeError(f"module 'wstats' has no attribute {name!r}") from None
    value = getattr(importlib.import_module(module), name)
    importlib.import_module("wstats.render")  # results show themselves (readers/display.py)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return __all__
