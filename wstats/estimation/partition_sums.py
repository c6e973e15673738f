"""What one partition of the data contributes: weighted sums by (file, stratum, PSU, domain).

A worker of the Dask engine (:mod:`wstats.estimation.dask_engine`) reads one partition (a
file, or a range of rows of a Parquet file), decodes it with the codebook and reduces it to
sums grouped by the raw key (file, stratum value, PSU value, inside the ``where`` domain,
by-variable values). Sums of different partitions add up; the estimates are made from the
added sums (:mod:`wstats.estimation.from_sums`), so no partition's rows ever meet another's.

Weights are not rescaled here: a pooled file's factor multiplies its sums afterwards (sums
linear in w by lambda, sums of w^2 by lambda^2).
"""

from __future__ import annotations

import sys
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.reasons import VALID
from wstats.decoding.stacking import FILE_COLUMN, NOT_IN_FILE
from wstats.errors import DesignError, WeightError
from wstats.estimation.partition_rates import Rates, rate_columns, reason_sums

if TYPE_CHECKING:
    import numpy.typing as npt
    import pandas as pd

    from wstats.decoding.columns import Dataset

    Array = npt.NDArray[np.float64]

__all__ = ["KEYS", "PartSums", "Request", "Task", "by_key", "partition_sums", "ratio_key"]

#: key columns of every partition's sums (by-variables follow as b0, b1, ...)
KEYS = ("_file", "_s", "_p", "_in")


def by_key(j: int) -> str:
    """Return the key column of the j-th by-variable."""
    return f"b{j}"


@dataclass(frozen=True)
class Task:
    """One partition: a file (or a row range of it) and the file's place in the pool."""

    path: str
    file: int
    rows: tuple[int, int | None] | None = None


@dataclass(frozen=True)
class Request:
    """What every partition sums (the same for all partitions of a run)."""

    weight: str
    strata: str | None
    psu: str | None
    replicates: tuple[str, ...]
    by: tuple[str, ...]
    where: str | None
    numeric: tuple[str, ...]
    categorical: tuple[str, ...]
    columns: tuple[str, ...]
    codebook: Any = None
    encoding: str = "utf-8"
    ratios: tuple[tuple[str, str], ...] = ()
    rates: Rates | None = None
    quantiles: tuple[str, ...] = ()


@dataclass
class PartSums:
    """Sums of one partition (or of several, added).

    Attributes
    ----------
    main : grouped by KEYS + by-keys: ``rows``, ``zero_w``, ``w_all`` (sum w) and per
        variable j ``y{j}``
        (sum w y), ``w{j}`` (sum w), ``q{j}`` (sum w y^2), ``n{j}`` (rows), ``s{j}``
        (sum w^2) over its valid rows, and ``r{j}:{reason}`` (rows per not-valid reason).
    levels : per categorical variable j: grouped by the keys and ``value``: ``w`` (sum w).
    reps : replicate designs: grouped by ``_file``, ``_in`` and by-keys: ``R{r}y{j}``,
        ``R{r}w{j}`` (sums of replicate weight r times y, times 1, over valid rows) and, per
        categorical variable, ``R{r}l{j}:{value}``.
    labels : per variable (and by-variable): value labels, first partition's wording first.
    kinds : per variable: its kind and whether it holds text.
    reasons : every reason name met, in the order met.
    absent : variable -> the files (0..K-1) that do not have it.
    """

    main: pd.DataFrame
    levels: dict[int, pd.DataFrame]
    reps: pd.DataFrame | None
    labels: dict[str, dict[float, str]] = field(default_factory=dict)
    kinds: dict[str, tuple[str, bool]] = field(default_factory=dict)
    reasons: list[str] = field(default_factory=list)
    absent: dict[str, list[int]] = field(default_factory=dict)


def partition_sums(task: Task, req: Request) -> PartSums:
    """Read and decode one partition and return its sums (runs on a worker).

    Each summed column is made and added into its groups one at a time, so a worker holds
    the partition's decoded columns plus a few columns of the partition's length. Between
    partitions the arrays are freed and the Parquet reader's unused memory goes back to the
    system, so a worker's peak does not creep with the partitions it reads
    (benchmarks/scale.py at 10x: 401 MiB without, 380 MiB with; 362 MiB at 1x).
    """
    try:
        return _partition_sums(task, req)
    finally:
        _release_reader_memory()


def _release_reader_memory() -> None:
    """Free the partition's arrays now (a cycle could keep them until the collector runs)
    and return the memory pyarrow's pool holds but no longer uses."""
    import gc

    gc.collect()
    pa = sys.modules.get("pyarrow")
    if pa is not None:
        pa.default_memory_pool().release_unused()


