"""Checks of the design columns' values: rows with every design value, finite weights.

Helpers of :mod:`wstats.design.binding`, each pass in row tiles (no mask the size of the file
unless rows are missing).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.columns import row_tiles
from wstats.decoding.reasons import VALID
from wstats.errors import DesignError, WeightError

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.columns import DecodedColumn
    from wstats.design.bound import DeclaredDesign as Design

    Array = npt.NDArray[np.float64]
    Index = npt.NDArray[np.int64]

__all__ = ["check_weights", "complete_rows", "count_where", "row_no", "take"]


def take(a: npt.NDArray[Any], rows: Index | None) -> npt.NDArray[Any]:
    """Return *a* restricted to *rows* (all when None)."""
    return a if rows is None else a[rows]


def row_no(rows: Index | None, i: int) -> int:
    """Return the 1-based data row number of position *i* among the rows used."""
    return int(i if rows is None else rows[i]) + 1


def count_where(a: npt.NDArray[Any], test: Callable[[npt.NDArray[Any]], npt.NDArray[np.bool_]]
           ) -> int:
    """Return how many elements of *a* pass *test*, in row tiles (no mask the size of *a*)."""
    return sum(int(np.count_nonzero(test(a[tile]))) for tile in row_tiles(len(a)))


def missing(col: DecodedColumn, rows: slice) -> npt.NDArray[np.bool_]:
    """Return the mask of *rows* of *col* without a value (a reason, or NaN)."""
    if col.numeric:  # NaN exactly where not valid
        nan: npt.NDArray[np.bool_] = np.isnan(col.values[rows])
        return nan
    return np.asarray(col.reasons[rows] != VALID)


def complete_rows(design: Design, cols: dict[str, DecodedColumn], n: int
                   ) -> npt.NDArray[np.bool_] | None:
    """Return the mask of rows with every design value present (None: every row has them).

    Raise unless dropping. Columns are checked in row tiles; a mask the size of the file is
    built only when rows are missing.
    """
    keep: npt.NDArray[np.bool_] | None = None
    everything = slice(None)
    for role, col in cols.items():
        count = sum(int(np.count_nonzero(missing(col, tile))) for tile in row_tiles(n))
        if not count:
            continue
        bad = missing(col, everything)
        not_finite(col, bad, role)
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


def not_finite(col: DecodedColumn, bad: npt.NDArray[np.bool_], role: str) -> None:
    """Raise naming infinite raw design values (decoding made them invalid, not missing)."""
    raw = col.raw
    if raw is None or raw.dtype.kind != "f":
        return
    inf = bad & np.isinf(raw)
    if not inf.any():
        return
    where = (f"{role} column '{col.name}' has {int(inf.sum())} infinite values (first: row "
             f"{int(np.argmax(inf)) + 1})")
    if role == "weight":
        raise WeightError(f"{where}; weights must be finite and >= 0")
    if role == "fpc":
        raise DesignError(f"{where}; an FPC is a PSU population count (> 1) or a sampling "
                          "fraction (<= 1): give that number, or leave the FPC out to treat "
                          "the first stage as sampled with replacement")
    raise DesignError(f"{where}; give every row a finite {role} code")


def check_weights(w: npt.NDArray[Any], name: str, rows: Index | None) -> Array:
    """Return weights as float64 after checking they are finite, >= 0 and not all zero."""
    w = np.asarray(w, dtype=np.float64)
    tests: list[tuple[Callable[[Array], npt.NDArray[np.bool_]], str]] = [
        (lambda part: ~np.isfinite(part), "infinite"), (lambda part: part < 0, "negative")]
    for test, what in tests:
        found = count_where(w, test)
        if found:
            raise WeightError(
                f"weight column '{name}' has {found} {what} values (first: row "
                f"{row_no(rows, int(np.argmax(test(w))))}); weights must be finite and >= 0"
            )
    if not count_where(w, lambda part: part > 0):
        raise WeightError(f"weight column '{name}' is 0 in every row; name the analysis weight")
    return w
