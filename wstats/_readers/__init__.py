"""Read a data file into a :class:`RawTable`: raw codes plus the file's own metadata.

The file type is taken from the extension through the plain-dict registry :data:`FORMATS`.
Each family has its own module: ``_xpt`` (fast transport reader, written separately; this
module falls back to pyreadstat when it is absent or declines a file), ``_stat`` (pyreadstat:
.sas7bdat, .sav, .dta), ``_text`` (CSV/TSV, optionally gzip-compressed) and ``_parquet`` (Parquet,
including the cache written by :func:`wstats._convert.convert`). The family modules are
imported only when a file of theirs is read, so importing this package stays cheap.

Every failure caused by the file or the request is a one-line :class:`ReadError` (or
:class:`ColumnError`) that names the file.
"""

from __future__ import annotations

import codecs
import os
import sys
from collections import Counter
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path

from wstats._readers._types import RawColumn, RawTable
from wstats.errors import ColumnError, ReadError, did_you_mean

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

Rows = tuple[int, int | None]


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
        from wstats._readers._text import read_text

        table = read_text(source, fmt, columns, rows, progress, encoding)
    elif fmt == "parquet":
        from wstats._readers._parquet import read_parquet

        table = read_parquet(source, columns, rows, progress)
    else:
        from wstats._readers._stat import read_stat

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
        from wstats._readers._text import text_columns

        names = text_columns(source, fmt, encoding)
    elif fmt == "parquet":
        from wstats._readers._parquet import parquet_columns

        names = parquet_columns(source)
    else:
        from wstats._readers._stat import stat_columns

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


def check_unique(path: Path, names: Sequence[str]) -> None:
    """Raise ReadError for a column without a name, or naming the first one that occurs twice."""
    for position, name in enumerate(names, start=1):
        # A damaged dictionary can hand over None or "" as a name (seen with .sav files).
        if not isinstance(name, str) or not name.strip():
            raise ReadError(
                f"'{path}' has a column with no name (position {position}); the file is "
                "damaged: export it again with every column named"
            )
    twice = [name for name, n in Counter(names).items() if n > 1]
    if twice:
        raise ReadError(
            f"column '{twice[0]}' occurs more than once in '{path}'; rename one of them"
        )


def select_columns(path: Path, names: Sequence[str], columns: Sequence[str] | None) -> list[str]:
    """Return the columns to read (requested order, repeats dropped) after checking them."""
    check_unique(path, names)
    if columns is None:
        return list(names)
    if isinstance(columns, str):
        columns = [columns]
    known = set(names)
    for name in columns:
        if name not in known:
            hint = did_you_mean(name, names)
            raise ColumnError(f"column '{name}' is not in '{path}'{hint}")
    return list(dict.fromkeys(columns))


@contextmanager
def progress_bar(
    enabled: bool, description: str, total: float | None
) -> Iterator[Callable[[float], None]]:
    """Yield a function that sets the progress done; a no-op unless stderr is a terminal."""
    if not (enabled and sys.stderr.isatty()):
        yield lambda _done: None
        return
    from rich.console import Console
    from rich.progress import Progress

    with Progress(console=Console(stderr=True), transient=True) as bar:
        task = bar.add_task(description, total=total)
        yield lambda done: bar.update(task, completed=done)


def encoding_error(path: Path, exc: Exception, encoding: str) -> ReadError:
    """Return the ReadError for text that is not in the expected encoding."""
    return ReadError(
        f"text in '{path}' is not valid {encoding} ({exc}); "
        "pass the file's encoding with the encoding option, e.g. encoding='latin-1'"
    )


def is_utf8(encoding: str) -> bool:
    """Tell whether *encoding* names UTF-8 (the default, which defers to the file's own)."""
    return codecs.lookup(encoding).name == "utf-8"


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
    from wstats._readers._stat import read_stat

    if is_utf8(encoding):
        try:
            from wstats._readers._xpt import XptUnsupported, read_xpt
        except ImportError:
            pass
        else:
            try:
                fast: RawTable = read_xpt(path, columns=columns, rows=rows, progress=progress)
            except XptUnsupported:
                pass
            else:
                return fast
    return read_stat(path, "xpt", columns, rows, progress, encoding)


def _xpt_columns(path: Path, encoding: str) -> list[str]:
    """List a transport file's columns with the fast reader, falling back to pyreadstat."""
    from wstats._readers._stat import stat_columns

    if not is_utf8(encoding):
        return stat_columns(path, "xpt", encoding)
    try:
        from wstats._readers._xpt import XptUnsupported, xpt_file_columns
    except ImportError:
        return stat_columns(path, "xpt", encoding)
    try:
        names: list[str] = xpt_file_columns(path)
    except XptUnsupported:
        return stat_columns(path, "xpt", encoding)
    return names
