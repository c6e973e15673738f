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
    "Codebook": "wstats._codebook",
    "CodebookError": "wstats.errors",
    "ColumnError": "wstats.errors",
    "Dataset": "wstats._column",
    "DecodedColumn": "wstats._column",
    "Design": "wstats._design",
    "DesignError": "wstats.errors",
    "EstimateTable": "wstats._results",
    "EstimationError": "wstats.errors",
    "ExpressionError": "wstats.errors",
    "NonresponseTable": "wstats._nonresponse",
    "OutputError": "wstats.errors",
    "ReadError": "wstats.errors",
    "Reasons": "wstats._reasons",
    "ReliabilityStandard": "wstats._reliability",
    "SingletonStratumError": "wstats.errors",
    "UsageError": "wstats.errors",
    "WeightError": "wstats.errors",
    "WstatsError": "wstats.errors",
    "bounds": "wstats._nonresponse",
    "build_table": "wstats._pubtable",
    "check_codebook": "wstats._draft",
    "convert": "wstats._convert",
    "decode": "wstats._codebook",
    "draft_codebook": "wstats._draft",
    "estimate": "wstats._estimate",
    "load_codebook": "wstats._codebook",
    "load_table_spec": "wstats._pubtable",
    "methods_paragraph": "wstats._methods",
    "nonresponse": "wstats._nonresponse",
    "read": "wstats._load",
    "read_raw": "wstats._readers",
    "run_analysis": "wstats._analysis",
}

__all__ = sorted([*_EXPORTS, "__version__"])


def __getattr__(name: str) -> Any:
    try:
        module = _EXPORTS[name]
    except KeyError:
        raise AttributeError(f"module 'wstats' has no attribute {name!r}") from None
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return __all__
