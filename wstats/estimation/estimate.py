"""The public estimation call: design + variables + domains -> a tidy EstimateTable.

Domains: the population domain is every row where ``where`` is valid and non-zero (all rows
without ``where``); the by-cells are the full product of the levels of the ``by`` variables in
label order (codebook/file value labels, then unlabelled observed values); an empty cell gives
rows with n = 0. Rows outside a domain are never dropped: they contribute zero to its sums and
the full design (all strata and PSUs) is kept for its variance.
"""

from __future__ import annotations

import itertools
from collections.abc import Callable, Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.reasons import VALID
from wstats.errors import EstimationError, did_you_mean
from wstats.estimation.domains import Domains, no_cell
from wstats.estimation.levels import category_levels, level_index
from wstats.estimation.statistics import (
    Context,
    Mean,
    Piece,
    Proportion,
    Quantile,
    Ratio,
    Total,
    add_intervals,
    check_statistic,
    is_categorical,
)
from wstats.estimation.sums import WeightedSums

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.columns import Dataset
    from wstats.design.bound import BoundDesign
    from wstats.design.declared import Design
    from wstats.estimation.reliability import ReliabilityStandard
    from wstats.estimation.results import EstimateTable

    Index = npt.NDArray[np.int64]
    Bool = npt.NDArray[np.bool_]

__all__ = ["estimate"]

_NAMES = ("mean", "total", "proportion", "ratio", "quantile")
MAX_CELLS = 10_000  # crossed by-cells allowed in one call


def estimate(
    data: Dataset,
    design: Design,
    variables: Sequence[str],
    *,
    statistics: str | Sequence[str] | Mapping[str, str | Sequence[str]] | None = None,
    by: Sequence[str] = (),
    where: str | None = None,
    categorical: Sequence[str] = (),
    ratios: Sequence[tuple[str, str]] = (),
    quantiles: Sequence[float] = (0.5,),
    level: float = 0.95,
    proportion_ci: str = "korn-graubard",
    reliability: ReliabilityStandard | None = None,
    margins: bool = False,
) -> EstimateTable:
    """Estimate design-based statistics of survey variables, overall and by domain.

    Parameters
    ----------
    data : decoded dataset (values and reasons).
    design : the sample design; bound and checked against *data*.
    variables : variables to analyse.
    statistics : None (mean for continuous/count, proportion for categorical/binary), one
        name or a list of ``mean``, ``total``, ``proportion``, ``ratio``, ``quantile``, or a
        mapping variable -> name(s) for statistics per variable (variables it does not name
        get the default). The CLI's ``--statistics`` takes the same names. A statistic that
        does not suit a variable's kind (a proportion of a continuous one) is refused.
    by : variables whose crossed levels form the domains (plus the whole population).
    where : condition in the codebook expression language; rows where it is valid and true
        form the population domain.
    categorical : variables to treat as categorical whatever their kind.
    ratios : (numerator, denominator) pairs; estimated whenever given.
    quantiles : probabilities for ``quantile`` (default the median).
    level : confidence level of the intervals.
    proportion_ci : interval for proportions, a key of ``PROPORTION_INTERVALS``.
    reliability : reliability standard for flags and suppression (None: the default,
        ``nchs-2017``; pass ``STANDARDS["none"]`` to switch the rules off).
    margins : with two or more *by* variables, also the one-way margins (each by-variable
        alone, the others shown as "All"); see :mod:`wstats.estimation.margins`.

    Returns
    -------
    EstimateTable
        Rows ordered by variable, statistic (and p), domain (population first, then cells),
        level; columns per ``ESTIMATE_COLUMNS`` with one column per by-variable after ``p``.

    Examples
    --------
    >>> from wstats.decoding.columns import Dataset
    >>> from wstats.design.declared import Design
    >>> ds = Dataset.from_arrays({"y": [1.0, 2.0, 3.0, 4.0], "w": [1.0, 1.0, 2.0, 2.0]})
    >>> t = estimate(ds, Design("w"), ["y"])
    >>> round(float(t.frame["estimate"][0]), 4)
    2.8333
    """
    from wstats.estimation.reliability import DEFAULT_STANDARD, assess
    from wstats.estimation.results import EstimateTable, object_column

    stats = _check_options(statistics, level, proportion_ci, quantiles)
    _check_names(data, [*variables, *by, *categorical, *(v for r in ratios for v in r)])
    for name in stats if isinstance(stats, dict) else ():
        if name not in variables:
            raise EstimationError(f"statistics name '{name}', which is not among the variables "
                                  f"to estimate ({', '.join(variables)}); add it or drop it")
    bound = design.bind(data)
    domains, by_levels = _domains(data, bound, list(by), where)
    columns = {name: bound.column(col) for name, col in data.columns.items()}
    ctx = Context(WeightedSums(bound, domains), columns, data.vocabulary, level,
                  per_domain_df=design.domain_df == "domain")
    pieces = _run(ctx, variables, stats, set(categorical), ratios, quantiles, proportion_ci)
    rows = _columns(pieces, list(by), by_levels, data.vocabulary.names, level)
    _warn(data, bound, variables, domains, by_levels)
    standard = reliability or DEFAULT_STANDARD
    same_kg = proportion_ci == "korn-graubard" and level == standard.kg_level
    flags, suppress = assess(rows, standard, level,
                             (rows["ci_low"], rows["ci_high"]) if same_kg else None)
    rows["flags"] = object_column(flags)
    rows["suppress"] = suppress
    settings = {"proportion_ci": proportion_ci, "mean_ci": "wald-t", "quantile_ci": "woodruff",
                "df_rule": "replicates" if bound.uses_replicates else design.domain_df,
                "level": level, "reliability": standard.name,
                "deff_srs": "with-replacement", **_scope(rows, by, where)}
    table = EstimateTable(rows, tuple(by), level, bound.summary(), settings)
    if not margins or len(by) < 2:
        return table
    from wstats.estimation.margins import with_margins

    return with_margins(table, [estimate(
        data, design, variables, statistics=statistics, by=[b], where=where,
        categorical=categorical, ratios=ratios, quantiles=quantiles, level=level,
        proportion_ci=proportion_ci, reliability=reliability) for b in by])


