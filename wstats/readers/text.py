"""Delimited text files: ``.csv`` and ``.tsv``, plain or gzip-compressed (``.gz``).

Every cell is read as text and a column becomes numeric (float64) only when all its non-blank
cells parse as numbers; otherwise it stays text. Reading text first and deciding per column
keeps the original spelling of codes such as ``"007"`` in text columns, and gives the same
result whether the file is read in one piece or in chunks. Only an empty cell is blank:
``NA``, ``NULL`` and the like are kept as text, since a codebook may give them a meaning.
"""

from __future__ import annotations

import codecs
import csv
import gzip
import zlib
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import IO, TYPE_CHECKING, Any, cast

import numpy as np

from wstats.errors import ReadError
from wstats.readers.common import Rows, encoding_error, progress_bar, select_columns
from wstats.readers.raw import RawColumn, RawTable

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["read_text", "text_columns"]

_SEPARATORS = {"csv": ",", "tsv": "\t"}
_CHUNK_ROWS = 100_000
_GZIP_ERRORS = (gzip.BadGzipFile, EOFError, zlib.error)
_SEPARATOR_NAMES = {"csv": "a comma", "tsv": "a tab"}
_SCAN_BYTES = 8 * 2**20  # bytes counted at a time when checking the fields of every line
_SCAN_CHARS = '\t\n\r,"'
_NEWLINE, _RETURN, _QUOTE = 0x0A, 0x0D, 0x22


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
    _check_fields(path, fmt, len(header), rows, encoding)
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


def _check_fields(path: Path, fmt: str, n_fields: int, rows: Rows | None, encoding: str) -> None:
    """Raise ReadError for a line with more fields than the header, or a cut last line."""
    # pandas fills a short row with blanks and, when only some columns are read, drops
    # extra fields without a word; a cheap byte scan catches both.
    if not _ascii_compatible(encoding):
        return
    limit = None if rows is None or rows[1] is None else rows[1] + 1  # lines with the header
    counter = _FieldCounter(ord(_SEPARATORS[fmt]), n_fields, limit)
    with _opened(path, encoding, text=False) as (_raw, stream):
        try:
            while counter.running and (chunk := stream.read(_SCAN_BYTES)):
                counter.feed(chunk)
        except _GZIP_ERRORS as exc:
            raise ReadError(f"'{path}' is not a valid gzip file ({exc})") from exc
    bad = counter.finish() if counter.running else counter.bad
    if bad is None:
        return
    line, fields, kind = bad
    plural = "" if fields == 1 else "s"
    where = f"'{path}' line {line} has {fields} field{plural}, the header has {n_fields}"
    if kind == "long":
        name = _SEPARATOR_NAMES[fmt]
        raise ReadError(f"{where}; quote values that contain {name} or remove the extra fields")
    if kind == "short":
        raise ReadError(f"{where}; the file may be truncated: download it again")
    raise ReadError(
        f"'{path}' ends inside line {line}: its last field is empty and no line break follows, "
        "so the file may be truncated; download it again (if it is complete, end it with a "
        "line break)"
    )


def _ascii_compatible(encoding: str) -> bool:
    """Tell whether tab, newline, comma and quote are single ASCII bytes in *encoding*."""
    name = codecs.lookup(encoding).name
    return name == "utf-8-sig" or codecs.encode(_SCAN_CHARS, name) == _SCAN_CHARS.encode()