def _partition_sums(task: Task, req: Request) -> PartSums:
    """Read, decode and sum one partition (see :func:`partition_sums`)."""
    from wstats.decoding.load import read

    present = _present(task.path, req)
    data = read(task.path, [c for c in req.columns if c in present], req.codebook, task.rows,
                False, req.encoding)
    indicators = {i for _, i in req.rates.items} if req.rates else set()
    wanted = [n for n in dict.fromkeys((*req.by, *req.numeric, *req.categorical,
                                        *(v for r in req.ratios for v in r), *req.quantiles,
                                        *(v for v, _ in (req.rates.items if req.rates else ()))))
              if n != FILE_COLUMN and n not in indicators]
    own = [n for n in wanted if n in data.columns]  # the others: not_in_file here
    data = _fill_absent(data, [n for n in wanted if n not in data.columns])
    data = _with_file(data, task.file)
    if req.rates is not None:  # nonresponse indicators, made from the items' reasons
        data = rate_columns(data, req.rates)
        own += sorted(indicators)
    keys = _keys(data, task, req)
    names = [*KEYS, *(by_key(j) for j in range(len(req.by)))]
    w = _weights(data, req.weight, task.path)
    groups = _Groups(keys, names)
    groups.add({"rows": np.ones(data.n_rows), "zero_w": (w == 0).astype(float), "w_all": w})
    valued = (*req.numeric, *req.categorical, *req.quantiles)
    for j, name in enumerate(valued):  # loop over variables
        groups.add(_variable_columns(data, name, j, w, j < len(req.numeric)))
    for k, (num, den) in enumerate(req.ratios):
        groups.add(_ratio_columns(data, num, den, ratio_key(k), w))
    if req.rates is not None:
        groups.add(reason_sums(data, req.rates, w))
    levels = {j: _level_sums(data, name, groups, w)  # categories, and values of quantiles
              for j, name in enumerate(valued) if j >= len(req.numeric)}
    reps = _replicate_sums(data, req, keys, names) if req.replicates else None
    labels = {n: dict(data.columns[n].value_labels) for n in own}
    kinds = {n: (data.columns[n].kind, not data.columns[n].numeric) for n in own}
    absent = {n: [task.file] for n in wanted if n not in own}
    return PartSums(groups.frame(), levels, reps, labels, kinds, list(data.vocabulary.names),
                    absent)


class _Groups:
    """The groups of a partition's rows by their key columns, and column sums by group."""

    def __init__(self, keys: dict[str, Any], names: list[str]) -> None:
        import pandas as pd

        frame = pd.DataFrame({n: keys[n] for n in names})
        self.ids = frame.groupby(names, dropna=False, sort=False).ngroup().to_numpy()
        _, first = np.unique(self.ids, return_index=True)
        self.keys = frame.iloc[first].reset_index(drop=True)
        self.sums: dict[str, Array] = {}

    def add(self, columns: dict[str, Any] | Iterator[tuple[str, Any]]) -> None:
        """Add each column's sum by group; from an iterator, one column is made at a time."""
        n = len(self.keys)
        for name, values in (columns.items() if isinstance(columns, dict) else columns):
            self.sums[name] = np.asarray(np.bincount(self.ids, weights=values, minlength=n),
                                         dtype=np.float64)

    def frame(self) -> pd.DataFrame:
        """Return the keys and the sums, one row per group."""
        import pandas as pd

        return pd.concat([self.keys, pd.DataFrame(self.sums)], axis=1)


def _present(path: str, req: Request) -> set[str]:
    """Return the names the file can give: its columns and the codebook's derived variables."""
    from wstats.readers.dispatch import file_columns

    derived = getattr(req.codebook, "derived", None) or {}
    return {*file_columns(path), *derived}


def _fill_absent(data: Dataset, names: list[str]) -> Dataset:
    """Return *data* with a column of reason ``not_in_file`` for each name the file lacks.

    As pooling in memory does (:mod:`wstats.decoding.stacking`): the rows count as item
    nonresponse. A design column the file lacks is an error later, naming it.
    """
    if not names:
        return data
    from wstats.decoding.columns import Dataset, DecodedColumn

    code = data.vocabulary.add(NOT_IN_FILE)
    cols = dict(data.columns)
    for name in names:
        cols[name] = DecodedColumn.of_codes(name, np.full(data.n_rows, np.nan),
                                            np.full(data.n_rows, code, np.int8),
                                            data.vocabulary, kind="categorical")
    return Dataset(cols, data.vocabulary, data.n_rows, data.source, data.metadata)


