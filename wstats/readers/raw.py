"""What every reader returns: raw coded columns with the file's own metadata."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["RawColumn", "RawTable"]


@dataclass(eq=False)
class RawColumn:
    """One column as stored in the file, before any codebook is applied.

    Attributes
    ----------
    name : column name in the file.
    data : float64 for numeric columns (NaN = system missing, and also the value slot of a
        tagged missing); object array of ``str`` for character columns ("" = blank).
    label : variable label, or None.
    value_labels : code -> label from the file (numeric codes as float, or str codes).
    tags : uint8 per row or None; 0 = not tagged, otherwise the ASCII code of the tag letter
        of a special missing value: ``ord('A')``..``ord('Z')`` and ``ord('_')`` for transport
        and .sas7bdat files (``.A``-``.Z``, ``._``), ``ord('a')``..``ord('z')`` for .dta
        (``.a``-``.z``).
        A plain system missing (``.``) has tag 0 and NaN data.
    user_missing : user-declared missing codes of the file (.sav): a list of single values
        and ``(low, high)`` ranges, inclusive. The raw codes stay in ``data``.
    numeric : True for numeric columns.
    format : the display format declared in the file (e.g. ``F8.2``), or None.
    """

    name: str
    data: np.ndarray
    label: str | None = None
    value_labels: dict[float | str, str] = field(default_factory=dict)
    tags: np.ndarray | None = None
    user_missing: list[float | str | tuple[float, float]] = field(default_factory=list)
    numeric: bool = True
    format: str | None = None


@dataclass(eq=False)
class RawTable:
    """Columns read from one file, with the facts about the file.

    Attributes
    ----------
    path : the file read.
    format : short name of the file type (``xpt``, ``sas7bdat``, ``sav``, ``zsav``, ``por``,
        ``dta``, ``csv``, ``tsv``, ``parquet``).
    reader : which code read it (e.g. ``wstats-xpt``, ``pyreadstat``, ``pyarrow``).
    n_rows : rows read (after any row subset).
    columns : name -> RawColumn, in the order requested (or file order when all are read).
    file_columns : every column name in the file, in file order.
    file_label : the file's own label, or None.
    """

    path: str
    format: str
    reader: str
    n_rows: int
    columns: dict[str, RawColumn]
    file_columns: list[str]
    file_label: str | None = None
