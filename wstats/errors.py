"""The exception tree of wstats.

Every error a user can cause derives from :class:`WstatsError`; the command line catches that
one class at its edge, prints the one-line message and exits with the class's ``exit_code``.
Anything else escaping is a bug in wstats.

::

    WstatsError                      exit 1 unless noted
    ├── UsageError                   exit 2  a command-line option or argument is wrong
    ├── ReadError                            a data file cannot be read (missing, corrupt, ...)
    │   └── ColumnError                      a named column is not in the file / has a bad type
    ├── CodebookError                        a codebook cannot be used (syntax, rules, ...)
    │   └── ExpressionError                  a derived-variable expression is not allowed
    ├── DesignError                          the sample design cannot be used
    │   ├── WeightError                      weights are negative, missing, infinite or all zero
    │   └── SingletonStratumError            strata with one PSU under ``singleton = "fail"``
    ├── EstimationError                      an estimate was asked for that cannot be computed
    ├── AnalysisError                        an analysis or table spec file is wrong
    └── OutputError                  exit 3  an output cannot be written (exists, no folder, full)

Messages name the thing (file, variable, line), what was found, and how to fix it.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable

__all__ = [
    "AnalysisError",
    "CodebookError",
    "ColumnError",
    "DesignError",
    "EstimationError",
    "ExpressionError",
    "OutputError",
    "ReadError",
    "SingletonStratumError",
    "UsageError",
    "WeightError",
    "WstatsError",
    "WstatsWarning",
    "did_you_mean",
    "require_package",
]

#: optional feature -> (module it imports, pip extra that installs it)
OPTIONAL_PACKAGES = {"charts": ("matplotlib", "plot"), "xlsx files": ("openpyxl", "xlsx")}


class WstatsError(Exception):
    """Base of every error a user can cause; its message is one line."""

    exit_code: int = 1


class UsageError(WstatsError):
    """A command-line option or argument is wrong."""

    exit_code = 2


class ReadError(WstatsError):
    """A data file cannot be read: missing, unreadable, unknown type, empty, truncated, corrupt."""


class ColumnError(ReadError):
    """A column named by the user is not in the file, is duplicated, or has the wrong type."""


class CodebookError(WstatsError):
    """A codebook cannot be used: TOML syntax, unknown reason or kind, conflicting rules."""


class ExpressionError(CodebookError):
    """A derived-variable expression names an unknown variable or uses a forbidden construct."""


class DesignError(WstatsError):
    """The sample design cannot be used as given (strata, PSU, FPC, replicates)."""


class WeightError(DesignError):
    """Weights are non-numeric, negative, missing, infinite, or all zero."""


class SingletonStratumError(DesignError):
    """Strata with a single PSU were found while singleton treatment is ``fail``."""


class EstimationError(WstatsError):
    """An estimate cannot be computed as asked (unknown statistic, bad quantile, ...)."""


class AnalysisError(WstatsError):
    """An analysis file or table spec is wrong (missing key, unknown format, bad path)."""


class OutputError(WstatsError):
    """An output cannot be written: it exists, its folder is missing or read-only, disk full."""

    exit_code = 3


class WstatsWarning(UserWarning):
    """A condition worth a look that does not stop the computation (printed once)."""


def did_you_mean(name: str, choices: Iterable[str]) -> str:
    """Return ``"; did you mean 'X'?"`` for the closest of *choices*, or ``""`` if none is close."""
    pool = list(choices)
    lowered = {c.lower(): c for c in pool}
    if name.lower() in lowered and lowered[name.lower()] != name:
        return f"; did you mean '{lowered[name.lower()]}'?"
    close = difflib.get_close_matches(name.lower(), list(lowered), n=1, cutoff=0.6)
    return f"; did you mean '{lowered[close[0]]}'?" if close else ""


def require_package(feature: str, where: str = "",
                    error: type[WstatsError] = UsageError) -> None:
    """Raise UsageError with the ``pip install`` line when *feature*'s optional package is absent.

    Called before any data is read, so that a missing package is reported before the work.
    """
    import importlib.util

    module, extra = OPTIONAL_PACKAGES[feature]
    if importlib.util.find_spec(module) is None:
        lead = f"{where}: " if where else ""
        raise error(f"{lead}{feature} need {module}, which is not installed; install it "
                         f"with: pip install 'wstats[{extra}]'")
