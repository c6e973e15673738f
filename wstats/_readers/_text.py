"""Delimited text files: ``.csv`` and ``.tsv``, plain or gzip-compressed (``.gz``).

Every cell is read as text and a column becomes numeric (float64) only when all its non-blank
cells parse as numbers; otherwise it stays text. Reading text first and deciding per column
keeps the original spelling of codes such as ``"007"`` in text columns, and gives the same
result whether the file is read in one piece or in chunks. Only an empty cell is blank:
``NA``, ``NULL`` and the like are kept as text, since a codebook may give them a meaning.
"""

from __future__ import annotations

import csv
import gzip
import zlib
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import IO, TYPE_CHECKING, Any, cast

import numpy as np

from wstats._readers import Rows, encoding_error, progress_bar, select_columns
from wstats._readers._types import RawColumn, RawTable
from wstats.errors import ReadError

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["read_text", "text_columns"]

_SEPARATORS = {"csv": ",", "tsv": "\t"}
_CHUNK_ROWS = 100_000
_GZIP_ERRORS = (gzip.BadGzipFile, EOFError, zlib.error)


def text_columns(path: Path, fmt: str, encoding: str = "utf-8") -> list[str]:
    """Return the names in the header line of a CSV/TSV file."""
    with _opened(path, encoding) as (_raw, text):
        try:
            header = next(csv.reader(text, delimiter=_SEPARATORS[fmt]), None)
        except UnicodeError as exc:
            raise encoding_error(path, exc, encoding) from exc
        except _GZIP_ERRORS as exc:
            raise ReadError(f"'{path}' is not a valid gzip file ({exc})") from exc
        except csv.Error as exc:
            raise ReadError(f"the header line of '{path}' cannot be parsed ({exc})") from exc
    if not header or header == [""]:
        raise ReadError(f"'{path}' has no header line; the first line must name the columns")
    for position, name in enumerate(header, start=1):
        if not name.strip():
            raise ReadError(f"column {position} of '{path}' has an empty name; name it")
    return header


def read_text(
    path: Path,
    fmt: str,
    columns: Sequence[str] | None = None,
    rows: Rows | None = None,
    progress: bool = False,
    encoding: str = "utf-8",
) -> RawTable:
    """Read a CSV/TSV file (optionally gzip-compressed) into a RawTable."""
    header = text_columns(path, fmt, encoding)
    names = select_columns(path, header, columns)
    frame = _read_frame(path, fmt, header, names, rows, progress, encoding)
    cols = {name: _raw_column(name, frame[name]) for name in names}
    return RawTable(
        path=str(path),
        format=fmt,
        reader="pandas",
        n_rows=len(frame),
        columns=cols,
        file_columns=header,
    )


def _read_frame(
    path: Path,
    fmt: str,
    header: list[str],
    names: list[str],
    rows: Rows | None,
    progress: bool,
    encoding: str,
) -> pd.DataFrame:
    """Read the selected columns of the selected rows as text."""
    import pandas as pd

    start, stop = rows if rows is not None else (0, None)
    position = {name: i for i, name in enumerate(header)}
    options: dict[str, Any] = {
        "sep": _SEPARATORS[fmt],
        "header": None,
        "skiprows": 1 + start,
        "nrows": None if stop is None else stop - start,
        "names": list(range(len(header))),
        # With usecols pandas tolerates rows with extra fields, so a full read (the one
        # convert does) goes without it and reports such rows; a subset read cannot.
        "usecols": sorted(position[name] for name in names) if names != header else None,
        "dtype": str,
        "keep_default_na": False,
        "na_values": [""],
        "encoding": encoding,
        "chunksize": _CHUNK_ROWS if progress else None,
    }
    with _opened(path, encoding, text=False) as (raw, stream):
        try:
            frame = _parse(stream, raw, path, options)
        except UnicodeError as exc:
            raise encoding_error(path, exc, encoding) from exc
        except _GZIP_ERRORS as exc:
            raise ReadError(f"'{path}' is not a valid gzip file ({exc})") from exc
        except (pd.errors.ParserError, ValueError, OSError) as exc:
            detail = str(exc).strip().splitlines()[-1] if str(exc).strip() else type(exc).__name__
            raise ReadError(f"'{path}' cannot be parsed: {detail}; check the file") from exc
    frame.columns = [header[int(i)] for i in frame.columns]
    return frame


def _parse(stream: IO[Any], raw: IO[bytes], path: Path, options: dict[str, Any]) -> pd.DataFrame:
    """Run pandas on *stream*, in chunks behind a progress bar when asked."""
    import pandas as pd

    if options["chunksize"] is None:
        try:
            whole: pd.DataFrame = pd.read_csv(stream, **options)
        except pd.errors.EmptyDataError:
            return _no_rows(options)
        return whole
    total = float(Path(path).stat().st_size)
    chunks: list[pd.DataFrame] = []
    with progress_bar(True, f"reading {path.name}", total) as advance:
        try:
            for chunk in pd.read_csv(stream, **options):
                chunks.append(chunk)
                advance(float(raw.tell()))
        except pd.errors.EmptyDataError:
            pass
    if not chunks:
        return _no_rows(options)
    return pd.concat(chunks, ignore_index=True)


def _no_rows(options: dict[str, Any]) -> pd.DataFrame:
    """Return an empty frame with the columns that were asked for."""
    import pandas as pd

    return pd.DataFrame(columns=options["usecols"] or options["names"])


def _raw_column(name: str, cells: pd.Series) -> RawColumn:
    """Make a numeric column when every non-blank cell is a number, else a text column."""
    import pandas as pd

    filled = cells.notna().to_numpy()
    numbers = pd.to_numeric(cells, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
    if np.array_equal(filled, ~np.isnan(numbers)):
        return RawColumn(name=name, data=numbers, numeric=True)
    return RawColumn(name=name, data=cells.to_numpy(dtype=object, na_value=""), numeric=False)


@contextmanager
def _opened(path: Path, encoding: str, text: bool = True) -> Iterator[tuple[IO[bytes], IO[Any]]]:
    """Yield the raw file and a (decompressing) stream over it, text or bytes."""
    with open(path, "rb") as raw:
        stream: IO[Any] = raw
        if path.name.lower().endswith(".gz"):
            stream = cast(IO[bytes], gzip.GzipFile(fileobj=raw))
        if text:
            stream = _text_stream(stream, encoding)
        yield raw, stream


def _text_stream(stream: IO[bytes], encoding: str) -> IO[str]:
    """Wrap a byte stream as text, stripping a UTF-8 byte-order mark."""
    import io

    codec = "utf-8-sig" if encoding.lower().replace("_", "-") in ("utf-8", "utf8") else encoding
    return io.TextIOWrapper(stream, encoding=codec, newline="")
