"""Rows of a comparison: differences between groups and global tests, from one covariance.

A row is a plain dict (JSON-ready); :mod:`wstats.reports.compare` collects them into tidy
tables. Column meanings are listed in :data:`DIFFERENCE_COLUMNS` and :data:`TEST_COLUMNS`.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import replace
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.estimation.contrasts import (
    contrast,
    differences,
    t_two_sided,
    trend_coefficients,
    wald_equal,
)
from wstats.estimation.covariance import joint_covariance
from wstats.estimation.influence import indicator_influence
from wstats.estimation.intervals import wald_t
from wstats.estimation.rao_scott import rao_scott

if TYPE_CHECKING:
    from wstats.estimation.covariance import Covariance
    from wstats.estimation.sums import WeightedSums

#: (group a, group b, variance of a, variance of b) -> degrees of freedom of b - a
PairDf = Callable[[int, int, float, float], float]

__all__ = ["DIFFERENCE_COLUMNS", "FLAGS", "TEST_COLUMNS", "PairDf", "difference_rows",
           "rao_scott_table", "trend_rows", "wald_row"]

#: variable, statistic (mean / proportion / nonresponse-rate), level (None for a mean), by,
#: group_a, group_b (level labels; the difference is b - a), estimate_a, estimate_b,
#: difference, se (sqrt(c'Vc)), ci_low, ci_high (Wald-t on df), df, t, p (two-sided),
#: p_adjusted (per the call's adjustment over all its difference rows), flags, standard
#: (the standard population of age-adjusted rows, else None)
DIFFERENCE_COLUMNS: tuple[str, ...] = (
    "variable", "statistic", "level", "by", "group_a", "group_b", "estimate_a", "estimate_b",
    "difference", "se", "ci_low", "ci_high", "df", "t", "p", "p_adjusted", "flags", "standard")

#: variable, by, test (rao-scott / wald / trend-linear / trend-quadratic), quantity (mean,
#: proportion, a level's proportion under age adjustment, nonresponse-rate or reasons),
#: level, statistic (the F or the t), df1, df2, p; for rao-scott also pearson_chisq,
#: first_order_f, mean_deff, deff_cv2; estimate and se for trend contrasts; flags, standard
TEST_COLUMNS: tuple[str, ...] = (
    "variable", "by", "test", "quantity", "level", "statistic", "df1", "df2", "p",
    "pearson_chisq", "first_order_f", "mean_deff", "deff_cv2", "estimate", "se", "flags",
    "standard")

#: flag id -> meaning (and source) of the flags a comparison row can carry
FLAGS: dict[str, str] = {
    "no-estimate": "a group has no estimate (no respondent in it, or a subpopulation that "
                   "selects no row): nothing to compare (common practice, no source)",
    "se-zero": "the standard error is 0 or could not be estimated: no test (common "
               "practice, no source)",
    "df<8": "fewer than 8 degrees of freedom; needs statistical review (NCHS Data "
            "Presentation Standards for Proportions, 2017)",
    "age-cell-0-or-100": "an age group's estimate is 0% or 100% (SE 0): the variance of the "
                         "age-adjusted value is understated (REFERENCES §15)",
    "wald-unstable": "few degrees of freedom for the number of groups (d - k + 2 <= 0): the "
                     "Wald F is not defined (Korn & Graubard 1990)",
}


def _flags(se: float, df: float, extra: Sequence[str] = (), estimated: bool = True
           ) -> list[str]:
    """Return the flag ids of one row (*estimated*: every estimate it compares was made)."""
    out = list(extra)
    if not estimated:
        out.append("no-estimate")
    elif not (np.isfinite(se) and se > 0):
        out.append("se-zero")
    if df < 8:
        out.append("df<8")
    return out


def difference_rows(cov: Covariance, pairs: Sequence[tuple[int, int]], labels: Sequence[str],
                    head: dict[str, Any], level: float, flags: Sequence[str] = (),
                    pair_df: PairDf | None = None) -> list[dict[str, Any]]:
    """Return one row per pair (a, b) of estimates of *cov*: b - a with SE, CI, t and p.

    *head* holds the row's variable, statistic, level, by and standard; *labels* the groups'.
    *pair_df* (a, b, v_a, v_b) -> df replaces the design df of a pair (pooled periods:
    Satterthwaite's, :func:`wstats.design.pooling.change_df`).
    """
    a = np.array([p[0] for p in pairs], dtype=np.int64)
    b = np.array([p[1] for p in pairs], dtype=np.int64)
    d = differences(cov, a, b)
    row_df = np.full(len(a), cov.df)
    if pair_df is not None:
        v = np.diag(cov.matrix)
        row_df = np.array([pair_df(int(i), int(j), float(v[i]), float(v[j]))
                           for i, j in zip(a, b, strict=True)])  # loop over pairs only
        d = replace(d, p=t_two_sided(d.t, row_df))
    low, high = wald_t(d.estimate, d.se, row_df, level)
    rows = []
    for k in range(len(a)):  # loop over group pairs only
        rows.append({**head, "group_a": labels[a[k]], "group_b": labels[b[k]],
                     "estimate_a": float(cov.estimate[a[k]]),
                     "estimate_b": float(cov.estimate[b[k]]),
                     "difference": float(d.estimate[k]), "se": float(d.se[k]),
                     "ci_low": float(low[k]), "ci_high": float(high[k]),
                     "df": float(row_df[k]), "t": float(d.t[k]), "p": float(d.p[k]),
                     "p_adjusted": float(d.p[k]),
                     "flags": _flags(float(d.se[k]), float(row_df[k]), flags,
                                     bool(np.isfinite(cov.estimate[[a[k], b[k]]]).all()))})
    return rows


def _test_row(head: dict[str, Any], **values: Any) -> dict[str, Any]:
    """Return a test row with every column of :data:`TEST_COLUMNS` (missing ones None)."""
    row = dict.fromkeys(TEST_COLUMNS)
    row.update(head)
    row.update(values)
    return row


def wald_row(cov: Covariance, head: dict[str, Any], flags: Sequence[str] = ()) -> dict[str, Any]:
    """Return the adjusted Wald F row that every estimate of *cov* is equal."""
    w = wald_equal(cov)
    # with fewer than 2 groups estimated there is no F whatever the df (flag se-zero only)
    unstable = w.df1 >= 1 and not w.df2 > 0
    extra = list(flags) + (["wald-unstable"] if unstable else [])
    return _test_row(head, test="wald", statistic=w.f, df1=w.df1, df2=w.df2, p=w.p,
                     flags=_flags(1.0 if np.isfinite(w.f) or unstable else np.nan, cov.df,
                                  extra, int(np.isfinite(cov.estimate).sum()) >= 2))


def rao_scott_table(sums: WeightedSums, cell: Any, shape: tuple[int, int],
                    head: dict[str, Any]) -> dict[str, Any]:
    """Return the Rao-Scott row of an r x c table whose cells (row-major) each row codes.

    *cell*: per row its cell number, -1 outside the table; the shares and their covariance
    are taken over the population domain. n counts the rows in the table with a positive
    weight (a row of weight 0 adds nothing to the shares, so it is not in the table).
    """
    k = shape[0] * shape[1]
    n = int(np.count_nonzero((np.asarray(cell) >= 0) & (sums.design.weights > 0)))
    inf = indicator_influence(sums, cell, k)
    cov = joint_covariance(sums, [(inf, np.zeros(k, np.int64), np.arange(k))])
    shares = np.nan_to_num(cov.estimate).reshape(shape)
    rs = rao_scott(shares, cov.matrix, n, cov.df)
    return _test_row(head, test="rao-scott", statistic=rs.f, df1=rs.df1, df2=rs.df2, p=rs.p,
                     pearson_chisq=rs.pearson, first_order_f=rs.first_f,
                     mean_deff=rs.mean_deff, deff_cv2=rs.deff_cv2,
                     flags=_flags(1.0 if np.isfinite(rs.f) else np.nan, cov.df,
                                  estimated=n > 0))


def trend_rows(cov: Covariance, scores: Sequence[float], head: dict[str, Any],
               flags: Sequence[str] = ()) -> list[dict[str, Any]]:
    """Return the linear (and, with 4 or more groups, quadratic) trend contrast rows.

    Groups without an estimate (no respondent) are left out, as in the Wald F: the
    contrasts are those of the remaining levels' scores.
    """
    made = np.flatnonzero(np.isfinite(cov.estimate))
    if len(made) < 2:
        return [_test_row(head, test="trend-linear", statistic=np.nan, df1=1.0, df2=cov.df,
                          p=np.nan, estimate=np.nan, se=np.nan,
                          flags=_flags(np.nan, cov.df, flags, estimated=False))]
    cov = cov.subset(made)
    linear, quadratic = trend_coefficients(np.asarray(scores, dtype=np.float64)[made])
    rows = []
    for name, coef in (("trend-linear", linear), ("trend-quadratic", quadratic)):
        if coef is None:
            continue
        c = contrast(cov, coef)
        rows.append(_test_row(head, test=name, statistic=float(c.t[0]), df1=1.0, df2=cov.df,
                              p=float(c.p[0]), estimate=float(c.estimate[0]),
                              se=float(c.se[0]), flags=_flags(float(c.se[0]), cov.df, flags)))
    return rows