def _with_file(data: Dataset, file: int) -> Dataset:
    """Return *data* with ``_file`` (the file's place in the pool, 1..K) for conditions."""
    from wstats.decoding.columns import Dataset, DecodedColumn

    col = DecodedColumn.of_codes(FILE_COLUMN, np.full(data.n_rows, file + 1.0),
                                 np.zeros(0, np.int8), data.vocabulary, kind="categorical")
    return Dataset({**data.columns, FILE_COLUMN: col}, data.vocabulary, data.n_rows,
                   data.source, data.metadata)


def _keys(data: Dataset, task: Task, req: Request) -> dict[str, Any]:
    """Return the key columns of the partition's rows (by-values NaN where not valid)."""
    n = data.n_rows
    out: dict[str, Any] = {"_file": np.full(n, task.file, dtype=np.int64)}
    for key, name in (("_s", req.strata), ("_p", req.psu)):
        if name is None:
            out[key] = np.zeros(n)
            continue
        col = data.columns[name]
        if not bool(col.valid.all()):
            raise DesignError(f"{key == '_s' and 'strata' or 'psu'} column '{name}' is missing "
                              f"in {int((~col.valid).sum())} rows of {task.path}; the Dask "
                              "engine needs complete design columns")
        out[key] = col.values
    out["_in"] = _inside(data, req.where)
    for j, name in enumerate(req.by):
        if name == FILE_COLUMN:  # the file's place in the pool: codes 1..K
            out[by_key(j)] = np.where(out["_in"], task.file + 1.0, np.nan)
            continue
        col = data.columns[name]
        values = col.values if col.numeric else col.values.astype(str)
        blank: Any = np.nan if col.numeric else None
        out[by_key(j)] = np.where(col.valid & out["_in"], values, blank)
    return out


def _inside(data: Dataset, where: str | None) -> npt.NDArray[np.bool_]:
    """Return the rows of the population domain (the ``where`` condition holds)."""
    if where is None:
        return np.ones(data.n_rows, dtype=bool)
    from wstats.decoding.expressions import parse_expression

    expr = parse_expression(where, list(data.columns), "where")
    values, reasons = expr.evaluate(data.columns, data.vocabulary, data.n_rows)
    return np.asarray((reasons == VALID) & (np.nan_to_num(values, nan=0.0) != 0))


def _weights(data: Dataset, name: str, path: str) -> Array:
    """Return the weights, checked finite and >= 0."""
    w = np.asarray(data.columns[name].values, dtype=np.float64)
    bad = ~np.isfinite(w) | (w < 0)
    if bad.any():
        raise WeightError(f"weight column '{name}' has {int(bad.sum())} missing, infinite or "
                          f"negative values in {path}; weights must be finite and >= 0")
    return w


def _variable_columns(data: Dataset, name: str, j: int, w: Array, numeric: bool
                      ) -> dict[str, Any]:
    """Return the per-row columns whose sums a variable needs."""
    col = data.columns[name]
    valid = col.valid
    wv = np.where(valid, w, 0.0)
    out: dict[str, Any] = {f"w{j}": wv, f"n{j}": valid.astype(float), f"s{j}": wv * w}
    if numeric:
        y = np.where(valid, col.values, 0.0)
        out[f"y{j}"] = wv * y
        out[f"q{j}"] = wv * y * y
    names = data.vocabulary.names
    reasons = col.reasons
    for code in np.unique(reasons[~valid]).tolist():  # loop over reasons met, not rows
        out[f"r{j}:{names[int(code)]}"] = (reasons == code).astype(float)
    return out


def ratio_key(k: int) -> str:
    """Return the column key of the k-th ratio's sums."""
    return f"q{k}:"


def _ratio_columns(data: Dataset, num: str, den: str, key: str, w: Array) -> dict[str, Any]:
    """Return the per-row columns a ratio needs, over rows where both variables are valid.

    Sums of w y, w x, w y^2, w x y, w x^2 give the ratio, its linearized totals and the
    SRS variance of e = y - R x for any R; the reasons are the two variables' combined.
    """
    cy, cx = data.columns[num], data.columns[den]
    reasons = data.vocabulary.combine(cy.reasons, cx.reasons)
    both = reasons == VALID
    y, x = np.where(both, cy.values, 0.0), np.where(both, cx.values, 0.0)
    wb = np.where(both, w, 0.0)
    out: dict[str, Any] = {f"w{key}": wb, f"n{key}": both.astype(float), f"s{key}": wb * w,
                           f"y{key}": wb * y, f"x{key}": wb * x, f"yy{key}": wb * y * y,
                           f"xy{key}": wb * x * y, f"xx{key}": wb * x * x}
    names = data.vocabulary.names
    for code in np.unique(reasons[~both]).tolist():  # loop over reasons met, not rows
        out[f"r{key}:{names[int(code)]}"] = (reasons == code).astype(float)
    return out