def _scope(rows: dict[str, npt.NDArray[Any]], by: Sequence[str], where: str | None
           ) -> dict[str, Any]:
    """Return what the table covers: subpopulation, domains, statistics, range of df."""
    df = rows["df"][np.isfinite(rows["df"])]
    return {"where": where, "domains": list(by),
            "statistics": list(dict.fromkeys(str(s) for s in rows["statistic"])),
            "df_range": [float(df.min()), float(df.max())] if len(df) else None}


def _warn(data: Dataset, bound: BoundDesign, variables: Sequence[str], domains: Domains,
          by_levels: list[tuple[list[Any], list[Any]]]) -> None:
    """Issue the data-sanity warnings of :mod:`wstats.estimation.sanity` (each once)."""
    from wstats.estimation.sanity import DesignFacts, estimation_warnings, warn_all

    groups = None
    if domains.n_cells:
        counts = np.bincount(domains.cell[domains.cell >= 0], minlength=domains.n_cells)
        names = [" x ".join(str(x) for x in combo)
                 for combo in itertools.product(*(d for _, d in by_levels))]
        groups = (names, counts)
    facts = DesignFacts(np.asarray(bound.n_h), bound.weights, bound.design.weight)
    warn_all(estimation_warnings(data, facts, variables, groups))


Statistics = dict[str, list[str]] | list[str] | None


