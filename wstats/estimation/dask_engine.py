"""The Dask engine: estimates from data processed partition by partition on a cluster.

Each partition (a file, or a range of rows of a Parquet file) is read and reduced to sums by
(file, stratum, PSU, domain) on a worker (:mod:`wstats.estimation.partition_sums`); the sums
are added pairwise on the workers, and the client makes the estimates from the total
(:mod:`wstats.estimation.from_sums`). Rows never travel: memory per worker follows the
partition, not the data.

Available: means, totals, proportions, ratios and quantiles (exact, with Woodruff
intervals; :mod:`wstats.estimation.summed_quantiles`), overall and by domains, ``where``,
Taylor linearization (strata, PSUs; singleton treatments) and replicate weights, pooled files.
Item nonresponse tables run here too (:mod:`wstats.reports.nonresponse_dask`).
Refused with a message naming what is missing: quantiles of a replicate design, FPC,
``drop_incomplete``, domain df, jackknife-strata without given factors, a linearization design
without PSUs, age adjustment.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.stacking import (
    FILE_COLUMN,
    PeriodFiles,
    expand_paths,
    is_several,
    period_stems,
)
from wstats.errors import EngineError, WstatsWarning

if TYPE_CHECKING:
    from wstats.decoding.codebook import Codebook
    from wstats.design.declared import Design
    from wstats.estimation.assemble import Statistics
    from wstats.estimation.from_sums import Summed
    from wstats.estimation.partition_rates import Rates
    from wstats.estimation.partition_sums import PartSums, Request, Task
    from wstats.estimation.reliability import ReliabilityStandard
    from wstats.estimation.results import EstimateTable

__all__ = ["ENGINES", "PARTITION_ROWS", "estimate_dask", "need_dask", "summed_estimate"]

ENGINES = ("memory", "dask")
#: rows per partition of a Parquet file (other formats: one partition per file)
PARTITION_ROWS = 1_000_000


def need_dask() -> None:
    """Raise EngineError with the install hint when dask.distributed is absent."""
    try:
        import dask  # noqa: F401
        import distributed  # noqa: F401
    except ImportError:
        raise EngineError("the Dask engine needs dask.distributed: pip install "
                          "'wstats[dask]'") from None


def estimate_dask(
    data: str | Path | Sequence[str | Path], design: Design, variables: Sequence[str], *,
    codebook: Codebook | str | Path | None = None,
    statistics: str | Sequence[str] | Mapping[str, str | Sequence[str]] | None = None,
    ratios: Sequence[tuple[str, str]] = (), quantiles: Sequence[float] = (0.5,),
    by: Sequence[str] = (), where: str | None = None, categorical: Sequence[str] = (),
    level: float = 0.95, proportion_ci: str = "korn-graubard",
    reliability: ReliabilityStandard | None = None, scheduler: str | None = None,
    encoding: str = "utf-8", partition_rows: int = PARTITION_ROWS, workers: int | None = None,
) -> EstimateTable:
    """Estimate means, totals, proportions, ratios, quantiles on a Dask cluster (see above).

    Parameters are those of :func:`wstats.estimate` with the data given as files (a path,
    a glob, a folder or a list; several files are pooled), plus *codebook*, *scheduler* (the
    address of a running ``dask.distributed`` scheduler; None starts a local cluster sized
    to the machine for the duration of the call), *partition_rows* (rows per partition of a
    Parquet file) and *workers* (local cluster size; None: one per CPU).
    """
    return summed_estimate(
        data, design, variables, codebook=codebook, statistics=statistics, ratios=ratios,
        quantiles=quantiles, by=by, where=where, categorical=categorical, level=level,
        proportion_ci=proportion_ci,
        reliability=reliability, scheduler=scheduler, encoding=encoding,
        partition_rows=partition_rows, workers=workers)[0]


def summed_estimate(
    data: str | Path | Sequence[str | Path], design: Design, variables: Sequence[str], *,
    codebook: Codebook | str | Path | None = None,
    statistics: str | Sequence[str] | Mapping[str, str | Sequence[str]] | None = None,
    ratios: Sequence[tuple[str, str]] = (), quantiles: Sequence[float] = (0.5,),
    by: Sequence[str] = (), where: str | None = None,
    categorical: Sequence[str] = (), level: float = 0.95, proportion_ci: str = "korn-graubard",
    reliability: ReliabilityStandard | None = None, scheduler: str | None = None,
    encoding: str = "utf-8", partition_rows: int = PARTITION_ROWS, workers: int | None = None,
    rates: Rates | None = None,
) -> tuple[EstimateTable, Summed]:
    """Return :func:`estimate_dask`'s table and the summed groups behind it.

    With *rates*, *variables* are the items' nonresponse indicators, made on the workers
    (:mod:`wstats.estimation.partition_rates`), and the groups carry every reason's count.
    """
    need_dask()
    from wstats.estimation.assemble import check_options, table_of
    from wstats.estimation.summed_design import check_summable, summed_design

    stats = check_options(statistics, level, proportion_ci, quantiles)
    every = [x for v in stats.values() for x in v] if isinstance(stats, dict) else stats or []
    check_summable(design, every)
    if "ratio" in every and not ratios:
        from wstats.errors import EstimationError

        raise EstimationError("statistic 'ratio' needs ratios=[(numerator, denominator)]")
    paths = expand_paths(data) if is_several(data) else [str(data)]
    cb = _codebook(codebook)
    files = _period_files(paths, cb) if len(paths) > 1 else None
    req, numeric, cats, ambiguous = _request(paths, design, variables, stats, by, where,
                                             categorical, cb, encoding, ratios, rates)
    with _client(scheduler, workers) as client:
        total = _reduce(client, _tasks(paths, partition_rows), req)
    if files is not None:
        total.labels[FILE_COLUMN] = {float(k + 1): s for k, s in enumerate(files.labels)}
        _warn_pooling(total, files)
    if where and not bool((total.main["rows"] * total.main["_in"]).sum()):
        import warnings  # as the in-memory engine says it

        from wstats.estimation.domains import no_row_note
        names = " + ".join(Path(p).name for p in paths)  # as a pooled Dataset names them
        warnings.warn(no_row_note(where, names, check=True), WstatsWarning, stacklevel=2)
    bound, lam = summed_design(total.main, design, files, len(req.replicates))
    from wstats.estimation.from_sums import pieces_from_sums

    summed = pieces_from_sums(total, bound, design, lam, by, level)
    pieces = _pieces(summed, total, req, variables, stats, numeric, cats, ambiguous,
                     proportion_ci, design, files, by, quantiles)
    summary = _summary(bound.summary(), total, req, design)
    df_rule = "replicates" if req.replicates else design.domain_df
    table = table_of(pieces, by, summed.by_levels, summed.vocabulary.names, level,
                     proportion_ci, reliability, summary,
                     {"df_rule": df_rule, "engine": "dask"}, where)
    return table, summed


def _summary(summary: dict[str, Any], total: PartSums, req: Request, design: Design
             ) -> dict[str, Any]:
    """Return the design summary as binding the rows would give it (the groups' is of groups)."""
    frame = total.main
    out = {**summary, "n_rows": int(frame["rows"].sum())}
    if design.psu is None:  # every row its own PSU
        per_stratum = frame.groupby(["_file", "_s"] if summary.get("pool") and
                                    not design.shared_psus else ["_s"])["rows"].sum()
        out.update(n_psu=out["n_rows"], singleton_strata=int((per_stratum == 1).sum()))
    if req.replicates:
        out.update(variance_method="replicates", replicate_method=design.replicate_method,
                   n_replicates=len(req.replicates),
                   replicate_center=design.replicate_center)
    return out


def _warn_pooling(total: PartSums, files: PeriodFiles) -> None:
    """Give the checks before pooling that the sums can tell, as pooling in memory does."""
    import warnings

    from wstats.design.pooling import NOT_IN_FILE, warn_weight_sums

    for name, lacking in sorted(total.absent.items()):
        warnings.warn(f"variable '{name}' is not in {', '.join(files.names[k] for k in lacking)}"
                      f"; its rows there get the reason {NOT_IN_FILE}", WstatsWarning,
                      stacklevel=3)
    frame = total.main
    warn_weight_sums(frame["w_all"].to_numpy(float), frame["_file"].to_numpy(np.int64), files)


def _codebook(codebook: Codebook | str | Path | None) -> Codebook | None:
    """Return the codebook loaded (workers get the object)."""
    if isinstance(codebook, str | Path):
        from wstats.decoding.codebook import load_codebook

        return load_codebook(codebook)
    return codebook


def _period_files(paths: list[str], cb: Codebook | None) -> PeriodFiles:
    """Return the pooled files (rows are counted from the sums later)."""
    stems = period_stems(paths)
    labels = dict((cb.labels_for(FILE_COLUMN) or {}) if cb else {})
    shown = [labels.get(float(k + 1), s) for k, s in enumerate(stems)]
    return PeriodFiles(tuple(paths), tuple(stems), tuple(shown), tuple(0 for _ in paths))


def _request(paths: list[str], design: Design, variables: Sequence[str],
             stats: Statistics, by: Sequence[str], where: str | None,
             categorical: Sequence[str], cb: Codebook | None, encoding: str,
             ratios: Sequence[tuple[str, str]] = (), rates: Rates | None = None
             ) -> tuple[Request, list[str], list[str], list[str]]:
    """Return what partitions sum, and which variables are numeric, categorical, either."""
    from wstats.design.replicates import resolve_replicate_columns
    from wstats.estimation.partition_sums import Request
    from wstats.readers.dispatch import file_columns

    looked = variables if rates is None else [item for item, _ in rates.items]
    own = [v for v in dict.fromkeys([*looked, *by, *(v for r in ratios for v in r)])
           if v != FILE_COLUMN]
    first = _first_rows(paths, own, cb, encoding)
    numeric, cats, ambiguous = (([], list(variables), []) if rates is not None
                                else _kinds(first, variables, stats, categorical))
    extra: list[str] = []
    if where:
        from wstats.decoding.expressions import expression_names

        extra = expression_names(where)
    in_file = file_columns(paths[0])
    reps = () if design.replicates is None else tuple(
        resolve_replicate_columns(design.replicates, in_file, paths[0]))
    columns = [*own, *extra, *design.columns(in_file, paths[0])]
    asked = [v for v in variables if "quantile" in (_given(stats, v) or [])]
    req = Request(design.weight, design.strata, design.psu, reps, tuple(by), where,
                  tuple(numeric), tuple(cats),
                  tuple(c for c in dict.fromkeys(columns) if c != FILE_COLUMN), cb, encoding,
                  tuple((str(a), str(b)) for a, b in ratios), rates, tuple(asked))
    return req, numeric, cats, ambiguous


def _first_rows(paths: list[str], names: list[str], cb: Codebook | None, encoding: str
                ) -> dict[str, Any]:
    """Return name -> column of one row, from the first file that has the variable."""
    from wstats.decoding.load import read
    from wstats.errors import ColumnError
    from wstats.readers.dispatch import file_columns

    found: dict[str, Any] = {}
    for path in paths:  # loop over files until every variable is met
        known = {*file_columns(path), *(cb.derived if cb else ())}
        here = [n for n in names if n in known and n not in found]
        if here:
            found.update(read(path, here, cb, (0, 1), False, encoding).columns)
        if len(found) == len(names):
            return found
    missing = [n for n in names if n not in found]
    raise ColumnError(f"variable '{missing[0]}' is in none of the {len(paths)} files nor a "
                      "derived variable of the codebook")


def _kinds(first: Any, variables: Sequence[str], stats: Statistics,
           categorical: Sequence[str]) -> tuple[list[str], list[str], list[str]]:
    """Return the variables summed as numbers, as categories, and those that may be either.

    As the in-memory engine decides: categorical, binary and text kinds and the names in
    *categorical* are categories; numbers whose every value is labelled are too, which only
    the summed values can tell (both kinds of sums are made for them).
    """
    from wstats.estimation.statistics import check_statistic

    numeric, cats, ambiguous = [], [], []
    for name in variables:
        col = first[name]
        given = _given(stats, name)
        if given:
            if any(s in ("mean", "total") for s in given):
                numeric.append(name)
            if "proportion" in given:
                check_statistic("proportion", col, list(categorical))
                cats.append(name)
        elif name in categorical or col.kind in ("categorical", "binary", "text"):
            cats.append(name)
        else:
            numeric.append(name)
            if col.value_labels:
                cats.append(name)
                ambiguous.append(name)
    return numeric, cats, ambiguous


def _tasks(paths: list[str], partition_rows: int) -> list[Task]:
    """Return the partitions: Parquet files in row ranges, other files whole."""
    from wstats.estimation.partition_sums import Task

    tasks: list[Task] = []
    for k, path in enumerate(paths):  # loop over files
        if Path(path).suffix.lower() != ".parquet":
            tasks.append(Task(path, k))
            continue
        tasks.extend(Task(path, k, r) for r in parquet_ranges(path, partition_rows))
    return tasks


def parquet_ranges(path: str, partition_rows: int) -> list[tuple[int, int | None]]:
    """Return row ranges of about *partition_rows* rows that begin and end on row groups.

    A partition then reads whole row groups of its own only (a row group larger than
    *partition_rows* is one partition); a file without row groups is one partition.
    """
    import pyarrow.parquet as pq

    meta = pq.ParquetFile(path).metadata
    sizes = [meta.row_group(i).num_rows for i in range(meta.num_row_groups)]
    ranges: list[tuple[int, int | None]] = []
    start = taken = 0
    for size in sizes:  # loop over row groups, not rows
        taken += size
        if taken - start >= partition_rows:
            ranges.append((start, taken))
            start = taken
    if taken > start or not ranges:
        ranges.append((start, taken if ranges else None))
    return ranges


@contextmanager
def _client(scheduler: str | None, workers: int | None) -> Iterator[Any]:
    """Yield a client of the given scheduler, or of a local cluster closed afterwards."""
    import logging
    import os

    import distributed

    Client: Any = distributed.Client
    LocalCluster: Any = distributed.LocalCluster

    if scheduler:
        try:
            client = Client(scheduler, timeout=30)
        except OSError as exc:
            raise EngineError(f"cannot reach the Dask scheduler at {scheduler} ({exc}); check "
                              "the address (e.g. tcp://10.0.0.5:8786)") from exc
        with client:
            yield client
        return
    n = workers or os.cpu_count() or 1
    with LocalCluster(n_workers=n, threads_per_worker=1, processes=True,
                      dashboard_address=None, silence_logs=logging.ERROR) as cluster, \
            Client(cluster) as client:
        yield client


def _reduce(client: Any, tasks: list[Task], req: Request) -> PartSums:
    """Sum every partition on the workers and add the sums pairwise there; return the total."""
    from wstats.estimation.partition_sums import add_sums, partition_sums

    futures = client.map(partition_sums, tasks, req=req, pure=False)
    while len(futures) > 1:  # a tree of additions: log2(partitions) rounds
        paired = [client.submit(add_sums, a, b, pure=False)
                  for a, b in zip(futures[::2], futures[1::2], strict=False)]
        futures = paired + ([futures[-1]] if len(futures) % 2 else [])
    total: PartSums = futures[0].result()
    return total


def _given(stats: Statistics, name: str) -> list[str] | None:
    """Return the statistics asked for *name* (None: its kind's default)."""
    return stats.get(name) if isinstance(stats, dict) else stats


def _pieces(s: Summed, total: PartSums, req: Request, variables: Sequence[str],
            stats: Statistics, numeric: list[str], cats: list[str],
            ambiguous: list[str], ci: str, design: Design, files: PeriodFiles | None,
            by: Sequence[str], probs: Sequence[float] = (0.5,)) -> list[Any]:
    """Return the Pieces of every variable and statistic, in the order asked."""
    from wstats.estimation.from_sums import mean_or_total, proportion, ratio
    from wstats.estimation.partition_sums import ratio_key
    from wstats.estimation.variable_sums import categorical_parts, replicate_parts

    pieces = []
    order = [*req.numeric, *req.categorical]
    reps = replicate_parts(s, total, req, design, files, by) if req.replicates else None
    for name in variables:  # loop over variables and statistics only
        wanted = _given(stats, name) or (["proportion"] if name in cats
                                         and name not in ambiguous else ["mean"])
        if name in ambiguous:  # numbers whose every value is labelled are categories
            seen = categorical_parts(s, total, name, order.index(name, len(req.numeric)))[3]
            labelled = total.labels.get(name, {})
            if seen and all(float(v) in labelled for v in seen):
                wanted = ["proportion"]
        for stat in wanted:
            if stat in ("mean", "total"):
                j = order.index(name)
                var = reps.mean_or_total(j, stat) if reps else None
                pieces.append(mean_or_total(s, name, j, stat, var))
            elif stat == "quantile":
                from wstats.estimation.summed_quantiles import quantile_piece

                j = len(order) + req.quantiles.index(name)
                pieces.extend(quantile_piece(s, name, j, total.levels[j], float(p))
                              for p in probs)
            elif stat == "proportion":
                j = order.index(name, len(req.numeric))
                values, labels, matrix, _ = categorical_parts(s, total, name, j)
                var = reps.proportion(j, values, matrix) if reps else None
                pieces.append(proportion(s, name, j, ci, matrix, (values, labels), var))
    for k, (num, den) in enumerate(req.ratios):  # ratios follow, as in memory
        key = ratio_key(k)
        pieces.append(ratio(s, f"{num}/{den}", key, reps.ratio(key) if reps else None))
    return pieces

