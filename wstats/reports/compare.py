"""``wstats.compare``: differences between groups with design-based SEs, and global tests.

For each variable, the estimates of every level of the grouping variable (a mean, or each
level's proportion) and their full covariance come from one pass of the sums engine
(:mod:`wstats.estimation.covariance`); differences, the Wald F, trend contrasts and the
Rao-Scott test all use that covariance (REFERENCES §12-§14). With ``age_adjust`` the group
estimates are directly age-adjusted first (§15). With ``reasons`` the item nonresponse of
each variable is compared too (:mod:`wstats.reports.compare_reasons`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.reasons import NOT_ASKED
from wstats.errors import EstimationError, UsageError, did_you_mean
from wstats.estimation.contrasts import ADJUSTMENTS, adjust_p
from wstats.estimation.covariance import Covariance, joint_covariance
from wstats.estimation.influence import (
    DomainSums,
    domain_sums,
    level_codes,
    mean_influence,
    proportion_influence,
)
from wstats.reports.compare_periods import period_pair_df
from wstats.reports.compare_result import Comparison, RowTable
from wstats.reports.compare_rows import (
    DIFFERENCE_COLUMNS,
    TEST_COLUMNS,
    PairDf,
    difference_rows,
    rao_scott_table,
    trend_rows,
    wald_row,
)

if TYPE_CHECKING:

    from wstats.decoding.columns import Dataset, DecodedColumn
    from wstats.design.declared import Design
    from wstats.estimation.standards import Standard

__all__ = ["Comparison", "RowTable", "compare"]

PAIRINGS = ("reference", "all")
#: reference names that mean the whole population: a part against its whole
_WHOLE = ("all", "total", "overall", "whole", "population")


@dataclass(frozen=True)
class _Plan:
    """What every variable of one call shares: engine, groups, pairs, age weights."""

    eng: DomainSums
    by: str
    labels: list[str]
    scores: list[float]
    pairs: list[tuple[int, int]]
    level: float
    trend: bool
    age: tuple[str, Any, list[str]] | None  # (variable, weights per level, labels)
    standard: str | None
    groups: DomainSums  # the sums over the groups alone (the same as eng without ages)
    pair_df: PairDf | None = None  # pooled periods: the df of each change (else design df)

    @property
    def n_groups(self) -> int:
        """Levels of the grouping variable."""
        return len(self.labels)

    @property
    def n_ages(self) -> int:
        """Levels of the age variable (1 without age adjustment)."""
        return 1 if self.age is None else len(self.age[2])


def compare(
    data: Dataset,
    design: Design,
    variables: Sequence[str],
    *,
    by: str,
    reference: str | None = None,
    pairs: str = "reference",
    adjust_p: str = "none",
    trend: bool = False,
    reasons: bool = False,
    where: str | None = None,
    categorical: Sequence[str] = (),
    continuous: Sequence[str] = (),
    level: float = 0.95,
    age_adjust: str | None = None,
    standard: str | Standard | None = None,
    not_asked: Sequence[str] = NOT_ASKED,
    period_df: str = "sum",
) -> Comparison:
    """Compare groups: differences with design-based SEs, global tests, trends, reasons.

    Parameters
    ----------
    data : decoded dataset; design : the sample design.
    variables : variables to compare (a mean for continuous/count variables, each level's
        proportion for categorical ones).
    by : the grouping variable; its levels (codebook order) are the groups.
    reference : label (or code) of the group the others are compared with (default: the
        first level); ignored with ``pairs="all"``.
    pairs : ``reference`` (every group against the reference) or ``all`` (every pair).
    adjust_p : multiplicity adjustment of the difference rows' p-values: ``none``, ``holm``
        (Holm 1979) or ``bh`` (Benjamini-Hochberg 1995), over all difference rows.
    trend : add linear (and with 4+ groups quadratic) contrasts over the ordered groups.
    reasons : compare item nonresponse across groups too.
    where : population domain condition (expression language).
    categorical : variables to treat as categorical whatever their kind.
    continuous : variables whose means are compared whatever their kind (e.g. the mean of
        a categorical code, as a table row with ``statistic = "mean"`` asks).
    level : confidence level of the intervals of differences.
    age_adjust : the age variable: group estimates are directly age-adjusted.
    standard : standard population for ``age_adjust`` (a built-in name, a TOML file path or
        a :class:`~wstats.estimation.standards.Standard`).
    not_asked : reasons meaning the item was not asked (left out of nonresponse rates);
        default skipped and not_applicable, as in :func:`wstats.nonresponse`.

    Returns
    -------
    Comparison
        Tidy ``differences`` and ``tests`` tables.

    Examples
    --------
    >>> from wstats import Dataset, Design
    >>> ds = Dataset.from_arrays({"y": [1.0, 2.0, 3.0, 5.0], "g": [1.0, 1.0, 2.0, 2.0],
    ...                           "w": [1.0, 1.0, 1.0, 1.0]})
    >>> round(compare(ds, Design("w"), ["y"], by="g").differences.rows[0]["difference"], 2)
    2.5
    """
    if isinstance(variables, str):  # one name, as estimate() takes it
        variables = [variables]
    plan = _plan(data, design, variables, by, reference, pairs, adjust_p, level, trend,
                 age_adjust, standard, [*categorical, *continuous], where, reasons)
    plan = replace(plan, pair_df=period_pair_df(plan.by, plan.labels,
                                                plan.eng.bound.summary(), period_df))
    diff_rows: list[dict[str, Any]] = []
    test_rows: list[dict[str, Any]] = []
    for name in variables:  # loop over variables only
        forced = True if name in categorical else (False if name in continuous else None)
        d, t = _variable(data, plan, name, forced)
        diff_rows += d
        test_rows += t
        if reasons:
            from wstats.reports.compare_reasons import reason_rows

            d, t = reason_rows(data, plan, name, not_asked)
            diff_rows += d
            test_rows += t
    _adjust(diff_rows, adjust_p)
    settings = {"pairs": pairs, "reference": plan.labels[plan.pairs[0][0]],
                "adjust_p": adjust_p,
                "df_rule": "design" if plan.pair_df is None else "satterthwaite (periods)",
                "level": level, "where": where,
                "standard": plan.standard, "age_adjust": age_adjust,
                "deff_at": "independence fit", "wald_df2": "d - k + 2"}
    return Comparison(RowTable(tuple(diff_rows), DIFFERENCE_COLUMNS),
                      RowTable(tuple(test_rows), TEST_COLUMNS), by, level,
                      plan.eng.bound.summary(), settings)


def _plan(data: Dataset, design: Design, variables: Sequence[str], by: str,
          reference: str | None, pairs: str, adjust: str, level: float, trend: bool,
          age_adjust: str | None, standard: str | Standard | None,
          categorical: Sequence[str], where: str | None, reasons: bool) -> _Plan:
    """Check the options and build what every variable shares."""
    _check_options(pairs, adjust, level, age_adjust, standard)
    from wstats.estimation.domain_setup import check_names

    check_names(data, [*variables, by, *categorical, *([age_adjust] if age_adjust else [])])
    if by in variables:
        raise UsageError(f"variable '{by}' is both compared and used to form groups; drop it "
                         "from one of them")
    if age_adjust is not None:
        from wstats.estimation.age_adjust import check_age_roles

        check_age_roles(age_adjust, [by], variables, "the grouping variable", "compared")
    eng = domain_sums(data, design, [by] if age_adjust is None else [by, age_adjust], where)
    values, shown = eng.levels[0]
    labels = [str(s) for s in shown]
    if len(labels) < 2:
        raise EstimationError(f"grouping variable '{by}' has {len(labels)} level(s); a "
                              "comparison needs at least 2")
    ref = _reference(reference, labels, values, by)
    chosen = ([(a, b) for a in range(len(labels)) for b in range(a + 1, len(labels))]
              if pairs == "all" else [(ref, b) for b in range(len(labels)) if b != ref])
    if trend and not all(isinstance(v, int | float) for v in values):
        raise UsageError(f"a trend across the levels of {by} needs numeric codes to order and "
                         f"space them, but {by} holds text; recode it to numbers in the "
                         "codebook or leave out --trend")
    scores = [float(v) if isinstance(v, int | float) else float(i)
              for i, v in enumerate(values)]
    if age_adjust is None or standard is None:
        return _Plan(eng, by, labels, scores, chosen, level, trend, None, None, eng)
    # the reasons are compared crude: they need the groups without the age cells
    groups = domain_sums(data, design, [by], where) if reasons else eng
    age, name = _age_plan(data, eng, age_adjust, standard)
    return _Plan(eng, by, labels, scores, chosen, level, trend, age, name, groups)


def _age_plan(data: Dataset, eng: DomainSums, age_adjust: str, standard: str | Standard
              ) -> tuple[tuple[str, Any, list[str]], str]:
    """Return (age variable, weights per age level, age labels) and the standard's name."""
    from wstats.estimation.age_adjust import check_standard_covers
    from wstats.estimation.levels import level_index
    from wstats.estimation.standards import adjustment_weights, load_standard

    std = load_standard(standard) if isinstance(standard, str) else standard
    codes, shown = eng.levels[1]
    labels = [str(s) for s in shown]
    weights = adjustment_weights(std, codes, labels, age_adjust)
    col = eng.column(data, age_adjust)
    check_standard_covers(weights, level_index(col, codes, col.valid),
                          eng.sums.domains.inside, labels, age_adjust, std.name)
    return (age_adjust, weights, labels), std.name


