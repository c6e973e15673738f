"""Levels of a categorical variable: their order and labels, and each row's level index."""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.errors import EstimationError

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.columns import DecodedColumn

    Array = npt.NDArray[np.float64]
    Index = npt.NDArray[np.int64]

__all__ = ["MAX_LEVELS", "category_levels", "distinct_values", "integer_codes", "level_index"]

MAX_LEVELS = 200  # more distinct values than this is not a categorical variable


def category_levels(col: DecodedColumn, observed: npt.NDArray[Any] | None = None
                    ) -> tuple[list[Any], list[str]]:
    """Return the levels of a categorical column and their labels.

    Order: labelled values in the order of the value labels (codebook or file), then any
    unlabelled observed valid values in sorted order. Labels are the value labels, else the
    value as text (integers without a decimal point). *observed*: the distinct valid values
    of a numeric column when the caller has them already.
    """
    if col.values.dtype.kind != "f":
        seen = np.unique(col.values[col.valid].astype(str)).tolist()
        return list(seen), [str(s) for s in seen]
    labelled = list(col.value_labels)
    if observed is None:
        observed = distinct_values(col.values[col.valid])
    extra = [float(v) for v in observed if v not in col.value_labels]
    values = [*labelled, *extra]
    if len(values) > MAX_LEVELS:
        raise EstimationError(
            f"variable '{col.name}' has {len(values)} distinct values; levels of a categorical "
            f"variable are limited to {MAX_LEVELS}: estimate a mean or give it coded categories"
        )
    return values, [col.value_labels.get(v, _fmt(v)) for v in values]


def _fmt(v: float) -> str:
    """Return a numeric level as text: ``3`` for 3.0, ``2.5`` for 2.5."""
    return str(int(v)) if float(v).is_integer() else repr(float(v))


def level_index(col: DecodedColumn, values: Sequence[Any], valid: npt.NDArray[np.bool_]
                 ) -> Index:
    """Return the level number of each row (-1 where not valid or not a level)."""
    n = len(col.values)
    if not values:
        return np.full(n, -1, dtype=np.int64)
    keys = col.values.astype(str) if col.values.dtype.kind != "f" else col.values
    lv = np.asarray(values, dtype=keys.dtype if keys.dtype.kind == "f" else str)
    if keys.dtype.kind == "f" and _small_integers(lv):
        return _integer_level_index(keys, lv, valid)
    order = np.argsort(lv, kind="stable")
    pos = np.clip(np.searchsorted(lv[order], keys), 0, len(lv) - 1)
    hit = valid & (lv[order][pos] == keys)
    return np.where(hit, order[pos], -1).astype(np.int64)


_SPAN = 100_000  # integer codes spanning at most this many values use lookup tables


def _small_integers(v: Array) -> bool:
    """Tell whether *v* holds only whole numbers within a span a lookup table can cover."""
    if not len(v) or not np.isfinite(v).all():
        return False
    lo, hi = float(v.min()), float(v.max())
    return hi - lo <= _SPAN and bool((v == np.floor(v)).all())


def _integer_level_index(keys: Array, lv: Array, valid: npt.NDArray[np.bool_]) -> Index:
    """Return level numbers through a lookup table over the integer codes (first match)."""
    lo, span = float(lv.min()), int(lv.max() - lv.min())
    table = np.full(span + 2, -1, dtype=np.int64)  # last slot: outside the span
    table[(lv[::-1] - lo).astype(np.int64)] = np.arange(len(lv))[::-1]
    inside = valid & (keys >= lo) & (keys <= lo + span)  # NaN compares False
    idx = table[np.where(inside, keys - lo, span + 1).astype(np.int64)]
    hit = (idx >= 0) & (lv[np.maximum(idx, 0)] == keys)  # a non-integer key is no level
    return np.where(hit, idx, -1).astype(np.int64)


def distinct_values(v: npt.NDArray[Any]) -> npt.NDArray[Any]:
    """Return the sorted distinct values of *v*: a bincount for small integer codes."""
    codes = integer_codes(v)
    if codes is None:
        return np.unique(v)
    return np.flatnonzero(np.bincount(codes[0])) + codes[1]


def integer_codes(v: npt.NDArray[Any]) -> tuple[Index, float] | None:
    """Return (v - min(v) as int64, min(v)) when *v* holds whole numbers of a small span."""
    if v.dtype.kind != "f" or not len(v):
        return None
    lo, hi = float(v.min()), float(v.max())
    if not (np.isfinite(lo) and np.isfinite(hi)) or hi - lo > _SPAN:
        return None
    shifted = v - lo
    codes = shifted.astype(np.int64)
    return (codes, lo) if bool((codes == shifted).all()) else None
