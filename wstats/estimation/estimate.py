"""The public estimation call: design + variables + domains -> a tidy EstimateTable.

Domains: the population domain is every row where ``where`` is valid and non-zero (all rows
without ``where``); the by-cells are the full product of the levels of the ``by`` variables in
label order (codebook/file value labels, then unlabelled observed values); an empty cell gives
rows with n = 0. Rows outside a domain are never dropped: they contribute zero to its sums and
the full design (all strata and PSUs) is kept for its variance.
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.columns import Dataset
from wstats.decoding.reasons import VALID
from wstats.errors import EstimationError, did_you_mean
from wstats.estimation.assemble import check_options, table_of
from wstats.estimation.dask_engine import ENGINES, estimate_dask
from wstats.estimation.domains import Domains, no_cell
from wstats.estimation.levels import category_levels, distinct_values, level_index
from wstats.estimation.statistics import (
    Context,
    Mean,
    Piece,
    Proportion,
    Quantile,
    Ratio,
    Total,
)
from wstats.estimation.sums import WeightedSums

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.codebook import Codebook
    from wstats.decoding.columns import DecodedColumn
    from wstats.design.bound import BoundDesign
    from wstats.design.declared import Design
    from wstats.estimation.reliability import ReliabilityStandard
    from wstats.estimation.results import EstimateTable

    Index = npt.NDArray[np.int64]
    Bool = npt.NDArray[np.bool_]

__all__ = ["estimate"]

MAX_CELLS = 10_000  # crossed by-cells allowed in one call


def estimate(
    data: Dataset | str | Path | Sequence[str | Path],
    design: Design,
    variables: Sequence[str],
    *,
    statistics: str | Sequence[str] | None = None,
    by: Sequence[str] = (),
    where: str | None = None,
    categorical: Sequence[str] = (),
    ratios: Sequence[tuple[str, str]] = (),
    quantiles: Sequence[float] = (0.5,),
    level: float = 0.95,
    proportion_ci: str = "korn-graubard",
    reliability: ReliabilityStandard | None = None,
    engine: str = "memory",
    codebook: Codebook | str | Path | None = None,
    scheduler: str | None = None,
) -> EstimateTable:
    """Estimate design-based statistics of survey variables, overall and by domain.

    Parameters
    ----------
    data : decoded dataset (values and reasons); or the data files (a path, a glob, a
        folder or a list; several files are pooled, see :func:`wstats.read`), read with
        *codebook*.
    design : the sample design; bound and checked against *data*.
    variables : variables to analyse.
    statistics : None (mean for continuous/count, proportion for categorical/binary), one
        name or a list of ``mean``, ``total``, ``proportion``, ``ratio``, ``quantile``.
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
    engine : ``memory`` (default) or ``dask``: the data files processed partition by
        partition on a Dask cluster (means, totals, proportions and ratios; see
        :mod:`wstats.estimation.dask_engine`); needs ``pip install 'wstats[dask]'``.
    codebook : the codebook for data given as files.
    scheduler : engine ``dask``: address of a running scheduler (None: a local cluster that
        starts and stops with the call).

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
    if engine not in ENGINES:
        raise EstimationError(f"engine '{engine}' is not one of {', '.join(ENGINES)}"
                              f"{did_you_mean(engine, ENGINES)}")
    if engine == "dask":
        if isinstance(data, Dataset):
            raise EstimationError("engine 'dask' reads the data files itself; give their paths "
                                  "(and codebook=...), not a Dataset")
        return estimate_dask(data, design, variables, codebook=codebook, ratios=ratios,
                             statistics=statistics, by=by, where=where,
                             categorical=categorical, level=level, proportion_ci=proportion_ci,
                             reliability=reliability, scheduler=scheduler)
    if not isinstance(data, Dataset):
        data = _read_files(data, design, [*variables, *by, *categorical,
                                          *(v for r in ratios for v in r)], where, codebook)
    stats = check_options(statistics, level, proportion_ci, quantiles)
    _check_names(data, [*variables, *by, *categorical, *(v for r in ratios for v in r)])
    bound = design.bind(data)
    domains, by_levels = _domains(data, bound, list(by), where)
    columns = {name: bound.column(col) for name, col in data.columns.items()}
    ctx = Context(WeightedSums(bound, domains), columns, data.vocabulary, level,
                  per_domain_df=design.domain_df == "domain")
    pieces = _run(ctx, variables, stats, set(categorical), ratios, quantiles, proportion_ci)
    _warn(data, bound, variables, domains, by_levels)
    df_rule = "replicates" if bound.uses_replicates else design.domain_df
    return table_of(pieces, by, by_levels, data.vocabulary.names, level, proportion_ci,
                    reliability, bound.summary(), {"df_rule": df_rule})


def _read_files(data: str | Path | Sequence[str | Path], design: Design, names: list[str],
                where: str | None, codebook: Codebook | str | Path | None) -> Dataset:
    """Read the variables, the condition's inputs and the design columns from files."""
    from wstats.decoding.load import read
    from wstats.decoding.stacking import expand_paths, is_several
    from wstats.readers.dispatch import file_columns

    first = expand_paths(data)[0] if is_several(data) else str(data)
    cols = list(names)
    if where:
        from wstats.decoding.expressions import expression_names

        cols.extend(expression_names(where))
    cols.extend(design.columns(file_columns(first), first))
    return read(data, list(dict.fromkeys(cols)), codebook)


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


def _check_names(data: Dataset, names: Sequence[str]) -> None:
    """Raise EstimationError naming the first variable that is not in *data*."""
    for name in names:
        if name not in data.columns:
            where = f" in {data.source}" if data.source else ""
            raise EstimationError(
                f"variable '{name}' is not{where}{did_you_mean(name, data.columns)}"
            )


def _is_categorical(col: DecodedColumn, forced: set[str]) -> bool:
    """Return True for categorical/binary/text kinds, names in *forced*, or fully labelled data."""
    if col.name in forced or col.kind in ("categorical", "binary", "text"):
        return True
    if not col.value_labels or col.values.dtype.kind != "f":
        return False
    seen = distinct_values(col.values[col.valid])
    return bool(len(seen)) and all(float(v) in col.value_labels for v in seen)


def _run(ctx: Context, variables: Sequence[str], stats: list[str] | None, forced: set[str],
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
        wanted = stats or (["proportion"] if _is_categorical(col, forced) else ["mean"])
        for stat in wanted:
            if fast and stat in BATCHED:
                slots.append((name, stat))
            elif stat in ("mean", "total", "proportion"):
                slots.append([_one(ctx, name, stat, ci)])
            elif stat == "quantile":
                slots.append([Quantile(p)(ctx, name) for p in quantiles])
    if stats and "ratio" in stats and not ratios:
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