def _check_options(pairs: str, adjust: str, level: float, age_adjust: str | None,
                   standard: Any) -> None:
    """Check the options that need no data."""
    if pairs not in PAIRINGS:
        raise UsageError(f"pairs '{pairs}' is not one of {', '.join(PAIRINGS)}"
                         f"{did_you_mean(pairs, PAIRINGS)}")
    if adjust not in ADJUSTMENTS:
        raise UsageError(f"p-value adjustment '{adjust}' is not one of "
                         f"{', '.join(ADJUSTMENTS)}{did_you_mean(adjust, ADJUSTMENTS)}")
    if not (isinstance(level, int | float) and 0.0 < float(level) < 1.0):
        raise UsageError(f"confidence level {level!r} is outside (0, 1); use e.g. 0.95")
    if (age_adjust is None) != (standard is None):
        raise UsageError("age adjustment needs both the age variable and a standard "
                         "population (--age-adjust AGEVAR --standard NAME|FILE.toml)")


def _reference(reference: str | None, labels: list[str], values: list[Any], by: str) -> int:
    """Return the index of the reference group (default the first)."""
    if reference is None:
        return 0
    if not isinstance(reference, str):  # a code given as a number (Python callers)
        reference = _code(reference)
    if reference in labels:
        return labels.index(reference)
    codes = [_code(v) for v in values]
    if reference in codes:
        return codes.index(reference)
    if reference.lower() in _WHOLE:
        raise UsageError(
            f"reference '{reference}' is the whole population, of which every group of {by} "
            "is a part; a part-versus-whole difference needs the part-whole formula, which "
            "wstats does not compute: compare the groups with each other instead")
    raise UsageError(f"reference '{reference}' is not a level of {by} (levels: "
                     f"{', '.join(labels)}){did_you_mean(reference, labels)}")


