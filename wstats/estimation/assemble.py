"""From Pieces to the tidy EstimateTable's columns; the options that need no data.

Shared by the in-memory engine (:mod:`wstats.estimation.estimate`) and the engine that works
from summed partitions (:mod:`wstats.estimation.dask_engine`), so both give the same columns.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.reasons import VALID
from wstats.errors import EstimationError, did_you_mean
from wstats.estimation.statistics import Piece, Proportion, Quantile, add_intervals

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.estimation.reliability import ReliabilityStandard
    from wstats.estimation.results import EstimateTable

    Index = npt.NDArray[np.int64]

__all__ = ["NAMES", "Statistics", "check_options", "columns_of", "scope", "table_of"]

NAMES = ("mean", "total", "proportion", "ratio", "quantile")
Statistics = dict[str, list[str]] | list[str] | None


def table_of(pieces: list[Piece], by: Sequence[str],
             by_levels: list[tuple[list[Any], list[Any]]], reason_names: Sequence[str],
             level: float, proportion_ci: str, reliability: ReliabilityStandard | None,
             design_summary: dict[str, Any], settings: dict[str, Any],
             where: str | None = None) -> EstimateTable:
    """Return the EstimateTable of *pieces*: tidy columns, intervals, reliability flags.

    As :func:`wstats.estimation.estimate.estimate` makes it (without age adjustment).
    """
    from wstats.estimation.reliability import DEFAULT_STANDARD, assess
    from wstats.estimation.results import EstimateTable, object_column

    rows = columns_of(pieces, list(by), by_levels, reason_names, level)
    rules = reliability or DEFAULT_STANDARD
    same_kg = proportion_ci == "korn-graubard" and level == rules.kg_level
    old_flags = rows["flags"]
    flags, suppress = assess(rows, rules, level,
                             (rows["ci_low"], rows["ci_high"]) if same_kg else None)
    rows["flags"] = object_column([(*a, *f) for a, f in zip(old_flags, flags, strict=True)])
    rows["suppress"] = suppress
    return EstimateTable(rows, tuple(by), level, design_summary, {
        "proportion_ci": proportion_ci, "mean_ci": "wald-t", "quantile_ci": "woodruff",
        "df_rule": settings.get("df_rule"), "level": level, "reliability": rules.name,
        "deff_srs": "with-replacement", **scope(rows, by, where), **settings})


def scope(rows: dict[str, npt.NDArray[Any]], by: Sequence[str], where: str | None
           ) -> dict[str, Any]:
    """Return what the table covers: subpopulation, domains, statistics, range of df."""
    df = rows["df"][np.isfinite(rows["df"])]
    return {"where": where, "domains": list(by),
            "statistics": list(dict.fromkeys(str(s) for s in rows["statistic"])),
            "df_range": [float(df.min()), float(df.max())] if len(df) else None}


def check_options(statistics: str | Sequence[str] | Mapping[str, str | Sequence[str]] | None,
                   level: float, proportion_ci: str, quantiles: Sequence[float]) -> Statistics:
    """Check the options that need no data; return the statistics as a list, dict or None."""
    if not (isinstance(level, int | float) and 0.0 < float(level) < 1.0):
        raise EstimationError(f"confidence level {level!r} is outside (0, 1); use e.g. 0.95")
    Proportion(proportion_ci)  # checks the name
    for p in quantiles:
        Quantile(p)
    if statistics is None:
        return None
    if isinstance(statistics, Mapping):
        return {str(v): stat_names(s) for v, s in statistics.items()}
    return stat_names(statistics)


def stat_names(statistics: str | Sequence[str]) -> list[str]:
    """Return one variable's statistics as a list of checked names."""
    names = [statistics] if isinstance(statistics, str) else list(statistics)
    for name in names:
        if name not in NAMES:
            raise EstimationError(
                f"statistic '{name}' is not one of {', '.join(NAMES)}{did_you_mean(name, NAMES)}"
            )
    return names


def columns_of(pieces: list[Piece], by: list[str],
             by_levels: list[tuple[list[Any], list[Any]]], reason_names: Sequence[str],
             level: float) -> dict[str, npt.NDArray[Any]]:
    """Return the tidy columns of all pieces (per ESTIMATE_COLUMNS, by-columns after ``p``)."""
    from wstats.estimation.results import ESTIMATE_COLUMNS, object_column

    cols: dict[str, npt.NDArray[Any]] = {}
    numeric = ("estimate", "se", "ci_low", "ci_high", "df", "deff", "deff_weight", "n_eff",
               "weighted_n")
    cols["variable"] = object_column([p.variable for p in pieces for _ in p.domain])
    cols["statistic"] = object_column([p.statistic for p in pieces for _ in p.domain])
    cols["level"] = object_column([lv for p in pieces for lv in p.level])
    cols["p"] = _stack(pieces, lambda p: np.full(len(p.domain), p.p))
    domain = _stack(pieces, lambda p: p.domain).astype(np.int64)
    cols.update(_by_columns(domain, by, by_levels))
    for name in numeric:
        cols[name] = np.concatenate([getattr(p, name) for p in pieces]) if pieces else np.zeros(0)
    with np.errstate(divide="ignore", invalid="ignore"):
        cols["cv"] = np.where(cols["estimate"] != 0, cols["se"] / np.abs(cols["estimate"]),
                              np.nan)
    cols["n"] = _stack(pieces, lambda p: p.n).astype(np.int64)
    add_intervals(cols["estimate"], cols["se"], cols["n"].astype(np.float64), cols["df"],
                  [p.interval for p in pieces for _ in p.domain], cols["ci_low"],
                  cols["ci_high"], level)
    counts = np.vstack([p.reasons for p in pieces]) if pieces else np.zeros((0, 1), np.int64)
    cols["reasons"] = object_column(
        [{reason_names[int(j)]: int(c[j]) for j in np.flatnonzero(c) if j != VALID}
         for c in counts])
    cols["flags"] = object_column([()] * len(domain))
    cols["suppress"] = np.zeros(len(domain), dtype=bool)
    order = [*ESTIMATE_COLUMNS[:4], *by, *ESTIMATE_COLUMNS[4:]]
    return {c: cols[c] for c in order}


def _stack(pieces: list[Piece], get: Callable[[Piece], Any]) -> npt.NDArray[Any]:
    """Return the per-piece arrays *get* returns, end to end."""
    return np.concatenate([get(p) for p in pieces]) if pieces else np.zeros(0)


def _by_columns(domain: Index, by: list[str], by_levels: list[tuple[list[Any], list[Any]]]
                ) -> dict[str, npt.NDArray[Any]]:
    """Return one column per by-variable: the level shown for each row (None: population)."""
    from wstats.estimation.results import object_column

    if not by:
        return {}
    sizes = [max(len(v), 1) for v, _ in by_levels]
    cell = np.where(domain > 0, domain - 1, 0)
    idx = np.unravel_index(cell, sizes)
    out: dict[str, npt.NDArray[Any]] = {}
    for k, name in enumerate(by):
        display = object_column([*by_levels[k][1], None])
        out[name] = display[np.where(domain > 0, np.minimum(idx[k], len(display) - 1), -1)]
    return out
