"""Read a data file into a :class:`RawTable`: raw codes plus the file's own metadata.

The file type is taken from the extension through the plain-dict registry :data:`FORMATS`.
Each family has its own module: ``xpt`` (fast transport reader, written separately; this
module falls back to pyreadstat when it is absent or declines a file), ``stat`` (pyreadstat:
.sas7bdat, .sav, .dta), ``text`` (CSV/TSV, optionally gzip-compressed) and ``parquet`` (Parquet,
including the cache written by :func:`wstats.readers.cache.convert`). The family modules are
imported only when a file of theirs is read, so importing this module stays cheap.

Every failure caused by the file or the request is a one-line :class:`ReadError` (or
:class:`ColumnError`) that names the file.
"""

from __future__ import annotations

import codecs
import os
from collections.abc import Sequence
from pathlib import Path

from wstats.errors import ReadError
from wstats.readers.common import Rows, check_unique, is_utf8
from wstats.readers.raw import RawColumn, RawTable

__all__ = ["FORMATS", "RawColumn", "RawTable", "file_columns", "format_of", "read_raw"]

#: File extension (lower case, with the dot) -> format name. Longest match wins.
FORMATS: dict[str, str] = {
    ".xpt": "xpt",
    ".xport": "xpt",
    ".sas7bdat": "sas7bdat",
    ".sav": "sav",
    ".zsav": "zsav",
    ".por": "por",
    ".dta": "dta",
    ".csv": "csv",
    ".tsv": "tsv",
    ".csv.gz": "csv",
    ".tsv.gz": "tsv",
    ".parquet": "parquet",
}

def read_raw(
    path: str | os.PathLike[str],
    columns: Sequence[str] | None = None,
    rows: Rows | None = None,
    progress: bool = False,
    encoding: str = "utf-8",
) -> RawTable:
    """Read a data file's raw codes and metadata.

    Parameters
    ----------
    path : the data file; its extension picks the reader (see :data:`FORMATS`).
    columns : names of the columns to read, in the order wanted; None reads all of them.
    rows : ``(start, stop)`` row subset, 0-based, stop exclusive (None = to the end).
    progress : show a progress bar on stderr when stderr is a terminal.
    encoding : text encoding of a CSV/TSV file, or of the labels of a .sas7bdat/.sav/.dta file.
        For those files the default ``"utf-8"`` lets the file's own declaration decide.

    Returns
    -------
    RawTable
        Numeric columns as float64 (NaN = missing; tagged missing values keep their letter in
        ``tags``); character columns as object arrays of str ("" = blank).

    Raises
    ------
    ReadError
        The file is missing, a folder, unreadable, of unknown type, empty, corrupt, has no
        rows, repeats a column name, or is not in *encoding*.
    ColumnError
        A requested column is not in the file.

    Examples
    --------
    >>> table = read_raw("survey.sav", columns=["AGE", "wt_final"])  # doctest: +SKIP
    >>> table.columns["AGE"].data.dtype  # doctest: +SKIP
    dtype('float64')
    """
    source = Path(path)
    fmt = check_file(source)
    _check_encoding(encoding)
    _check_rows(source, rows)
    if fmt == "xpt":
        table = _read_xpt(source, columns, rows, progress, encoding)
    elif fmt in ("csv", "tsv"):
        from wstats.readers.text import read_text

        table = read_text(source, fmt, columns, rows, progress, encoding)
    elif fmt == "parquet":
        from wstats.readers.parquet import read_parquet

        table = read_parquet(source, columns, rows, progress)
    else:
        from wstats.readers.stat import read_stat

        table = read_stat(source, fmt, columns, rows, progress, encoding)
    _check_not_empty(source, table, rows)
    return table