def _code(v: Any) -> str:
    """Return a level value as text: ``3`` for 3.0."""
    return str(int(v)) if isinstance(v, float) and v.is_integer() else str(v)


def _is_categorical(col: DecodedColumn, forced: bool | None) -> bool:
    """Return whether *col* is compared by its levels' proportions (*forced*: the caller's)."""
    from wstats.estimation.statistics import is_categorical

    return is_categorical(col) if forced is None else forced


def _variable(data: Dataset, plan: _Plan, name: str, forced: bool | None
              ) -> tuple[list[dict[str, Any]], list[dict[str, Any]]]:
    """Return the difference and test rows of one variable."""
    col = plan.eng.column(data, name)
    if _is_categorical(col, forced):
        labels, inf = proportion_influence(plan.eng.sums, col)
        stat = "proportion"
    else:
        labels, inf = [""], mean_influence(plan.eng.sums, col)
        stat = "mean"
    cov = group_covariance(plan, inf, len(labels), name)
    diffs: list[dict[str, Any]] = []
    tests: list[dict[str, Any]] = []
    g = plan.n_groups
    head = {"variable": name, "statistic": stat, "by": plan.by, "standard": plan.standard}
    for j, lab in enumerate(labels):  # loop over levels only
        flags = _age_flags(cov, j, g)
        sub = cov.covariance.subset(np.arange(j * g, (j + 1) * g))
        level_head = {**head, "level": lab if stat == "proportion" else None}
        diffs += difference_rows(sub, plan.pairs, plan.labels, level_head, plan.level, flags,
                                 plan.pair_df)
        test_head = {"variable": name, "by": plan.by, "quantity": stat,
                     "level": level_head["level"], "standard": plan.standard}
        if plan.trend:
            tests += trend_rows(sub, plan.scores, test_head, flags)
        if stat == "mean" or plan.age is not None:
            tests.append(wald_row(sub, test_head, flags))
    if stat == "proportion" and plan.age is None:
        tests.append(_independence(data, plan, col, name))
    return diffs, tests


