"""Decoded data: values plus a reason per row, and the Dataset that holds such columns.

Invariants (checked in ``__post_init__``):
- ``values`` and ``reasons`` have the same length;
- where ``reasons != VALID`` a numeric value is NaN (the value is not known);
- ``reasons`` is ``int8`` and every code is in the dataset's :class:`Reasons` vocabulary.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from dataclasses import InitVar, dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats._reasons import VALID, Reasons
from wstats.errors import ColumnError, did_you_mean

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["KINDS", "ROW_TILE", "Dataset", "DecodedColumn", "code_type", "row_tiles"]

KINDS = ("continuous", "count", "categorical", "binary", "text")

#: rows per tile of a pass over columns (2 MiB per float64 temporary): passes that go tile by
#: tile keep their temporaries this size whatever the file's length
ROW_TILE = 262_144


def row_tiles(n: int) -> list[slice]:
    """Return slices of :data:`ROW_TILE` rows covering rows 0..n-1, in order."""
    return [slice(b, min(b + ROW_TILE, n)) for b in range(0, n, ROW_TILE)]


def code_type(n_codes: int) -> type[np.signedinteger[Any]]:
    """Return the integer type for per-row codes 0..n_codes-1: int32 when it holds them.

    Per-row codes (PSU index, bucket) are as long as the file; int32 halves them. Arithmetic
    on them that can pass 2**31 (keys crossing codes) casts to int64 first.
    """
    return np.int32 if n_codes <= np.iinfo(np.int32).max else np.int64


@dataclass(frozen=True, eq=False)
class DecodedColumn:
    """One decoded variable.

    Attributes
    ----------
    name : variable name as in the file (or the codebook, for derived variables).
    values : float64 array (object array of str for ``kind == "text"``); NaN where not valid.
    reasons : int8 array of reason codes, one per row (see :mod:`wstats._reasons`).
    vocabulary : the :class:`Reasons` that gives the codes their names.
    label : variable label, or None.
    kind : one of ``continuous``, ``count``, ``categorical``, ``binary``, ``text``.
    value_labels : value -> label for categorical/binary variables (may be empty).
    raw : the raw codes before decoding (float64 or object), kept for ``codebook check``.
    check : (construction only) validate the arrays; False when they come from a column
        already checked (e.g. moved to another vocabulary with the same names).
    """

    name: str
    values: np.ndarray
    reasons: np.ndarray
    vocabulary: Reasons
    label: str | None = None
    kind: str = "continuous"
    value_labels: dict[float, str] = field(default_factory=dict)
    raw: np.ndarray | None = None
    check: InitVar[bool] = True

    def __post_init__(self, check: bool) -> None:
        if not check:
            return
        if len(self.values) != len(self.reasons):
            raise ValueError(f"{self.name}: values and reasons differ in length")
        if self.reasons.dtype != np.int8:
            raise ValueError(f"{self.name}: reasons must be int8")
        if self.kind not in KINDS:
            raise ValueError(f"{self.name}: unknown kind {self.kind!r}")
        if len(self.reasons) and int(self.reasons.max(initial=0)) >= len(self.vocabulary):
            raise ValueError(f"{self.name}: reason code outside the vocabulary")
        if self.values.dtype.kind == "f":
            bad = (self.reasons != VALID) & ~np.isnan(self.values)
            if bad.any():
                raise ValueError(f"{self.name}: a non-valid row holds a value")

    def __len__(self) -> int:
        return len(self.values)

    @property
    def valid(self) -> np.ndarray:
        """Boolean mask of rows whose reason is ``valid``."""
        mask: np.ndarray = self.reasons == VALID
        return mask

    def reason_counts(self) -> dict[str, int]:
        """Return unweighted row counts per reason name (every vocabulary reason, zeros kept)."""
        counts = np.bincount(self.reasons, minlength=len(self.vocabulary))
        return {name: int(counts[i]) for i, name in enumerate(self.vocabulary.names)}

    def to_pandas(self) -> pd.DataFrame:
        """Return a two-column frame: ``<name>`` values and ``<name>_reason`` (categorical)."""
        import pandas as pd

        reason = pd.Categorical.from_codes(
            self.reasons.astype(np.int64), categories=pd.Index(list(self.vocabulary.names))
        )
        return pd.DataFrame({self.name: self.values, f"{self.name}_reason": reason})


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
