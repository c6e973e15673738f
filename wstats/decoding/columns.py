"""Decoded data: values plus a reason per row, and the Dataset that holds such columns.

Invariants (checked when a column is built):
- ``values`` and ``reasons`` have the same length;
- a number value is NaN exactly where its reason is not ``valid`` (the value is not known),
  so a number column keeps only the reasons of its NaN rows (no byte per row);
- ``reasons`` is ``int8`` and every code is in the dataset's :class:`Reasons` vocabulary.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.reasons import VALID, Reasons
from wstats.errors import ColumnError, EstimationError, did_you_mean

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["KINDS", "ROW_TILE", "Dataset", "DecodedColumn", "code_type", "require_dataset",
           "row_tiles"]

KINDS = ("continuous", "count", "categorical", "binary", "text")

#: rows per tile of a pass over columns (2 MiB per float64 temporary): passes that go tile by
#: tile keep their temporaries this size whatever the file's length
ROW_TILE = 262_144


def row_tiles(n: int) -> list[slice]:
    """Return slices covering rows 0..n-1 in order, as few as tiles of :data:`ROW_TILE` rows
    need, and of equal size (within a row).

    Equal tiles keep a pass's temporaries the same on every tile: with a short last tile, a
    file's peak would depend on how its length divides by the tile, not only on the tile.
    """
    count = -(-n // ROW_TILE)
    bounds = [n * i // count for i in range(count + 1)] if count else [0]
    return [slice(b, e) for b, e in zip(bounds[:-1], bounds[1:], strict=True)]


def code_type(n_codes: int) -> type[np.signedinteger[Any]]:
    """Return the integer type for per-row codes 0..n_codes-1: int32 when it holds them.

    Per-row codes (PSU index, bucket) are as long as the file; int32 halves them. Arithmetic
    on them that can pass 2**31 (keys crossing codes) casts to int64 first.
    """
    return np.int32 if n_codes <= np.iinfo(np.int32).max else np.int64


class DecodedColumn:
    """One decoded variable.

    Attributes
    ----------
    name : variable name as in the file (or the codebook, for derived variables).
    values : float64 array (object array of str for ``kind == "text"``); NaN where not valid.
    reasons : int8 array of reason codes, one per row (see :mod:`wstats.decoding.reasons`), made on
        each access from :attr:`missing_codes` (a number column holds no byte per row for
        its reasons: a value is NaN exactly where its reason is not ``valid``).
    missing_codes : int8 reason codes of the rows that are not valid, in row order, for a
        number column; for a text column, the reason of every row.
    vocabulary : the :class:`Reasons` that gives the codes their names.
    label : variable label, or None.
    kind : one of ``continuous``, ``count``, ``categorical``, ``binary``, ``text``.
    value_labels : value -> label for categorical/binary variables (may be empty).
    raw : the raw codes before decoding (float64 or object), kept for ``codebook check``.

    The constructor takes one reason per row; *check* False skips validating them (for
    arrays that come from a column already checked). Columns are immutable: :meth:`replace`
    returns a changed copy (the arrays are shared, not copied).
    """

    __slots__ = ("name", "values", "missing_codes", "vocabulary", "label", "kind",
                 "value_labels", "raw")
    name: str
    values: np.ndarray
    missing_codes: np.ndarray
    vocabulary: Reasons
    label: str | None
    kind: str
    value_labels: dict[float, str]
    raw: np.ndarray | None

    def __init__(self, name: str, values: np.ndarray, reasons: np.ndarray, vocabulary: Reasons,
                 label: str | None = None, kind: str = "continuous",
                 value_labels: dict[float, str] | None = None, raw: np.ndarray | None = None,
                 check: bool = True) -> None:
        kept = (_checked(name, values, reasons, vocabulary, kind) if check
                else _kept_codes(values, reasons))
        self._set(name, values, kept, vocabulary, label, kind, value_labels or {}, raw)

    def _set(self, *fields: Any) -> None:
        for slot, value in zip(self.__slots__, fields, strict=True):
            object.__setattr__(self, slot, value)

    @classmethod
    def of_codes(cls, name: str, values: np.ndarray, missing_codes: np.ndarray,
                 vocabulary: Reasons, label: str | None = None, kind: str = "continuous",
                 value_labels: dict[float, str] | None = None,
                 raw: np.ndarray | None = None) -> DecodedColumn:
        """Build a column from the reason codes of its not-valid rows (not checked)."""
        col = cls.__new__(cls)
        col._set(name, values, missing_codes, vocabulary, label, kind, value_labels or {}, raw)
        return col

    def __setattr__(self, name: str, value: Any) -> None:
        raise AttributeError(f"DecodedColumn is immutable: use replace({name}=...)")

    def __reduce__(self) -> tuple[Any, tuple[Any, ...]]:  # copy and pickle, past __setattr__
        return DecodedColumn.of_codes, tuple(getattr(self, s) for s in self.__slots__)

    def __repr__(self) -> str:
        return (f"DecodedColumn(name={self.name!r}, kind={self.kind!r}, rows={len(self)}, "
                f"not_valid={self.n_missing})")

    def replace(self, **changes: Any) -> DecodedColumn:
        """Return a copy with the given attributes changed (``reasons`` = one code per row).

        New ``values`` of a number column need new ``reasons`` too, unless their NaN rows are
        the old ones.
        """
        fields = {s: getattr(self, s) for s in self.__slots__}
        reasons = changes.pop("reasons", None)
        unknown = set(changes) - set(fields)
        if unknown:
            raise TypeError(f"DecodedColumn has no attribute {sorted(unknown)[0]!r}")
        fields.update(changes)
        if reasons is not None:
            fields["missing_codes"] = _kept_codes(fields["values"], reasons)
        col = DecodedColumn.__new__(DecodedColumn)
        col._set(*(fields[s] for s in self.__slots__))
        return col

    def __len__(self) -> int:
        return len(self.values)

    @property
    def numeric(self) -> bool:
        """True for a number column (float values, NaN exactly where not valid)."""
        return bool(self.values.dtype.kind == "f")

    @property
    def n_missing(self) -> int:
        """Number of rows that are not valid."""
        if self.numeric:
            return len(self.missing_codes)
        return int(np.count_nonzero(self.missing_codes))

    @property
    def reasons(self) -> np.ndarray:
        """One int8 reason code per row (made on each access for a number column)."""
        if not self.numeric:
            return self.missing_codes
        out = np.zeros(len(self.values), dtype=np.int8)
        if len(self.missing_codes):
            out[np.isnan(self.values)] = self.missing_codes
        return out

    @property
    def valid(self) -> np.ndarray:
        """Boolean mask of rows whose reason is ``valid``."""
        mask: np.ndarray = (~np.isnan(self.values) if self.numeric
                            else self.missing_codes == VALID)
        return mask

    def reason_counts(self) -> dict[str, int]:
        """Return unweighted row counts per reason name (every vocabulary reason, zeros kept)."""
        counts = np.bincount(self.missing_codes, minlength=len(self.vocabulary))
        if self.numeric:
            counts[VALID] += len(self) - len(self.missing_codes)
        return {name: int(counts[i]) for i, name in enumerate(self.vocabulary.names)}

    def _spans(self) -> Iterator[tuple[slice, np.ndarray, np.ndarray, np.ndarray]]:
        """Yield (rows, their values, positions of the not-valid rows among them, their
        reason codes) for the tiles of :func:`row_tiles`; temporaries are a tile's."""
        start = 0  # where the tile's codes begin among the missing codes
        for rows in row_tiles(len(self)):
            values = self.values[rows]
            if self.numeric:
                found = np.flatnonzero(np.isnan(values))
                stop = start + len(found)
                codes, start = self.missing_codes[start:stop], stop
            else:
                codes = self.missing_codes[rows]
                found = np.flatnonzero(codes)
            yield rows, values, found, codes

    def not_valid_rows(self) -> Iterator[tuple[np.ndarray, np.ndarray]]:
        """Yield (row numbers, their reason codes) of the rows that are not valid, tile by tile.

        Temporaries are a tile's; no array as long as the column is made.
        """
        for rows, _, found, codes in self._spans():
            yield found + rows.start, codes if self.numeric else codes[found]

    def tiles(self) -> Iterator[tuple[slice, DecodedColumn]]:
        """Yield (rows, the column on those rows) for the tiles of :func:`row_tiles`.

        The tiles share the column's values; ``raw`` is not carried.
        """
        for rows, values, _, codes in self._spans():
            yield rows, self.replace(values=values, missing_codes=codes, raw=None)

    def to_pandas(self) -> pd.DataFrame:
        """Return a two-column frame: ``<name>`` values and ``<name>_reason`` (categorical)."""
        import pandas as pd

        reason = pd.Categorical.from_codes(
            self.reasons.astype(np.int64), categories=pd.Index(list(self.vocabulary.names))
        )
        return pd.DataFrame({self.name: self.values, f"{self.name}_reason": reason})