@dataclass(frozen=True)
class _GroupCov:
    """Group estimates (levels x groups, level-major) with their covariance and cell facts.

    ``degenerate``: per (level, group), an age cell with SE 0 (always False without ages).
    """

    covariance: Covariance
    degenerate: Any


def group_covariance(plan: _Plan, inf: Any, n_levels: int, name: str) -> _GroupCov:
    """Return the estimates of every (level, group), age-adjusted when the plan says so."""
    from wstats.estimation.age_adjust import adjust_cells

    g, a = plan.n_groups, plan.n_ages
    lv, gg, aa = np.meshgrid(np.arange(n_levels), np.arange(g), np.arange(a), indexing="ij")
    dom = 1 + gg.ravel() * a + aa.ravel()
    cov = joint_covariance(plan.eng.sums, [(inf, dom, lv.ravel())])
    if plan.age is None:
        return _GroupCov(cov, np.zeros(n_levels * g, dtype=bool))
    age_name, weights, age_labels = plan.age
    adj = adjust_cells(cov, weights, lambda k: f"group '{plan.labels[k % g]}' of {plan.by}",
                       age_labels, age_name, name)
    return _GroupCov(adj.covariance, adj.degenerate)


def _age_flags(cov: _GroupCov, level: int, n_groups: int) -> list[str]:
    """Return the flags of one level's rows: a 0 %/100 % age cell in one of its groups."""
    from wstats.estimation.age_adjust import AGE_FLAG

    part = cov.degenerate[level * n_groups : (level + 1) * n_groups]
    return [AGE_FLAG] if bool(np.any(part)) else []


def _independence(data: Dataset, plan: _Plan, col: DecodedColumn, name: str
                  ) -> dict[str, Any]:
    """Return the Rao-Scott test of *name* x group over the population domain."""
    _, labels, code = level_codes(col)
    group = group_codes(plan)
    both = (code >= 0) & (group >= 0)
    cell = np.where(both, code * plan.n_groups + group, -1)
    return rao_scott_table(plan.eng.sums, cell, (len(labels), plan.n_groups),
                           {"variable": name, "by": plan.by, "quantity": "proportion",
                            "level": None, "standard": None})


def group_codes(plan: _Plan) -> Any:
    """Return each row's group number (-1 outside every group or the population domain)."""
    cell = plan.eng.sums.domains.cell
    return np.where(cell >= 0, cell // plan.n_ages, -1)


def _adjust(rows: list[dict[str, Any]], method: str) -> None:
    """Fill ``p_adjusted`` of every difference row (one family: the whole call)."""
    p = np.array([r["p"] for r in rows], dtype=np.float64)
    for r, q in zip(rows, adjust_p(p, method).tolist(), strict=True):
        r["p_adjusted"] = q
