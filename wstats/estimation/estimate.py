"""The public estimation call: design + variables + domains -> a tidy EstimateTable.

Domains: the population domain is every row where ``where`` is valid and non-zero (all rows
without ``where``); the by-cells are the full product of the levels of the ``by`` variables in
label order (codebook/file value labels, then unlabelled observed values); an empty cell gives
rows with n = 0. Rows outside a domain are never dropped: they contribute zero to its sums and
the full design (all strata and PSUs) is kept for its variance.
"""

from __future__ import annotations

import itertools
import warnings
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.columns import Dataset, require_dataset
from wstats.decoding.text_numbers import why_text
from wstats.errors import EstimationError, WstatsWarning, did_you_mean
from wstats.estimation.assemble import Statistics
from wstats.estimation.assemble import check_options as _check_options
from wstats.estimation.assemble import columns_of as _columns
from wstats.estimation.assemble import scope as _scope
from wstats.estimation.dask_engine import ENGINES, estimate_dask
from wstats.estimation.domain_setup import build_domains as _domains
from wstats.estimation.domain_setup import check_names as _check_names
from wstats.estimation.scaling import as_numbers, scale_dataset, scales_for, unscale
from wstats.estimation.statistics import (
    Context,
    Mean,
    Piece,
    Proportion,
    Quantile,
    Ratio,
    Total,
    check_statistic,
    is_categorical,
)
from wstats.estimation.sums import WeightedSums

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.codebook import Codebook
    from wstats.design.bound import BoundDesign
    from wstats.design.declared import Design
    from wstats.estimation.domains import Domains
    from wstats.estimation.reliability import ReliabilityStandard
    from wstats.estimation.results import EstimateTable
    from wstats.estimation.standards import Standard

    Index = npt.NDArray[np.int64]
    Bool = npt.NDArray[np.bool_]

__all__ = ["estimate"]