def _kept_codes(values: np.ndarray, reasons: np.ndarray) -> np.ndarray:
    """Return the reason codes a column keeps: its NaN rows' for numbers, every row's else."""
    return reasons[np.isnan(values)] if values.dtype.kind == "f" else reasons


def _checked(name: str, values: np.ndarray, reasons: np.ndarray, vocabulary: Reasons,
             kind: str) -> np.ndarray:
    """Validate a column's arrays (see the module's invariants) and return the reason codes
    it keeps (:func:`_kept_codes`); ValueError if broken."""
    if len(values) != len(reasons):
        raise ValueError(f"{name}: values and reasons differ in length")
    if reasons.dtype != np.int8:
        raise ValueError(f"{name}: reasons must be int8")
    if kind not in KINDS:
        raise ValueError(f"{name}: unknown kind {kind!r}")
    if len(reasons) and int(reasons.max(initial=0)) >= len(vocabulary):
        raise ValueError(f"{name}: reason code outside the vocabulary")
    kept = _kept_codes(values, reasons)
    if values.dtype.kind == "f":
        # counted, not masked: the not-valid rows outside the NaN rows are those beyond the
        # NaN rows' own not-valid reasons (no mask as long as the column)
        blank_not_valid = int(np.count_nonzero(kept != VALID))
        if int(np.count_nonzero(reasons != VALID)) > blank_not_valid:
            raise ValueError(f"{name}: a non-valid row holds a value")
        if blank_not_valid < len(kept):
            raise ValueError(f"{name}: a valid row holds NaN; give it a reason")
    return kept


