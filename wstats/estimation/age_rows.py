"""Age-adjusted rows of an estimate table (``estimate(..., age_adjust=, standard=)``).

For every variable whose statistic is a mean or a proportion, one adjusted row per domain
(the whole population and each by-cell) and level, beside the crude rows, carrying the
standard's name in the ``standard`` column. Intervals are Wald-t on the design degrees of
freedom (also for proportions); deff and n_eff are not defined for an adjusted value (NaN).
``n`` and ``weighted_n`` count the valid rows with a known age group.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.reasons import VALID
from wstats.errors import EstimationError
from wstats.estimation.age_adjust import (
    AGE_FLAG,
    adjust_cells,
    check_age_roles,
    check_standard_covers,
    unit_label,
)
from wstats.estimation.covariance import joint_covariance
from wstats.estimation.influence import domain_sums, mean_influence, proportion_influence
from wstats.estimation.intervals import wald_t

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.columns import Dataset, DecodedColumn
    from wstats.design.declared import Design
    from wstats.estimation.influence import DomainSums
    from wstats.estimation.standards import Standard

__all__ = ["age_adjusted_rows", "with_rows"]


def age_adjusted_rows(data: Dataset, design: Design, jobs: Sequence[tuple[str, str]],
                      by: Sequence[str], where: str | None, age: str, standard: Standard,
                      level: float) -> list[dict[str, Any]]:
    """Return the adjusted rows of (variable, statistic) *jobs* (means and proportions).

    Rows are dicts with the estimate table's columns (by-variables by name) and
    ``standard``; population rows first, then the by-cells, as the crude rows.
    """
    from wstats.estimation.standards import adjustment_weights

    check_age_roles(age, by, [name for name, _ in jobs])
    whole = domain_sums(data, design, [age], where)
    cells = domain_sums(data, design, [*by, age], where) if by else None
    codes, shown = whole.levels[0]
    weights = adjustment_weights(standard, codes, [str(s) for s in shown], age)
    check_standard_covers(weights, whole.sums.domains.cell, whole.sums.domains.inside,
                          [str(s) for s in shown], age, standard.name)
    rows: list[dict[str, Any]] = []
    for name, stat in jobs:  # loop over variables only
        if stat not in ("mean", "proportion"):
            raise EstimationError(f"age adjustment covers means and proportions; '{name}' asks "
                                  f"for a {stat}")
        parts = [(whole, ())] + ([(cells, tuple(by))] if cells is not None else [])
        for eng, names in parts:
            rows += _rows(data, eng, name, stat, names, weights, [str(s) for s in shown],
                          age, standard.name, level)
    return rows


def _rows(data: Dataset, eng: DomainSums, name: str, stat: str, by: tuple[str, ...],
          weights: npt.NDArray[np.float64], age_labels: list[str], age: str, std: str,
          level: float) -> list[dict[str, Any]]:
    """Return the adjusted rows of one variable over the domains of one engine."""
    col = eng.column(data, name)
    if stat == "mean":
        labels: list[str | None] = [None]
        inf = mean_influence(eng.sums, col)
    else:
        found, inf = proportion_influence(eng.sums, col)
        labels = list(found)
    n_age = len(weights)
    units = (eng.sums.domains.n_cells // n_age) if by else 1
    uu, ll, aa = np.meshgrid(np.arange(units), np.arange(len(labels)), np.arange(n_age),
                             indexing="ij")
    dom = 1 + uu.ravel() * n_age + aa.ravel()
    cov = joint_covariance(eng.sums, [(inf, dom, ll.ravel())])
    naming = unit_label(by, eng.levels[: len(by)])
    adj = adjust_cells(cov, weights, lambda k: naming(k // len(labels) + (1 if by else 0)),
                       age_labels, age, name)
    est = adj.covariance.estimate
    se = np.sqrt(np.maximum(np.diag(adj.covariance.matrix), 0.0))
    df = np.full(len(est), adj.covariance.df)
    low, high = wald_t(est, se, df, level)
    counts = _counts(eng, col.valid, units, n_age)
    reasons = _reasons(data, eng, col, units, n_age)
    out = []
    for k in range(len(est)):  # loop over domains x levels only
        u = k // len(labels)
        row = {"variable": name, "statistic": stat, "level": labels[k % len(labels)],
               "p": np.nan, "estimate": est[k], "se": se[k], "ci_low": low[k],
               "ci_high": high[k], "df": df[k], "deff": np.nan, "deff_weight": np.nan,
               "n_eff": np.nan, "n": int(counts[u, 0]), "weighted_n": counts[u, 1],
               "reasons": reasons[u], "flags": (AGE_FLAG,) if adj.degenerate[k] else (),
               "suppress": False, "standard": std}
        row.update(_by_values(eng, by, u))
        out.append(row)
    return out


def _counts(eng: DomainSums, valid: npt.NDArray[np.bool_], units: int, n_age: int
            ) -> npt.NDArray[np.float64]:
    """Return per unit the valid rows with a known age group and their weight: (U, 2)."""
    c = eng.sums.valid_counts(valid)[1:, :2]
    return np.asarray(c.reshape(units, n_age, 2).sum(axis=1))


def _reasons(data: Dataset, eng: DomainSums, col: DecodedColumn, units: int, n_age: int
             ) -> list[dict[str, int]]:
    """Return per unit the rows left out by reason, among the rows with a known age group."""
    names = data.vocabulary.names
    c = eng.sums.reason_counts(col, len(names))[1:]
    per_unit = c.reshape(units, n_age, len(names)).sum(axis=1)
    return [{names[j]: int(row[j]) for j in np.flatnonzero(row) if j != VALID}
            for row in per_unit]


def _by_values(eng: DomainSums, by: tuple[str, ...], unit: int) -> dict[str, Any]:
    """Return the by-columns' shown levels of by-cell *unit* (empty for the population)."""
    if not by:
        return {}
    sizes = [max(len(v), 1) for v, _ in eng.levels[: len(by)]]
    idx = np.unravel_index(unit, sizes)
    return {b: eng.levels[k][1][int(idx[k])] for k, b in enumerate(by)}


def with_rows(columns: dict[str, npt.NDArray[Any]], rows: Sequence[dict[str, Any]]
              ) -> dict[str, npt.NDArray[Any]]:
    """Return the table *columns* with *rows* appended and a ``standard`` column added.

    Crude rows get ``standard`` None; a column a row lacks (a by-variable on a population
    row) gets None.
    """
    from wstats.estimation.results import object_column

    n = len(next(iter(columns.values()))) if columns else 0
    out: dict[str, npt.NDArray[Any]] = {}
    for key, values in columns.items():
        extra = [r.get(key) for r in rows]
        if values.dtype == object:
            out[key] = object_column([*values.tolist(), *extra])
        else:
            out[key] = np.concatenate([values, np.asarray(extra, dtype=values.dtype)])
    out["standard"] = object_column([None] * n + [r["standard"] for r in rows])
    return out
