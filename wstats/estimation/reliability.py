"""Reliability flags and suppression rules for estimates, each rule with its source.

A :class:`ReliabilityStandard` holds the thresholds; :func:`assess` applies it to a tidy
estimate frame and returns, per row, the rule ids that fired and whether to suppress.
Rule ids are our own short names (see :data:`RULES`); they spell the default thresholds.

Interpretations where the published rules are silent (see ``docs/reliability.md``):

- The relative-width rules (W/p and W/(1-p)) are undefined at p = 0 (resp. p = 1) and are not
  applied there; such estimates are flagged ``p-at-0-or-1`` for review instead. This keeps the
  rules symmetric under p <-> 1-p.
- The complement rule uses the same width band as the suppression rule (0.05 < W < 0.30).
- The width rules always use a Korn-Graubard interval at ``standard.kg_level`` computed from
  estimate, se, n and df, whatever interval method or level the table shows (an estimate
  whose own proportion intervals are exactly that one hands them over instead of solving
  them twice).
- n_eff is recomputed as p(1-p)/se^2 capped at n (n when p is 0 or 1 or se is 0).
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from wstats.errors import EstimationError, did_you_mean
from wstats.estimation.intervals import effective_n, korn_graubard_ci

if TYPE_CHECKING:
    from collections.abc import Mapping
    from typing import Any

    import numpy.typing as npt
    import pandas as pd

    Bool = npt.NDArray[np.bool_]
    #: estimate rows: a pandas frame or a mapping of column name -> 1-D array
    Rows = pd.DataFrame | Mapping[str, Any]

__all__ = [
    "NONRESPONSE_RULES",
    "DEFAULT_STANDARD",
    "RULES",
    "STANDARDS",
    "ReliabilityStandard",
    "assess",
    "describe",
    "evaluate",
    "footnotes",
]

_NCHS_2017 = (
    "Parker JD, Talih M, Malec DJ, et al. National Center for Health Statistics Data "
    "Presentation Standards for Proportions. Vital Health Stat 2(175). 2017"
)
_NCHS_RSE = "NCHS ambulatory care survey documentation: RSE above 30% or fewer than 30 records"

#: rule id -> (short description, source). Order here is the order flags are reported in.
_NCES = "NCES Statistical Standards, Standard 1-3 (item response rates)"
#: flag id -> (description, source) for the flags of a nonresponse table.
NONRESPONSE_RULES: dict[str, tuple[str, str]] = {
    "response<70%": ("item response rate below 70% among those asked; analyse the "
                     "nonresponse for bias", _NCES),
    "none-asked": ("no row of the domain was asked the item (all skipped)",
                   "common practice, no source"),
}

RULES: dict[str, tuple[str, str]] = {
    "empty": ("no records in the domain; nothing to estimate", "common practice, no source"),
    "neff<30": ("effective sample size below 30", _NCHS_2017),
    "kg-width>=0.30": ("Korn-Graubard 95% interval width of 0.30 or more", _NCHS_2017),
    "kg-relwidth>130%": (
        "Korn-Graubard interval width above 0.05 and above 130% of the proportion",
        _NCHS_2017,
    ),
    "df<8": ("fewer than 8 degrees of freedom; needs statistical review", _NCHS_2017),
    "p-at-0-or-1": ("proportion of exactly 0 or 1; needs statistical review", _NCHS_2017),
    "complement-relwidth>130%": (
        "interval width above 130% of the complement 1-p; needs statistical review",
        _NCHS_2017,
    ),
    "n<30": ("fewer than 30 records; unreliable", _NCHS_RSE),
    "rse>30%": ("relative standard error above 30%; unreliable", _NCHS_RSE),
    "se-zero": (
        "standard error of 0 (a constant variable, or a quantile inside a block of tied "
        "values); check the estimate",
        "common practice, no source",
    ),
    "se-missing": ("standard error cannot be estimated", "common practice, no source"),
}

_PROPORTION_RULES = ("proportion-nchs", "rse", "none")
_OTHER_RULES = ("rse", "none")


@dataclass(frozen=True)
class ReliabilityStandard:
    """Thresholds of a reliability standard.

    Attributes
    ----------
    name : our short name of the standard (shown in tables and the methods text).
    proportions : rules for proportions: ``"proportion-nchs"`` (Parker et al. 2017),
        ``"rse"`` (the RSE rules below) or ``"none"``.
    others : rules for means, totals, ratios, quantiles: ``"rse"`` or ``"none"``.
    min_n_eff : suppress a proportion whose effective sample size is below this.
    max_width : suppress a proportion whose Korn-Graubard width W is at least this.
    present_width : W at or below this is presented without the relative-width test.
    max_rel_width : between the two widths, suppress when W / p exceeds this (1.30 = 130%).
    max_complement_rel_width : between the two widths, flag when W / (1 - p) exceeds this.
    min_df : flag a proportion with fewer degrees of freedom than this.
    flag_boundary : flag a proportion of exactly 0 or 1.
    kg_level : confidence level of the Korn-Graubard interval the width rules use.
    max_rse : flag when se / |estimate| exceeds this (0.30 = 30%).
    min_n : flag when fewer records than this.
    rse_suppress : also suppress (not only flag) under the two RSE rules.
    flag_zero_se : flag a standard error of exactly 0 in a non-empty domain.
    flag_missing_se : flag a standard error that cannot be estimated (NaN).
    suppress_empty : suppress domains with no records.
    """

    name: str = "nchs-2017"
    proportions: str = "proportion-nchs"
    others: str = "rse"
    min_n_eff: float = 30.0
    max_width: float = 0.30
    present_width: float = 0.05
    max_rel_width: float = 1.30
    max_complement_rel_width: float = 1.30
    min_df: float = 8.0
    flag_boundary: bool = True
    kg_level: float = 0.95
    max_rse: float = 0.30
    min_n: float = 30.0
    rse_suppress: bool = False
    flag_zero_se: bool = True
    flag_missing_se: bool = True
    suppress_empty: bool = True

    def __post_init__(self) -> None:
        """Check the choices and that the widths are ordered."""
        _check_choice("proportions", self.proportions, _PROPORTION_RULES, self.name)
        _check_choice("others", self.others, _OTHER_RULES, self.name)
        if not 0.0 <= self.present_width < self.max_width:
            raise EstimationError(
                f"reliability standard '{self.name}': present_width {self.present_width} must be "
                f"at least 0 and below max_width {self.max_width}; lower present_width"
            )
        if not 0.0 < self.kg_level < 1.0:
            raise EstimationError(
                f"reliability standard '{self.name}': kg_level {self.kg_level} is outside (0, 1); "
                "give a fraction such as 0.95"
            )


def _check_choice(field: str, value: str, allowed: tuple[str, ...], name: str) -> None:
    """Raise EstimationError when *value* is not one of *allowed*."""
    if value not in allowed:
        raise EstimationError(
            f"reliability standard '{name}': {field} = '{value}' is not one of "
            f"{', '.join(allowed)}{did_you_mean(value, allowed)}"
        )


#: Selectable standards by our own name.
STANDARDS: dict[str, ReliabilityStandard] = {
    "nchs-2017": ReliabilityStandard(),
    "rse-30": ReliabilityStandard(name="rse-30", proportions="rse"),
    "none": ReliabilityStandard(
        name="none", proportions="none", others="none", flag_zero_se=False, flag_missing_se=False
    ),
}
DEFAULT_STANDARD: ReliabilityStandard = STANDARDS["nchs-2017"]

_REQUIRED = ("statistic", "estimate", "se", "df", "n")


def _column(rows: Rows, name: str) -> npt.NDArray[np.float64]:
    """Return a numeric column as float64 (None -> NaN)."""
    values = rows[name]
    if getattr(values, "dtype", None) is not None and values.dtype.kind in "fiub":
        return np.asarray(values, dtype=np.float64)
    import pandas as pd  # an object column: let pandas coerce None and text

    return np.asarray(pd.to_numeric(pd.Series(values), errors="coerce"), dtype=np.float64)


def _length(rows: Rows) -> int:
    """Return the number of rows of a frame or of a mapping of columns."""
    return len(rows[_REQUIRED[0]])


def _proportion_rules(
    p: npt.NDArray[np.float64],
    width: npt.NDArray[np.float64],
    n_eff: npt.NDArray[np.float64],
    df: npt.NDArray[np.float64],
    std: ReliabilityStandard,
) -> dict[str, Bool]:
    """Apply the NCHS 2017 proportion rules to arrays of p, KG width, n_eff and df."""
    band = (width > std.present_width) & (width < std.max_width)
    return {
        "neff<30": n_eff < std.min_n_eff,
        "kg-width>=0.30": width >= std.max_width,
        "kg-relwidth>130%": band & (p > 0) & (width > std.max_rel_width * p),
        "df<8": df < std.min_df,
        "p-at-0-or-1": ((p == 0) | (p == 1)) & std.flag_boundary,
        "complement-relwidth>130%": band
        & (p < 1)
        & (width > std.max_complement_rel_width * (1.0 - p)),
    }


def _rse_rules(
    est: npt.NDArray[np.float64],
    se: npt.NDArray[np.float64],
    n: npt.NDArray[np.float64],
    std: ReliabilityStandard,
) -> dict[str, Bool]:
    """Apply the RSE > 30% and fewer-than-30-records rules."""
    return {"n<30": (n > 0) & (n < std.min_n), "rse>30%": se > std.max_rse * np.abs(est)}


def evaluate(
    frame: Rows, standard: ReliabilityStandard = DEFAULT_STANDARD,
    kg_interval: tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]] | None = None,
) -> dict[str, Bool]:
    """Return rule id -> boolean array (one per row) of the rules that fire under *standard*.

    Parameters
    ----------
    frame : estimates with columns statistic, estimate, se, df, n (see ``ESTIMATE_COLUMNS``):
        a pandas frame or a mapping of column name -> 1-D array.
    standard : the reliability standard.
    kg_interval : (low, high) per row when the caller already holds the Korn-Graubard
        interval of every proportion row at ``standard.kg_level`` from these same columns
        (an estimate table whose proportion intervals are Korn-Graubard at that level); the
        width rules then use it instead of solving the same beta quantiles again.

    Returns
    -------
    dict over every id of :data:`RULES`, in that order; rules the standard does not use are
    all False.
    """
    missing = [c for c in _REQUIRED if c not in frame]
    if missing:
        raise EstimationError(
            f"cannot assess reliability: the estimate table lacks column(s) {', '.join(missing)}; "
            "pass a frame with the columns of wstats ESTIMATE_COLUMNS"
        )
    est, se, df, n = (_column(frame, c) for c in ("estimate", "se", "df", "n"))
    is_prop = np.asarray(frame["statistic"], dtype=object).astype(str) == "proportion"
    nchs = is_prop & (standard.proportions == "proportion-nchs")
    rse = np.where(is_prop, standard.proportions == "rse", standard.others == "rse")
    filled = n > 0
    # the interval only for the rows its rules apply to (the beta quantiles cost time)
    width = np.full(len(est), np.nan)
    rows = np.flatnonzero(nchs & filled)
    if rows.size and kg_interval is not None:
        width[rows] = kg_interval[1][rows] - kg_interval[0][rows]
    elif rows.size:
        low, high = korn_graubard_ci(est[rows], se[rows], n[rows], df[rows], standard.kg_level)
        width[rows] = high - low
    with np.errstate(invalid="ignore"):
        fired = _proportion_rules(est, width, effective_n(est, se, n), df, standard)
    out = {rule: fired[rule] & nchs & filled for rule in fired}
    out.update({r: b & rse & filled for r, b in _rse_rules(est, se, n, standard).items()})
    edge = is_prop & ((est == 0) | (est == 1))
    out["se-zero"] = filled & (se == 0) & ~edge & standard.flag_zero_se
    out["se-missing"] = filled & np.isnan(se) & standard.flag_missing_se
    out["empty"] = ~filled & standard.suppress_empty
    return {rule: np.asarray(out[rule], dtype=bool) for rule in RULES}


def _suppressing(standard: ReliabilityStandard) -> tuple[str, ...]:
    """Return the ids of the rules that suppress (the others only flag) under *standard*."""
    rules = ["empty", "neff<30", "kg-width>=0.30", "kg-relwidth>130%"]
    return tuple(rules + (["n<30", "rse>30%"] if standard.rse_suppress else []))


def assess(
    frame: Rows, standard: ReliabilityStandard = DEFAULT_STANDARD, level: float = 0.95,
    kg_interval: tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]] | None = None,
) -> tuple[list[tuple[str, ...]], npt.NDArray[np.bool_]]:
    """Flag and suppress estimates under a reliability standard.

    Parameters
    ----------
    frame : estimates with columns statistic, estimate, se, df, n (ci_low, ci_high, n_eff
        may be present but are not used: the width rules recompute a Korn-Graubard interval
        at ``standard.kg_level`` and n_eff from p, se, n so that they follow the standard).
    standard : the reliability standard (default: ``nchs-2017``).
    level : confidence level of the table's own intervals; accepted for the record, it does
        not change the outcome (see *frame*).
    kg_interval : the table's own Korn-Graubard limits, when they are at ``standard.kg_level``
        and were computed from these columns (see :func:`evaluate`): the same numbers, not
        solved twice.

    Returns
    -------
    (flags, suppress): per row, a tuple of the rule ids that fired (in :data:`RULES` order),
    and a boolean array that is True where a suppressing rule fired.

    Examples
    --------
    >>> import pandas as pd
    >>> f = pd.DataFrame({"statistic": ["mean"], "estimate": [10.0], "se": [4.0],
    ...                   "df": [30.0], "n": [100]})
    >>> assess(f)
    ([('rse>30%',)], array([False]))
    """
    fired = evaluate(frame, standard, kg_interval)
    ids = list(fired)
    n_rows = _length(frame)
    matrix = np.column_stack([fired[r] for r in ids]) if n_rows else np.zeros((0, len(ids)))
    codes = matrix.astype(np.int64) @ (1 << np.arange(len(ids), dtype=np.int64))
    patterns, inverse = np.unique(codes, return_inverse=True)
    names = [tuple(r for j, r in enumerate(ids) if int(code) >> j & 1) for code in patterns]
    flags = [names[i] for i in inverse.ravel()]
    stop = _suppressing(standard)
    suppress = np.logical_or.reduce([fired[r] for r in stop]) & np.ones(n_rows, dtype=bool)
    return flags, np.asarray(suppress, dtype=bool)


def describe(rule_id: str) -> str:
    """Return "description (source)" for a rule id.

    Examples
    --------
    >>> describe("df<8").split(";")[0]
    'fewer than 8 degrees of freedom'
    """
    if rule_id not in RULES:
        raise EstimationError(
            f"unknown reliability rule '{rule_id}'; known rules: {', '.join(RULES)}"
            f"{did_you_mean(rule_id, RULES)}"
        )
    text, source = RULES[rule_id]
    return f"{text} ({source})"


def footnotes(flags: Iterable[Iterable[str]]) -> list[str]:
    """Return one footnote line per rule that fired anywhere in *flags*, in RULES order.

    Examples
    --------
    >>> footnotes([("rse>30%",), ()])[0].startswith("rse>30%: relative standard error")
    True
    """
    seen = {rule for row in flags for rule in row}
    return [f"{rule}: {describe(rule)}." for rule in RULES if rule in seen]