def _level_sums(data: Dataset, name: str, groups: _Groups, w: Array) -> pd.DataFrame:
    """Return sums of w by the keys and the categorical variable's value (valid rows)."""
    import pandas as pd

    col = data.columns[name]
    valid = col.valid
    frame = pd.DataFrame({"_g": groups.ids[valid],
                          "value": col.values[valid] if col.numeric
                          else col.values[valid].astype(str), "w": w[valid]})
    summed = frame.groupby(["_g", "value"], sort=False).sum().reset_index()
    keys = groups.keys.iloc[summed["_g"].to_numpy()].reset_index(drop=True)
    return pd.concat([keys, summed[["value", "w"]]], axis=1)


def _replicate_sums(data: Dataset, req: Request, keys: dict[str, Any], names: list[str]
                    ) -> pd.DataFrame:
    """Return replicate-weighted sums by file, domain and by-values."""
    rep = [np.asarray(data.columns[c].values, dtype=np.float64) for c in req.replicates]
    for name, column in zip(req.replicates, rep, strict=True):  # the decoded columns, no copy
        if not (np.isfinite(column).all() and (column >= 0).all()):
            raise WeightError(f"replicate weight '{name}' is missing, infinite or negative "
                              f"in {data.source}; replicate weights must be finite and >= 0")
    groups = _Groups(keys, [n for n in names if n not in ("_s", "_p")])
    n_rep = len(rep)
    for j, name in enumerate((*req.numeric, *req.categorical)):  # loop over variables
        col = data.columns[name]
        valid = col.valid
        if name in req.numeric:
            y = np.where(valid, col.values, 0.0)
            groups.add((f"R{r}y{j}", rep[r] * y) for r in range(n_rep))
        groups.add((f"R{r}w{j}", np.where(valid, rep[r], 0.0)) for r in range(n_rep))
        if name in req.categorical:
            values = col.values if col.numeric else col.values.astype(str)
            for v in np.unique(values[valid]).tolist():  # loop over levels
                hit = valid & (values == v)
                groups.add((f"R{r}l{j}:{v!r}", np.where(hit, rep[r], 0.0))
                           for r in range(n_rep))
    for k, (num, den) in enumerate(req.ratios):
        reasons = data.vocabulary.combine(data.columns[num].reasons, data.columns[den].reasons)
        both = reasons == VALID
        for part, source in (("y", num), ("x", den)):
            v = np.where(both, data.columns[source].values, 0.0)
            groups.add((f"R{r}{part}{ratio_key(k)}", rep[r] * v) for r in range(n_rep))
    return groups.frame()


def add_sums(a: PartSums, b: PartSums) -> PartSums:
    """Return the sums of two partitions (or groups of partitions) added."""
    import pandas as pd

    def add(x: pd.DataFrame | None, y: pd.DataFrame | None, keys: list[str]
            ) -> pd.DataFrame | None:
        if x is None or y is None:
            return x if y is None else y
        both = pd.concat([x, y], ignore_index=True).fillna({c: 0.0 for c in x.columns
                                                             if c not in keys})
        return both.groupby(keys, dropna=False, sort=False).sum().reset_index()

    keys = [c for c in a.main.columns if c in KEYS or c.startswith("b") and c[1:].isdigit()]
    main = add(a.main, b.main, keys)
    assert main is not None
    levels = {j: add(a.levels[j], b.levels[j], [*keys, "value"]) for j in a.levels}
    rep_keys = [k for k in keys if k not in ("_s", "_p")]
    labels = {n: {**b.labels.get(n, {}), **lab} for n, lab in a.labels.items()}
    reasons = list(dict.fromkeys([*a.reasons, *b.reasons]))
    absent = {n: sorted({*a.absent.get(n, []), *b.absent.get(n, [])})
              for n in {*a.absent, *b.absent}}
    return PartSums(main, {j: v for j, v in levels.items() if v is not None},
                    add(a.reps, b.reps, rep_keys), labels, {**b.kinds, **a.kinds}, reasons,
                    absent)