def estimate(
    data: Dataset | str | Path | Sequence[str | Path],
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
    age_adjust: str | None = None,
    standard: str | Standard | None = None,
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
    age_adjust : an age variable: add directly age-adjusted rows of every mean and
        proportion (column ``standard`` names the standard population; None on crude rows;
        the margins stay crude).
    standard : the standard population for *age_adjust*: a built-in name (``us2000-11``,
        ``us2000-adults18``, ``us2000-adults20``), a TOML standard file, or a ``Standard``.
    engine : ``memory`` (default) or ``dask``: the data files processed partition by
        partition on a Dask cluster (means, totals, proportions, ratios, quantiles; see
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
    from wstats.estimation.reliability import DEFAULT_STANDARD, assess
    from wstats.estimation.results import EstimateTable, object_column

    if not isinstance(data, Dataset | str | Path | list | tuple):
        require_dataset(data, "estimate")  # e.g. a pandas frame: say how to wrap it
    if engine not in ENGINES:
        raise EstimationError(f"engine '{engine}' is not one of {', '.join(ENGINES)}"
                              f"{did_you_mean(engine, ENGINES)}")
    if engine == "dask":
        if isinstance(data, Dataset):
            raise EstimationError("engine 'dask' reads the data files itself; give their paths "
                                  "(and codebook=...), not a Dataset")
        if age_adjust is not None:
            raise EstimationError("age adjustment is not available on the Dask engine yet; "
                                  "run it with engine='memory'")

        files = data  # the workers read the files

        def on_dask(domains: Sequence[str]) -> EstimateTable:
            return estimate_dask(files, design, variables, codebook=codebook, ratios=ratios,
                                 quantiles=quantiles, statistics=statistics, by=domains,
                                 where=where, categorical=categorical, level=level,
                                 proportion_ci=proportion_ci, reliability=reliability,
                                 scheduler=scheduler)

        if not margins or len(by) < 2:
            return on_dask(by)
        from wstats.estimation.margins import with_margins

        return with_margins(on_dask(by), [on_dask([b]) for b in by])
    if not isinstance(data, Dataset):
        data = _read_files(data, design, [*variables, *by, *categorical,
                                          *(v for r in ratios for v in r),
                                          *([age_adjust] if age_adjust else [])],
                           where, codebook)
    stats = _check_options(statistics, level, proportion_ci, quantiles)
    _check_names(data, [*variables, *by, *categorical, *(v for r in ratios for v in r),
                        *([age_adjust] if age_adjust else [])])
    for name in stats if isinstance(stats, dict) else ():
        if name not in variables:
            raise EstimationError(f"statistics name '{name}', which is not among the variables "
                                  f"to estimate ({', '.join(variables)}); add it or drop it")
    numbers = [v for v in [*variables, *(x for r in ratios for x in r)]
               if v not in categorical and v not in by]
    analysed = as_numbers(data, numbers)  # design and domains keep exact identifiers
    scales = _scales(analysed, design, variables, set(categorical), ratios)
    bound = design.bind(scale_dataset(data, {k: v for k, v in scales.items()
                                             if data.columns[k].values.dtype.kind == "f"}))
    domains, by_levels = _domains(data, bound, list(by), where)
    columns = {name: bound.column(col)
               for name, col in scale_dataset(analysed, scales).columns.items()}
    ctx = Context(WeightedSums(bound, domains), columns, data.vocabulary, level,
                  per_domain_df=design.domain_df == "domain")
    pieces = _run(ctx, variables, stats, set(categorical), ratios, quantiles, proportion_ci)
    pieces = unscale(pieces, scales, design.weight)
    rows = _columns(pieces, list(by), by_levels, data.vocabulary.names, level)
    _warn(data, bound, variables, domains, by_levels, scales.get(design.weight, 1.0))
    std = _age_standard(age_adjust, standard)
    if std is not None and age_adjust is not None:
        from wstats.estimation.age_rows import age_adjusted_rows, with_rows

        jobs = [(p.variable, p.statistic) for p in pieces if p.statistic in BY_AGE]
        rows = with_rows(rows, age_adjusted_rows(data, design, list(dict.fromkeys(jobs)), by,
                                                 where, age_adjust, std, level))
    rules = reliability or DEFAULT_STANDARD
    same_kg = (proportion_ci == "korn-graubard" and level == rules.kg_level and std is None)
    old_flags = rows["flags"]
    flags, suppress = assess(rows, rules, level,
                             (rows["ci_low"], rows["ci_high"]) if same_kg else None)
    rows["flags"] = object_column([(*a, *f) for a, f in zip(old_flags, flags, strict=True)])
    rows["suppress"] = suppress
    settings = {"proportion_ci": proportion_ci, "mean_ci": "wald-t", "quantile_ci": "woodruff",
                "df_rule": "replicates" if bound.uses_replicates else design.domain_df,
                "level": level, "reliability": rules.name,
                "deff_srs": "with-replacement", **_scope(rows, by, where)}
    if std is not None:
        settings.update(age_adjust=age_adjust, standard=std.name, standard_source=std.source)
    table = EstimateTable(rows, tuple(by), level, bound.summary(), settings)
    if not margins or len(by) < 2:
        return table
    from wstats.estimation.margins import with_margins

    return with_margins(table, [estimate(
        data, design, variables, statistics=statistics, by=[b], where=where,
        categorical=categorical, ratios=ratios, quantiles=quantiles, level=level,
        proportion_ci=proportion_ci, reliability=reliability) for b in by])


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


#: statistics that can be age-adjusted
BY_AGE = ("mean", "proportion")


def _age_standard(age_adjust: str | None, standard: str | Standard | None) -> Standard | None:
    """Return the standard population of an age-adjusted call (None without one)."""
    if (age_adjust is None) != (standard is None):
        raise EstimationError("age adjustment needs both the age variable and a standard "
                              "population (age_adjust=AGEVAR, standard=NAME|FILE.toml)")
    if standard is None:
        return None
    from wstats.estimation.standards import load_standard

    return load_standard(standard) if isinstance(standard, str) else standard


def _scales(data: Dataset, design: Design, variables: Sequence[str], forced: set[str],
            ratios: Sequence[tuple[str, str]]) -> dict[str, float]:
    """Return the power-of-two scales of the weights and number variables that need one.

    Replicate weights share the weight's scale; categorical variables keep their codes.
    """
    from wstats.design.replicates import resolve_replicate_columns

    numbers = [v for v in variables if v in data.columns
               and not is_categorical(data.columns[v], list(forced))]
    names = [design.weight, *numbers, *(v for r in ratios for v in r)]
    scales = scales_for(data, names)
    if design.weight in scales and design.replicates is not None:
        src = data.source or "the data"
        for rep in resolve_replicate_columns(design.replicates, list(data.columns), src):
            scales[rep] = scales[design.weight]
    return scales


def _warn(data: Dataset, bound: BoundDesign, variables: Sequence[str], domains: Domains,
          by_levels: list[tuple[list[Any], list[Any]]], weight_scale: float = 1.0) -> None:
    """Issue the data-sanity warnings of :mod:`wstats.estimation.sanity` (each once)."""
    from wstats.estimation.sanity import DesignFacts, estimation_warnings, warn_all

    groups = None
    if domains.n_cells:
        counts = np.bincount(domains.cell[domains.cell >= 0], minlength=domains.n_cells)
        names = [" x ".join(str(x) for x in combo)
                 for combo in itertools.product(*(d for _, d in by_levels))]
        groups = (names, counts)
    weights = bound.weights if weight_scale == 1.0 else bound.weights * weight_scale
    facts = DesignFacts(np.asarray(bound.n_h), weights, bound.design.weight)
    warn_all(estimation_warnings(data, facts, variables, groups))


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
        if col.kind == "text" and "proportion" in wanted and (hint := why_text(col)):
            warnings.warn(f"variable {name} is counted as text categories{hint}",
                          WstatsWarning, stacklevel=4)
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