def file_columns(path: str | os.PathLike[str], encoding: str = "utf-8") -> list[str]:
    """Return every column name of a data file, in file order, without reading the data.

    Parameters
    ----------
    path : the data file.
    encoding : as for :func:`read_raw`.

    Returns
    -------
    list of str

    Raises
    ------
    ReadError
        As for :func:`read_raw` (except "no rows", which needs the data).

    Examples
    --------
    >>> file_columns("survey.parquet")  # doctest: +SKIP
    ['AGE', 'wt_final', 'ds_strat']
    """
    source = Path(path)
    fmt = check_file(source)
    _check_encoding(encoding)
    if fmt == "xpt":
        names = _xpt_columns(source, encoding)
    elif fmt in ("csv", "tsv"):
        from wstats.readers.text import text_columns

        names = text_columns(source, fmt, encoding)
    elif fmt == "parquet":
        from wstats.readers.parquet import parquet_columns

        names = parquet_columns(source)
    else:
        from wstats.readers.stat import stat_columns

        names = stat_columns(source, fmt, encoding)
    check_unique(source, names)
    return names


def format_of(path: str | os.PathLike[str]) -> str:
    """Return the format name for *path*'s extension, or raise ReadError listing the known ones."""
    name = Path(path).name.lower()
    matches = [ext for ext in FORMATS if name.endswith(ext)]
    if not matches:
        known = ", ".join(sorted(FORMATS))
        raise ReadError(f"'{path}' has an unknown file type; wstats reads {known}")
    return FORMATS[max(matches, key=len)]


def check_file(path: Path) -> str:
    """Check that *path* is a readable, non-empty file of a known type; return its format."""
    if not path.exists():
        raise ReadError(f"data file '{path}' does not exist; check the path")
    if path.is_dir():
        raise ReadError(f"'{path}' is a folder, not a data file; give the file inside it")
    fmt = format_of(path)
    try:
        fd = os.open(path, os.O_RDONLY)
        os.close(fd)
    except OSError as exc:
        raise ReadError(f"data file '{path}' cannot be opened: {exc.strerror}") from exc
    if path.stat().st_size == 0:
        raise ReadError(f"data file '{path}' is empty (0 bytes)")
    return fmt


def _check_encoding(encoding: str) -> None:
    """Raise ReadError when *encoding* is not a codec Python knows."""
    try:
        codecs.lookup(encoding)
    except LookupError as exc:
        raise ReadError(f"unknown encoding '{encoding}'; use e.g. 'utf-8' or 'latin-1'") from exc


def _check_rows(path: Path, rows: Rows | None) -> None:
    """Raise ReadError when a row subset is not ``(start >= 0, stop >= start or None)``."""
    if rows is None:
        return
    start, stop = rows
    if start < 0 or (stop is not None and stop < start):
        raise ReadError(
            f"row subset {rows} for '{path}' is not valid; give (start, stop) with "
            "0 <= start <= stop, or stop None for the rest of the file"
        )


def _check_not_empty(path: Path, table: RawTable, rows: Rows | None) -> None:
    """Raise ReadError when nothing was read."""
    if table.n_rows > 0:
        return
    if rows is not None:
        raise ReadError(f"'{path}' has no rows in the row subset {rows}; rows count from 0")
    raise ReadError(f"'{path}' has no rows; nothing to analyse")


def _read_xpt(
    path: Path, columns: Sequence[str] | None, rows: Rows | None, progress: bool, encoding: str
) -> RawTable:
    """Read a transport file with the fast reader, falling back to pyreadstat."""
    if is_utf8(encoding):
        try:
            from wstats.readers.xpt import XptUnsupported, read_xpt
        except ImportError:
            pass
        else:
            try:
                fast: RawTable = read_xpt(path, columns=columns, rows=rows, progress=progress)
            except XptUnsupported:
                pass
            else:
                return fast
    from wstats.readers.stat import read_stat  # the fallback only: its module costs 6 ms

    return read_stat(path, "xpt", columns, rows, progress, encoding)


def _xpt_columns(path: Path, encoding: str) -> list[str]:
    """List a transport file's columns with the fast reader, falling back to pyreadstat."""
    if is_utf8(encoding):
        try:
            from wstats.readers.xpt import XptUnsupported, xpt_file_columns
        except ImportError:
            pass
        else:
            try:
                names: list[str] = xpt_file_columns(path)
            except XptUnsupported:
                pass
            else:
                return names
    from wstats.readers.stat import stat_columns  # the fallback only

    return stat_columns(path, "xpt", encoding)
