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
import stat
from collections.abc import Sequence
from pathlib import Path

from wstats.errors import ReadError
from wstats.readers.common import Rows, check_unique, is_utf8
from wstats.readers.raw import RawColumn, RawTable

__all__ = [
    "FORMATS", "RawColumn", "RawTable", "check_encoding", "file_columns", "format_of", "read_raw",
]

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
    check_encoding(encoding, source, fmt)
    rows = _check_rows(source, rows, fmt)
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
    check_encoding(encoding, source, fmt)
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
    """Check that *path* is a readable, non-empty file of a known type; return its format.

    Only regular files (or links to them) are accepted, and that is decided from ``stat``
    before anything is opened: opening a FIFO blocks until a writer comes, and a device such
    as ``/dev/zero`` has no size and no end.
    """
    try:
        mode = path.stat().st_mode
    except FileNotFoundError:
        if any(ch in path.name for ch in "*?["):  # a pattern reached a one-file command
            raise ReadError(
                f"data file '{path}' does not exist: a pattern pools several files only in "
                "estimate, compare, nonresponse, bounds, table and run; name one file here"
            ) from None
        raise ReadError(f"data file '{path}' does not exist; check the path") from None
    except OSError as exc:
        raise ReadError(f"data file '{path}' cannot be opened: {exc.strerror}") from exc
    if stat.S_ISDIR(mode):
        raise ReadError(f"'{path}' is a folder, not a data file; give the file inside it")
    if not stat.S_ISREG(mode):
        raise ReadError(f"'{path}' is {_kind_of(mode)}, not a regular file; save the data to "
                        "a file first and give that file's path")
    fmt = format_of(path)
    try:
        fd = os.open(path, os.O_RDONLY)
        try:
            head = os.read(fd, 64)
        finally:
            os.close(fd)
    except OSError as exc:
        raise ReadError(f"data file '{path}' cannot be opened: {exc.strerror}") from exc
    if path.stat().st_size == 0:
        raise ReadError(f"data file '{path}' is empty (0 bytes)")
    _check_content(path, fmt, head)
    return fmt


#: How files of each family begin, and the extension to give them.
_MAGIC: list[tuple[bytes, str, str, str]] = [
    (b"PAR1", "parquet", "a Parquet file", ".parquet"),
    (b"$FL2", "sav", "a .sav system file", ".sav"),
    (b"$FL3", "sav", "a compressed .zsav system file", ".zsav"),
    (b"HEADER RECORD*******LIB", "xpt", "a transport (.xpt) file", ".xpt"),
    (b"<stata_dta>", "dta", "a .dta file", ".dta"),
    (b"\x1f\x8b", "gzip", "gzip-compressed", ".csv.gz"),
]
_FAMILY = {"zsav": "sav", "por": "sav", "tsv": "csv"}


def _check_content(path: Path, fmt: str, head: bytes) -> None:
    """Refuse a file whose first bytes show another format than its extension names."""
    family = _FAMILY.get(fmt, fmt)
    for magic, kind, words, suffix in _MAGIC:
        if not head.startswith(magic) or kind == family:
            continue
        if kind == "gzip" and path.name.lower().endswith(".gz"):
            return
        shown = (f"'{magic.decode('ascii')}'" if magic.isascii() and magic.decode().isprintable()
                 else f"the bytes {magic.hex(' ')}")
        raise ReadError(f"'{path}' is named as {fmt} but looks like {words} (it starts with "
                        f"{shown}); wstats goes by the extension: rename it to {suffix}")


def _kind_of(mode: int) -> str:
    """Name the kind of a non-regular, non-folder file for a message."""
    kinds = [(stat.S_ISFIFO, "a named pipe (FIFO)"), (stat.S_ISCHR, "a character device"),
             (stat.S_ISBLK, "a block device"), (stat.S_ISSOCK, "a socket")]
    return next((name for test, name in kinds if test(mode)), "a special file")


def check_encoding(encoding: str, path: Path | None = None, fmt: str = "csv") -> None:
    """Raise ReadError when *encoding* cannot decode the text of a data file.

    The name must be a text codec Python knows (not a bytes-to-bytes codec such as
    ``base64``); for the binary formats, whose names and labels sit among ASCII structure, it
    must also read ASCII as ASCII (``utf-16`` does not).
    """
    where = f" for '{path}'" if path is not None else ""
    try:
        info = codecs.lookup(encoding)
    except LookupError as exc:
        raise ReadError(f"unknown encoding '{encoding}'{where}; use e.g. 'utf-8', 'latin-1' "
                        "or 'cp1252'") from exc
    if not getattr(info, "_is_text_encoding", True):
        raise ReadError(f"'{encoding}' is not a text encoding{where}; use e.g. 'utf-8', "
                        "'latin-1' or 'cp1252'")
    if fmt not in ("csv", "tsv") and not _ascii_compatible(info):
        raise ReadError(f"encoding '{encoding}'{where} does not keep ASCII bytes as they are, "
                        "which the file's structure needs; use e.g. 'latin-1' or 'cp1252'")


def _ascii_compatible(info: codecs.CodecInfo) -> bool:
    """Tell whether a codec reads ASCII bytes as the same characters."""
    probe = "AZaz09_ "
    try:
        return info.encode(probe)[0] == probe.encode("ascii")
    except (UnicodeError, ValueError, TypeError):
        return False


#: Largest row number the pyreadstat formats take (a C int); past it means "to the end".
_INT_ROWS = 2**31 - 1
#: Largest row number any reader takes (a signed 64-bit offset).
_ANY_ROWS = 2**62


def _check_rows(path: Path, rows: Rows | None, fmt: str = "parquet") -> Rows | None:
    """Return a row subset with any end past what a format can hold read as "to the end".

    No file of the format can have a row there, so the range goes on to the last row; a
    start there leaves no rows. Raises ReadError when the subset is not
    ``(start >= 0, stop >= start or None)``.
    """
    if rows is None:
        return None
    start, stop = rows
    if start < 0 or (stop is not None and stop < start):
        raise ReadError(
            f"row subset {rows} for '{path}' is not valid; give (start, stop) with "
            "0 <= start <= stop, or stop None for the rest of the file"
        )
    cap = _ANY_ROWS if fmt in ("csv", "tsv", "parquet") else _INT_ROWS
    if start >= cap:
        raise ReadError(f"'{path}' has no rows in the row subset {rows}; rows count from 0")
    return start, None if stop is None or stop > cap else stop


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