class _FieldCounter:
    """Count the fields of each line of delimited text fed in byte chunks, honouring quotes."""

    def __init__(self, sep: int, n_fields: int, limit: int | None) -> None:
        self.sep, self.n_fields, self.limit = sep, n_fields, limit
        self.quoted = False  # inside a quoted value at the end of the last chunk
        self.prev = _NEWLINE  # the byte before the chunk (start of file = start of a line)
        self.lines = 0  # line breaks seen (physical lines, quoted line breaks included)
        self.records = 0  # complete lines seen (the header is line 0)
        self.carry = 0  # separators in the line still open at the end of the last chunk
        self.start_line = 1  # physical line where the open line starts
        self.last: int | None = None  # last byte of the open line but CR; None = blank so far
        self.running = True
        self.bad: tuple[int, int, str] | None = None

    def feed(self, chunk: bytes) -> None:
        """Count the fields of the lines completed by *chunk*; stop at the first bad one."""
        if self.lines == 0 and self.last is None and chunk.startswith(codecs.BOM_UTF8):
            chunk = chunk[len(codecs.BOM_UTF8) :]
        data = np.frombuffer(chunk, dtype=np.uint8)
        if not data.size:
            return
        newlines, seps = self._line_ends(chunk, data), data == self.sep
        quoting = self.quoted or b'"' in chunk
        breaks = newlines.copy() if quoting else newlines  # line breaks, quoted ones too
        physical = int(np.count_nonzero(breaks))
        if quoting:
            outside = self._outside(data)
            if outside is None:  # quotes inside unquoted values: leave the file to pandas
                self.running = False
                return
            newlines &= outside
            seps &= outside
        ends = np.flatnonzero(newlines)
        before = np.searchsorted(np.flatnonzero(seps), ends)  # separators before each end
        fields = np.diff(before, prepend=0) + 1
        fields[:1] += self.carry
        self._check_lines(breaks, fields, ends)
        open_seps = int(np.count_nonzero(seps)) - (int(before[-1]) if ends.size else 0)
        self._carry_open_line(chunk, breaks[int(ends[-1]) + 1 :] if ends.size else breaks,
                              ends, open_seps, physical)
        self.prev = int(data[-1])
        self.lines += physical

    def finish(self) -> tuple[int, int, str] | None:
        """Return (line, fields, kind) when the file ends inside a line that looks cut."""
        # A last line without a line break is complete only if it has every field; one that
        # ends in a separator cannot be told from a line cut just after one, so it counts too.
        fields = self.carry + 1
        if self.last is None or self.quoted:
            return None
        if fields != self.n_fields:
            return self.start_line, fields, "short" if fields < self.n_fields else "long"
        return (self.start_line, fields, "empty-end") if self.last == self.sep else None

    def _line_ends(self, chunk: bytes, data: np.ndarray) -> np.ndarray:
        """Mark the bytes that end a line: LF, CR, and not the LF of a CR LF pair."""
        ends: np.ndarray = data == _NEWLINE
        if b"\r" in chunk or self.prev == _RETURN:  # pandas ends lines at a lone CR too
            returns = data == _RETURN
            ends[1:] &= ~returns[:-1]
            ends[0] &= self.prev != _RETURN
            ends |= returns
        return ends

    def _outside(self, data: np.ndarray) -> np.ndarray | None:
        """Return where bytes are outside quoted values (None when quoting is irregular)."""
        quotes = data == _QUOTE
        after = np.bitwise_xor.accumulate(quotes.view(np.uint8)) ^ np.uint8(self.quoted)
        before = np.concatenate(([np.uint8(self.quoted)], after[:-1]))
        previous = np.concatenate(([self.prev], data[:-1]))
        opening = quotes & (before == 0)
        # An opening quote must start a value; "" inside a quoted value reopens after a quote.
        if (opening & ~np.isin(previous, (self.sep, _NEWLINE, _RETURN, _QUOTE))).any():
            return None
        self.quoted = bool(after[-1])
        outside: np.ndarray = before == 0
        return outside

    def _check_lines(self, breaks: np.ndarray, fields: np.ndarray, ends: np.ndarray) -> None:
        """Record the first complete line with too many fields (header and limit excluded)."""
        index = self.records + np.arange(fields.size)
        wanted = index >= 1 if self.limit is None else (index >= 1) & (index < self.limit)
        over = np.flatnonzero(wanted & (fields > self.n_fields))
        if over.size:
            k = int(over[0])
            start = int(ends[k - 1]) + 1 if k else 0
            line = self.start_line if k == 0 else self.lines + int(breaks[:start].sum()) + 1
            self.bad, self.running = (line, int(fields[k]), "long"), False
        elif self.limit is not None and self.records + fields.size >= self.limit:
            self.running = False

    def _carry_open_line(
        self, chunk: bytes, breaks_after: np.ndarray, ends: np.ndarray, open_seps: int,
        physical: int,
    ) -> None:
        """Keep the state of the line that the chunk leaves open (after its last end)."""
        if ends.size:  # quoted line breaks after the last end belong to the open line
            self.start_line = self.lines + physical - int(np.count_nonzero(breaks_after)) + 1
            self.records += ends.size
            self.carry, self.last = 0, None
        self.carry += open_seps
        content = (chunk[int(ends[-1]) + 1 :] if ends.size else chunk).rstrip(b"\r\n")
        if content:
            self.last = content[-1]


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
