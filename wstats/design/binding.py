"""Binding a declared design to data: checked weights, coded strata and PSUs, FPC, replicates.

:func:`bind` turns a :class:`~wstats.design.declared.Design` and a decoded dataset into the arrays
of a :class:`~wstats.design.bound.BoundDesign` (conventions in :mod:`wstats.design.declared`).
Every pass over the rows works in row tiles or in place: the stratum and PSU codes are int32, the
(stratum, PSU) key is built in the PSU codes' own memory, and a mask the size of the file is made
only when rows are missing.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.columns import code_type, row_tiles
from wstats.decoding.reasons import VALID
from wstats.design.bound import BoundDesign
from wstats.design.replicates import (
    jackknife_strata_factors,
    replicate_df,
    replicate_scale,
    resolve_replicate_columns,
)
from wstats.errors import DesignError, SingletonStratumError, WeightError, did_you_mean

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.columns import Dataset, DecodedColumn
    from wstats.design.bound import DeclaredDesign as Design

    Array = npt.NDArray[np.float64]
    Index = npt.NDArray[np.int64]
    #: per-row codes (strata, PSUs): int32 unless there are 2**31 or more distinct values
    Codes = npt.NDArray[np.signedinteger[Any]]

__all__ = ["bind", "singleton_error"]

_SHOW = 5  # how many offending strata a message lists


def singleton_error(labels: Sequence[str]) -> SingletonStratumError:
    """Return the error listing strata with one PSU and the alternatives."""
    shown = ", ".join(f"'{s}'" for s in labels[:_SHOW])
    more = f" and {len(labels) - _SHOW} more" if len(labels) > _SHOW else ""
    return SingletonStratumError(
        f"{len(labels)} strata have a single PSU ({shown}{more}); the variance cannot be "
        "estimated there: choose a treatment with --singleton certainty, center or collapse "
        "(in Python: Design(..., singleton='certainty'))"
    )


def bind(design: Design, data: Dataset) -> BoundDesign:
    """Validate *design* against *data* and build the BoundDesign (see ``Design.bind``)."""
    src = data.source or "the data"
    cols = _design_columns(design, data, src)
    keep = _complete_rows(design, cols, data.n_rows)
    rows = None if keep is None else np.flatnonzero(keep)
    w = _check_weights(_take(cols["weight"].values, rows), design.weight, rows)
    stratum, labels = _codes(cols.get("strata"), rows, len(w))
    psu_codes = _codes(cols["psu"], rows, len(w))[0] if design.psu else None
    psu, psu_stratum = _psu_index(stratum, psu_codes)
    n_h = np.bincount(psu_stratum, minlength=len(labels)).astype(np.int64)
    f_h = _fpc(cols.get("fpc"), design.fpc, rows, stratum, n_h, labels)
    singles = int((n_h == 1).sum())
    if design.replicates is None:
        if len(psu_stratum) < 2:
            raise DesignError(
                f"the design has {len(psu_stratum)} PSU in {src}; a variance needs at least 2 "
                "PSUs (check the psu column or use replicate weights)"
            )
        psu_stratum, n_h, f_h, labels = _singletons(design.singleton, psu_stratum, n_h, f_h,
                                                     labels)
    reps = _replicates(design, data, rows, w, stratum, n_h, src)
    df = float(len(psu_stratum) - len(n_h))
    if reps is not None:
        named = design.strata is not None or design.psu is not None
        df = replicate_df(design.replicate_method or "", reps[0].shape[1], df if named else None)
    return BoundDesign(
        design=design, rows=rows, weights=w, psu=psu, psu_stratum=psu_stratum, n_h=n_h,
        f_h=f_h, stratum_labels=tuple(labels), singleton_strata=singles,
        replicate_weights=None if reps is None else reps[0],
        replicate_columns=() if reps is None else reps[1],
        scale=1.0 if reps is None else reps[2], factors=None if reps is None else reps[3],
        df=df, dropped_rows=0 if rows is None else data.n_rows - len(rows),
        zero_weights=_count(w, lambda part: part == 0),
    )


def _take(a: npt.NDArray[Any], rows: Index | None) -> npt.NDArray[Any]:
    """Return *a* restricted to *rows* (all when None)."""
    return a if rows is None else a[rows]


def _row_no(rows: Index | None, i: int) -> int:
    """Return the 1-based data row number of position *i* among the rows used."""
    return int(i if rows is None else rows[i]) + 1


def _design_columns(design: Design, data: Dataset, src: str) -> dict[str, DecodedColumn]:
    """Return role -> column for the declared design columns; raise if one is absent."""
    roles = {"weight": design.weight, "strata": design.strata, "psu": design.psu,
             "fpc": design.fpc}
    out: dict[str, DecodedColumn] = {}
    for role, name in roles.items():
        if name is None:
            continue
        if name not in data.columns:
            # a reader may list every file column (the data may hold only those read)
            known = data.metadata.get("file_columns") or list(data.columns)
            if name in known:
                raise DesignError(
                    f"column '{name}' given as {role} is in {src} but was not read; "
                    "read the design columns together with the variables"
                )
            raise DesignError(
                f"column '{name}' given as {role} is not in {src}{did_you_mean(name, known)}"
            )
        out[role] = data.columns[name]
    w = out["weight"]
    if w.kind == "text" or w.values.dtype.kind not in "fiub":
        raise WeightError(
            f"weight column '{design.weight}' in {src} holds text, not numbers; "
            "name the numeric final-weight column"
        )
    if "fpc" in out and out["fpc"].values.dtype.kind not in "fiub":
        raise DesignError(f"fpc column '{design.fpc}' in {src} holds text; it must be numeric")
    return out


def _count(a: npt.NDArray[Any], test: Callable[[npt.NDArray[Any]], npt.NDArray[np.bool_]]
           ) -> int:
    """Return how many elements of *a* pass *test*, in row tiles (no mask the size of *a*)."""
    return sum(int(np.count_nonzero(test(a[tile]))) for tile in row_tiles(len(a)))


def _missing(col: DecodedColumn, rows: slice) -> npt.NDArray[np.bool_]:
    """Return the mask of *rows* of *col* without a value (a reason, or NaN)."""
    if col.numeric:  # NaN exactly where not valid
        nan: npt.NDArray[np.bool_] = np.isnan(col.values[rows])
        return nan
    return np.asarray(col.reasons[rows] != VALID)


def _complete_rows(design: Design, cols: dict[str, DecodedColumn], n: int
                   ) -> npt.NDArray[np.bool_] | None:
    """Return the mask of rows with every design value present (None: every row has them).

    Raise unless dropping. Columns are checked in row tiles; a mask the size of the file is
    built only when rows are missing.
    """
    keep: npt.NDArray[np.bool_] | None = None
    everything = slice(None)
    for role, col in cols.items():
        count = sum(int(np.count_nonzero(_missing(col, tile))) for tile in row_tiles(n))
        if not count:
            continue
        bad = _missing(col, everything)
        if role == "weight":
            _weight_not_finite(col, bad)
        if not design.drop_incomplete:
            error = WeightError if role == "weight" else DesignError
            raise error(
                f"{role} column '{col.name}' is missing in {count} rows (first: row "
                f"{int(np.argmax(bad)) + 1}); fix the data or drop such rows "
                "(--drop-incomplete, drop_incomplete=True)"
            )
        keep = ~bad if keep is None else keep & ~bad
    if keep is not None and not keep.any():
        raise DesignError("no row has a complete weight/stratum/PSU; check the design columns")
    return keep


def _weight_not_finite(col: DecodedColumn, bad: npt.NDArray[np.bool_]) -> None:
    """Raise WeightError naming infinite raw weights (decoding made them invalid)."""
    raw = col.raw
    if raw is None or raw.dtype.kind != "f":
        return
    inf = bad & np.isinf(raw)
    if inf.any():
        raise WeightError(
            f"weight column '{col.name}' has {int(inf.sum())} infinite values (first: row "
            f"{int(np.argmax(inf)) + 1}); weights must be finite and >= 0"
        )


def _check_weights(w: npt.NDArray[Any], name: str, rows: Index | None) -> Array:
    """Return weights as float64 after checking they are finite, >= 0 and not all zero."""
    w = np.asarray(w, dtype=np.float64)
    tests: list[tuple[Callable[[Array], npt.NDArray[np.bool_]], str]] = [
        (lambda part: ~np.isfinite(part), "infinite"), (lambda part: part < 0, "negative")]
    for test, what in tests:
        count = _count(w, test)
        if count:
            raise WeightError(
                f"weight column '{name}' has {count} {what} values (first: row "
                f"{_row_no(rows, int(np.argmax(test(w))))}); weights must be finite and >= 0"
            )
    if not _count(w, lambda part: part > 0):
        raise WeightError(f"weight column '{name}' is 0 in every row; name the analysis weight")
    return w


def _label(col: DecodedColumn, value: Any) -> str:
    """Return the label of a stratum/PSU value: its value label, else the value as text."""
    if isinstance(value, float | np.floating):
        if value in col.value_labels:
            return col.value_labels[float(value)]
        return str(int(value)) if float(value).is_integer() else repr(float(value))
    return str(value)


def _codes(col: DecodedColumn | None, rows: Index | None, n: int) -> tuple[Codes, list[str]]:
    """Return codes 0..K-1 in sorted value order and the labels of the K values.

    Without a column every row has code 0: a read-only view of one value, no memory per row.
    """
    if col is None:
        return np.broadcast_to(np.int32(0), (n,)), ["all"]
    values = _take(col.values, rows)
    if values.dtype.kind not in "fiub":
        values = values.astype(str)
    uniq, inverse = _unique_inverse(values)
    return inverse, [_label(col, v) for v in uniq.tolist()]


def _unique_inverse(values: npt.NDArray[Any], *, in_place: bool = False
                    ) -> tuple[npt.NDArray[Any], Codes]:
    """Return the sorted distinct values and each value's position among them.

    Positions are int32 unless there are 2**31 or more distinct values. Whole numbers of a
    small span (strata, PSU numbers) take a lookup table instead of a sort, in row tiles
    (temporaries the size of a tile). ``in_place=True`` writes the positions over *values*
    on that path when *values* has the positions' integer type, and returns it.
    """
    if values.dtype.kind in "fiu" and len(values):
        lo, hi = values.min(), values.max()
        if np.isfinite(lo) and np.isfinite(hi) and float(hi) - float(lo) <= 2 * len(values):
            seen = np.zeros(int(float(hi) - float(lo)) + 1, dtype=bool)
            tiles = row_tiles(len(values))
            whole = True
            for tile in tiles:  # loop over row tiles, not rows
                shifted = values[tile] - lo
                codes = shifted.astype(np.int64)
                if not bool((codes == shifted).all()):
                    whole = False
                    break
                seen[codes] = True
            if whole:
                kept = np.flatnonzero(seen)
                kind = code_type(len(kept))
                position = np.cumsum(seen, dtype=kind)  # (a table at most 2 codes a row)
                position -= 1
                uniq = (kept + lo).astype(values.dtype)
                own = in_place and values.dtype == kind
                inverse = values if own else np.empty(len(values), dtype=kind)
                for tile in tiles:
                    inverse[tile] = position[(values[tile] - lo).astype(np.int64)]
                return uniq, inverse
    uniq, inverse = np.unique(values, return_inverse=True)
    return uniq, inverse.astype(code_type(len(uniq))).ravel()


def _psu_index(stratum: Codes, psu: Codes | None) -> tuple[Codes, Index]:
    """Return the global PSU index of each row (nested in strata) and the stratum per PSU.

    *psu* (codes 0..K-1, owned by the caller) is overwritten: the (stratum, PSU) key and
    then the index are built in its memory, tile by tile, so binding holds no extra column.
    """
    if psu is None:
        order = np.argsort(stratum, kind="stable")
        index = np.empty(len(stratum), dtype=code_type(len(stratum)))
        index[order] = np.arange(len(stratum))
        return index, stratum[order].astype(np.int64)
    span = int(psu.max(initial=0)) + 1
    if (int(stratum.max(initial=0)) + 1) * span > np.iinfo(psu.dtype).max:
        psu = psu.astype(np.int64)  # the (stratum, PSU) key needs the wider type
    for tile in row_tiles(len(psu)):  # key = stratum * span + psu, in place
        part = psu[tile]
        part += stratum[tile].astype(psu.dtype) * span
    uniq, inverse = _unique_inverse(psu, in_place=True)
    return inverse, (uniq // span).astype(np.int64)


def _fpc(col: DecodedColumn | None, name: str | None, rows: Index | None, stratum: Codes,
         n_h: Index, labels: list[str]) -> Array:
    """Return the first-stage sampling fraction per stratum from the FPC column."""
    if col is None:
        return np.zeros(len(n_h))
    v = np.asarray(_take(col.values, rows), dtype=np.float64)
    if not (np.isfinite(v) & (v > 0)).all():
        bad = ~(np.isfinite(v) & (v > 0))
        raise DesignError(
            f"fpc column '{name}' has {int(bad.sum())} values that are not positive (first: row "
            f"{_row_no(rows, int(np.argmax(bad)))}); give PSU counts (> 1) or fractions in (0, 1]"
        )
    if (v < 1).any() and (v > 1).any():
        raise DesignError(
            f"fpc column '{name}' mixes sampling fractions (< 1) and PSU counts (> 1); give one "
            "kind for every stratum"
        )
    order = np.argsort(stratum, kind="stable")
    starts = np.flatnonzero(np.r_[True, np.diff(stratum[order]) != 0])
    low, high = np.minimum.reduceat(v[order], starts), np.maximum.reduceat(v[order], starts)
    varying = np.flatnonzero(low != high)
    if len(varying):
        raise DesignError(
            f"fpc column '{name}' is not constant within stratum '{labels[varying[0]]}' "
            f"({low[varying[0]]:g} to {high[varying[0]]:g}); it must be one value per stratum"
        )
    short = np.flatnonzero((low > 1) & (low < n_h))
    if len(short):
        h = short[0]
        raise DesignError(
            f"fpc column '{name}' gives {low[h]:g} PSUs in stratum '{labels[h]}' but {n_h[h]} "
            "were sampled there; give the population count of PSUs (>= sampled) or a fraction"
        )
    return np.asarray(np.where(low > 1, n_h / low, low), dtype=np.float64)


def _singletons(treatment: str, psu_stratum: Index, n_h: Index, f_h: Array,
                labels: list[str]) -> tuple[Index, Index, Array, list[str]]:
    """Apply the singleton treatment: fail, or collapse strata; others act in the variance."""
    single = n_h == 1
    if not single.any() or treatment in ("certainty", "center"):
        return psu_stratum, n_h, f_h, labels
    if treatment == "fail":
        raise singleton_error([labels[h] for h in np.flatnonzero(single)])
    group = _collapse_groups(single)
    n_g = np.bincount(group, weights=n_h).astype(np.int64)
    with np.errstate(divide="ignore"):
        pop = np.where(f_h > 0, n_h / np.where(f_h > 0, f_h, 1.0), np.inf)
    pop_g = np.bincount(group, weights=pop)
    f_g = np.where(np.isinf(pop_g), 0.0, n_g / np.where(np.isinf(pop_g), 1.0, pop_g))
    names = ["+".join(labels[h] for h in np.flatnonzero(group == g)) for g in range(len(n_g))]
    return group[psu_stratum], n_g, np.asarray(f_g, dtype=np.float64), names


def _collapse_groups(single: npt.NDArray[np.bool_]) -> Index:
    """Return the pool of each stratum: a singleton joins the next stratum (last: previous)."""
    starts = np.r_[True, ~single[:-1]]
    group = np.cumsum(starts) - 1
    if single[-1] and starts[-1] and group[-1] > 0:
        group[-1] -= 1
    return group.astype(np.int64)


def _replicates(design: Design, data: Dataset, rows: Index | None, w: Array, stratum: Codes,
                n_h: Index, src: str) -> tuple[Array, tuple[str, ...], float, Array] | None:
    """Return (matrix, columns, scale, factors) of a replicate design, or None."""
    if design.replicates is None:
        return None
    names = resolve_replicate_columns(design.replicates, list(data.columns), src)
    if len(names) < 2:
        raise DesignError(f"only {len(names)} replicate-weight column found; at least 2 needed")
    for name in names:
        if data.columns[name].values.dtype.kind not in "fiub":
            raise WeightError(f"replicate-weight column '{name}' in {src} holds text")
    rep = np.column_stack([_take(data.columns[c].values, rows) for c in names]).astype(np.float64)
    bad = ~np.isfinite(rep) | (rep < 0)
    if bad.any():
        r, c = np.unravel_index(int(np.argmax(bad)), bad.shape)
        raise WeightError(
            f"replicate-weight column '{names[c]}' has a missing, infinite or negative value "
            f"(row {_row_no(rows, int(r))}); replicate weights must be finite and >= 0"
        )
    factors = _replicate_factors(design, rep, w, stratum, n_h)
    method = design.replicate_method or ""
    scale = replicate_scale(method, len(names), design.fay_rho, design.replicate_scale)
    return rep, tuple(names), scale, factors


def _replicate_factors(design: Design, rep: Array, w: Array, stratum: Codes,
                       n_h: Index) -> Array:
    """Return the per-replicate factors: given, derived (jackknife-strata) or ones."""
    n_rep = rep.shape[1]
    if design.replicate_factors is not None:
        f = np.asarray(design.replicate_factors, dtype=np.float64)
        if len(f) != n_rep:
            raise DesignError(
                f"replicate_factors has {len(f)} values for {n_rep} replicate columns; "
                "give one factor per replicate"
            )
        return f
    if design.replicate_method != "jackknife-strata":
        return np.ones(n_rep)
    if design.strata is None or design.psu is None:
        raise DesignError(
            "replicate_method 'jackknife-strata' needs strata and psu columns (to find n_h) "
            "or replicate_factors"
        )
    return jackknife_strata_factors(rep, w, stratum, n_h)