@dataclass(frozen=True, eq=False)
class Dataset(Mapping[str, DecodedColumn]):
    """Decoded columns of one file, sharing one reason vocabulary.

    Attributes
    ----------
    columns : name -> DecodedColumn, in file (then derived) order.
    vocabulary : the shared :class:`Reasons`.
    n_rows : number of rows.
    source : path of the data file, or None for data built in memory.
    metadata : free-form facts about the source (format, file label, reader used).
    """

    columns: dict[str, DecodedColumn]
    vocabulary: Reasons
    n_rows: int
    source: str | None = None
    metadata: dict[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        for col in self.columns.values():
            if len(col) != self.n_rows:
                raise ValueError(f"{col.name}: {len(col)} rows, dataset has {self.n_rows}")

    def __getitem__(self, name: str) -> DecodedColumn:
        try:
            return self.columns[name]
        except KeyError:
            where = f" in {self.source}" if self.source else ""
            hint = did_you_mean(name, self.columns)
            raise ColumnError(f"variable '{name}' is not{where}{hint}") from None

    def __contains__(self, name: object) -> bool:
        return name in self.columns  # (Mapping's own would meet ColumnError, not KeyError)

    def __iter__(self) -> Iterator[str]:
        return iter(self.columns)

    def __len__(self) -> int:
        return len(self.columns)

    def to_pandas(self) -> pd.DataFrame:
        """Return values and a categorical reason column for every variable, side by side."""
        import pandas as pd

        if not self.columns:
            return pd.DataFrame(index=range(self.n_rows))
        return pd.concat([c.to_pandas() for c in self.columns.values()], axis=1)

    @classmethod
    def from_arrays(
        cls, data: Mapping[str, Any], source: str | None = None
    ) -> Dataset:
        """Build a dataset from plain arrays: NaN -> ``missing``, everything else ``valid``."""
        vocab = Reasons()
        cols: dict[str, DecodedColumn] = {}
        n = None
        for name, arr in data.items():
            a = np.asarray(arr)
            if a.dtype.kind in "biuf":
                v = a.astype(np.float64)
                reasons = np.where(np.isnan(v), 5, 0).astype(np.int8)
                cols[name] = DecodedColumn(name, v, reasons, vocab)
            else:
                import pandas as pd

                v = a.astype(object)
                miss = np.asarray(pd.isna(v) | (v == ""), dtype=bool)
                cols[name] = DecodedColumn(
                    name, v, np.where(miss, 5, 0).astype(np.int8), vocab, kind="text"
                )
            n = len(a)
        return cls(cols, vocab, int(n or 0), source)


def require_dataset(data: object, caller: str) -> None:
    """Raise EstimationError, saying how to wrap it, unless *data* is a :class:`Dataset`."""
    if isinstance(data, Dataset):
        return
    kind = type(data).__name__
    if type(data).__module__.startswith("pandas"):
        kind = f"pandas {kind}"
    raise EstimationError(
        f"{caller}() takes a wstats Dataset, not a {kind}; read a file with "
        "wstats.read(path, codebook=...), or wrap columns in memory with "
        "wstats.Dataset.from_arrays(frame) (NaN becomes the reason 'missing')")