def _check_options(statistics: str | Sequence[str] | Mapping[str, str | Sequence[str]] | None,
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
        return {str(v): _stat_names(s) for v, s in statistics.items()}
    return _stat_names(statistics)


def _stat_names(statistics: str | Sequence[str]) -> list[str]:
    """Return one variable's statistics as a list of checked names."""
    names = [statistics] if isinstance(statistics, str) else list(statistics)
    for name in names:
        if name not in _NAMES:
            raise EstimationError(
                f"statistic '{name}' is not one of {', '.join(_NAMES)}{did_you_mean(name, _NAMES)}"
            )
    return names


def _check_names(data: Dataset, names: Sequence[str]) -> None:
    """Raise EstimationError naming the first variable that is not in *data*."""
    for name in names:
        if name not in data.columns:
            where = f" in {data.source}" if data.source else ""
            raise EstimationError(
                f"variable '{name}' is not{where}{did_you_mean(name, data.columns)}"
            )


def _run(ctx: Context, variables: Sequence[str], stats: Statistics, forced: set[str],
         ratios: Sequence[tuple[str, str]], quantiles: Sequence[float], ci: str) -> list[Piece]:
    """Call the statistics for every variable (loops over variables and statistics only).

    Under linearization, means, totals and proportions of all variables are computed in one
    batched pass (:mod:`wstats.estimation.many_variables`); the output keeps the variable and
    statistic order.
    """
    from wstats.estimation.many_variables import BATCHED, batch_pieces

    fast = not ctx.design.uses_replicates
    slots: list[list[Piece] | tuple[str, str]] = []
    for name in variables:
        col = ctx.columns[name]
        given = stats.get(name) if isinstance(stats, dict) else stats
        wanted = given or (["proportion"] if is_categorical(col, list(forced)) else ["mean"])
        for stat in wanted:
            check_statistic(stat, col, list(forced))
            if fast and stat in BATCHED:
                slots.append((name, stat))
            elif stat in ("mean", "total", "proportion"):
                slots.append([_one(ctx, name, stat, ci)])
            elif stat == "quantile":
                slots.append([Quantile(p)(ctx, name) for p in quantiles])
    every = [x for v in stats.values() for x in v] if isinstance(stats, dict) else stats or []
    if "ratio" in every and not ratios:
        raise EstimationError("statistic 'ratio' needs ratios=[(numerator, denominator)]")
    batched = iter(batch_pieces(ctx, [s for s in slots if isinstance(s, tuple)], ci))
    pieces: list[Piece] = []
    for slot in slots:
        pieces.extend([next(batched)] if isinstance(slot, tuple) else slot)
    for num, den in ratios:
        pieces.append(Ratio()(ctx, num, den))
    return pieces


def _one(ctx: Context, name: str, stat: str, ci: str) -> Piece:
    """Return one variable's mean, total or proportion (replicate designs)."""
    if stat == "mean":
        return Mean()(ctx, name)
    if stat == "total":
        return Total()(ctx, name)
    return Proportion(ci)(ctx, name)


def _domains(data: Dataset, bound: BoundDesign, by: list[str], where: str | None
             ) -> tuple[Domains, list[tuple[list[Any], list[Any]]]]:
    """Return the domain membership and, per by-variable, its (values, display values)."""
    inside: Bool = np.broadcast_to(np.True_, (bound.n_rows,))  # read-only, no memory per row
    if where is not None:
        from wstats.decoding.expressions import parse_expression

        expr = parse_expression(where, list(data.columns), "where")
        values, reasons = expr.evaluate(data.columns, data.vocabulary, data.n_rows)
        ok = (reasons == VALID) & (np.nan_to_num(values, nan=0.0) != 0)
        inside = ok if bound.rows is None else ok[bound.rows]
    codes: list[Index] = []
    levels: list[tuple[list[Any], list[Any]]] = []
    for name in by:
        col = bound.column(data.columns[name])
        lv, labels = category_levels(col)
        display = [lab if v in col.value_labels else _plain(v)
                   for v, lab in zip(lv, labels, strict=True)]
        codes.append(level_index(col, lv, col.valid))
        levels.append((lv, display))
    sizes = [len(v) for v, _ in levels]
    if int(np.prod(sizes)) > MAX_CELLS:
        raise EstimationError(
            f"the by-variables {', '.join(by)} cross into {int(np.prod(sizes))} cells (limit "
            f"{MAX_CELLS}); group a continuous by-variable into classes first"
        )
    if any(s == 0 for s in sizes):
        return Domains(inside, no_cell(bound.n_rows), 0), levels
    return Domains.build(inside, codes, sizes), levels


def _plain(v: Any) -> Any:
    """Return an integral float as int (a level shown as 3, not 3.0), else the value."""
    if isinstance(v, float) and v.is_integer():
        return int(v)
    return v


def _columns(pieces: list[Piece], by: list[str],
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
