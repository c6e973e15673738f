""".sas7bdat, .sav/.zsav/.por and .dta files, and transport files the fast reader declines.

Metadata kept: variable labels, value labels, display formats, the file label, .sav
user-missing declarations (``.sav``/``.zsav``; the raw codes stay in the data) and tagged
missing values (.dta ``.a``-``.z``; .sas7bdat ``.A``-``.Z``, ``._`` in ``.sas7bdat``), which
pyreadstat hands over as letters inside an object column and which become NaN plus a tag.

Limits of pyreadstat, recorded here so nobody hunts for them: ``read_por`` has neither
``user_missing`` nor ``encoding``, so user-missing declarations of ``.por`` files are lost;
``read_xport`` has no ``user_missing``, so tagged missing values of transport files read here
are plain NaN (the fast transport reader keeps them); .sav user-missing declarations on
character columns are dropped because :class:`RawColumn` holds numeric declarations only.
"""

from __future__ import annotations

import codecs
import re
from collections.abc import Iterator, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any, BinaryIO

import numpy as np

from wstats.errors import ReadError
from wstats.readers.common import (
    Rows,
    encoding_error,
    is_utf8,
    progress_bar,
    select_columns,
)
from wstats.readers.raw import RawColumn, RawTable

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["read_stat", "stat_columns"]

#: format -> (pyreadstat function, takes ``encoding``, takes ``user_missing``)
_READERS: dict[str, tuple[str, bool, bool]] = {
    "xpt": ("read_xport", True, False),
    "sas7bdat": ("read_sas7bdat", True, True),
    "sav": ("read_sav", True, True),
    "zsav": ("read_sav", True, True),
    "por": ("read_por", False, False),
    "dta": ("read_dta", True, True),
}
_CHUNK_ROWS = 50_000
_ENCODING_TROUBLE = re.compile(r"encoding|character set", re.IGNORECASE)
_XPT_RECORD = 80  # transport files are made of 80-byte records
_XPT_OBS = b"HEADER RECORD*******OBS"  # opens the observations (OBS in v5, OBSV8 in v8/v9)
#: format -> variables that share one byte of a row at most. A .dta row stores each value in
#: a byte or more; a compressed .sav row spends a command byte per value (8 per byte is a safe
#: bound). zsav (zlib) and .sas7bdat (RLE) rows can shrink too much for a useful bound.
_VARS_PER_BYTE = {"dta": 1, "sav": 8}
_SAV_HEADER = 176  # bytes of a .sav file before its dictionary records
_DTA_OPEN = b"<stata_dta>"
_DTA_CLOSE = b"</stata_dta>"
_DTA_TAIL = 64  # bytes read from the end of a .dta file to find its closing tag


def stat_columns(path: Path, fmt: str, encoding: str = "utf-8") -> list[str]:
    """Return the column names of a pyreadstat-readable file from its metadata."""
    meta = _metadata(path, fmt, encoding)
    return list(meta.column_names)


def read_stat(
    path: Path,
    fmt: str,
    columns: Sequence[str] | None = None,
    rows: Rows | None = None,
    progress: bool = False,
    encoding: str = "utf-8",
) -> RawTable:
    """Read a .sas7bdat, .sav, .dta or transport file with pyreadstat into a RawTable."""
    meta = _metadata(path, fmt, encoding)
    names = select_columns(path, meta.column_names, columns)
    kinds = meta.readstat_variable_types
    numeric = {name: kinds.get(name) != "string" for name in names}
    chunks = list(_read_chunks(path, fmt, names, rows, progress, encoding, meta.number_rows))
    cols: dict[str, RawColumn] = {}
    for name in names:
        data, tags = _join([_column_arrays(frame[name], numeric[name]) for frame in chunks])
        cols[name] = _raw_column(name, data, tags, numeric[name], meta)
    return RawTable(
        path=str(path),
        format=fmt,
        reader="pyreadstat",
        n_rows=sum(len(frame) for frame in chunks),
        columns=cols,
        file_columns=list(meta.column_names),
        file_label=meta.file_label or None,
    )


def _call(path: Path, fmt: str, encoding: str, **kwargs: Any) -> tuple[pd.DataFrame, Any]:
    """Call the pyreadstat reader for *fmt*, turning its failures into ReadError."""
    import pyreadstat

    func, takes_encoding, takes_missing = _READERS[fmt]
    if takes_encoding and not is_utf8(encoding):
        # readstat hands the name to iconv, which knows "ISO8859-1" but not "latin-1".
        kwargs["encoding"] = codecs.lookup(encoding).name.upper()
    if takes_missing:
        kwargs["user_missing"] = True
    try:
        frame, meta = getattr(pyreadstat, func)(str(path), **kwargs)
    except UnicodeError as exc:
        raise encoding_error(path, exc, encoding) from exc
    except (pyreadstat.ReadstatError, pyreadstat.PyreadstatError, OSError, ValueError,
            IndexError, KeyError, TypeError, OverflowError, MemoryError) as exc:
        # pyreadstat's callbacks raise plain IndexError & co. when a header lies about sizes.
        if _ENCODING_TROUBLE.search(str(exc)):
            raise encoding_error(path, exc, encoding) from exc
        raise ReadError(
            f"'{path}' cannot be read as {fmt} data ({exc}); it may be truncated or corrupt"
        ) from exc
    return frame, meta


def _metadata(path: Path, fmt: str, encoding: str) -> Any:
    """Read only the metadata of a file (names, types, labels, row count)."""
    if fmt == "dta":
        _check_dta_end(path)
    elif fmt in ("sav", "zsav"):
        _check_sav_dictionary(path)
    meta = _call(path, fmt, encoding, metadataonly=True)[1]
    _check_row_count(path, fmt, meta)
    if fmt == "xpt":
        widths = getattr(meta, "variable_storage_width", None) or {}
        _check_xpt_end(path, sum(int(w or 0) for w in widths.values()))
    return meta


def _check_sav_dictionary(path: Path) -> None:
    """Raise ReadError when a .sav dictionary points value labels at a missing variable."""
    # readstat crashes (segmentation fault) on such a label record instead of failing.
    import struct

    with open(path, "rb") as fh:
        head = fh.read(_SAV_HEADER)
        if len(head) < _SAV_HEADER or head[:4] not in (b"$FL2", b"$FL3"):
            return  # not a system file: readstat says so itself
        order = "<" if struct.unpack("<i", head[64:68])[0] in (2, 3) else ">"
        slots = 0
        while (kind := _sav_int(fh, order)) not in (None, 999):
            if kind == 2:
                slots += 1
                _sav_skip_variable(fh, order)
            elif kind == 3:
                _sav_check_labels(fh, order, slots, path)
            elif kind == 6:
                fh.seek(80 * _sav_count(fh, order, path), 1)
            elif kind == 7:
                fh.seek(4, 1)
                fh.seek(_sav_count(fh, order, path) * _sav_count(fh, order, path), 1)
            else:
                return  # an unknown record: readstat reports it


def _sav_int(fh: BinaryIO, order: str) -> int | None:
    """Read one 32-bit integer of the dictionary, or None at the end of the file."""
    import struct

    raw = fh.read(4)
    return struct.unpack(order + "i", raw)[0] if len(raw) == 4 else None


def _sav_count(fh: BinaryIO, order: str, path: Path) -> int:
    """Read a count or size of the dictionary, checking it is not negative."""
    value = _sav_int(fh, order)
    if value is None or value < 0:
        raise ReadError(f"'{path}' is damaged: its dictionary is cut or holds a negative count; "
                        "download or export the file again")
    return value


def _sav_skip_variable(fh: BinaryIO, order: str) -> None:
    """Skip the rest of a variable record (type 2): fixed part, label, missing values."""
    import struct

    fixed = fh.read(28)
    if len(fixed) < 28:
        return
    _width, has_label, n_missing = struct.unpack(order + "3i", fixed[:12])
    if has_label == 1:
        length = _sav_int(fh, order) or 0
        fh.seek(max(length, 0) + (-max(length, 0)) % 4, 1)
    fh.seek(8 * abs(n_missing), 1)


def _sav_check_labels(fh: BinaryIO, order: str, slots: int, path: Path) -> None:
    """Skip a value-label record (type 3) and check the variables its type-4 record names."""
    for _ in range(_sav_count(fh, order, path)):  # one value and its label per turn
        length = fh.read(9)[8:]
        if not length:
            return  # cut: readstat reports it
        fh.seek(length[0] + (-(length[0] + 1)) % 8, 1)  # label padded with its length byte
    if _sav_int(fh, order) != 4:
        return  # readstat reports the missing variable-index record
    count = _sav_count(fh, order, path)
    raw = fh.read(4 * count)
    indices = np.frombuffer(raw, dtype=order + "i4", count=len(raw) // 4)
    if ((indices < 1) | (indices > slots)).any():
        raise ReadError(f"'{path}' is damaged: value labels point at a variable that does not "
                        "exist; download or export the file again")


def _check_row_count(path: Path, fmt: str, meta: Any) -> None:
    """Raise ReadError when the header promises more rows than the file's size can hold."""
    # A damaged row count makes readstat allocate for millions of rows before it fails.
    rows = getattr(meta, "number_rows", None)
    if fmt not in _VARS_PER_BYTE or not isinstance(rows, int) or rows <= 0:
        return
    per_row = max(1, len(meta.column_names) // _VARS_PER_BYTE[fmt])
    size = path.stat().st_size
    if rows * per_row > size:
        raise ReadError(
            f"'{path}' is damaged: its header says {rows} rows, more than its {size} bytes "
            "can hold; download or export the file again"
        )


def _check_dta_end(path: Path) -> None:
    """Raise ReadError when a .dta (format 117+) file (XML-like tags) lacks its closing tag."""
    # pyreadstat reads such a file without its value labels and says nothing.
    with open(path, "rb") as fh:
        if fh.read(len(_DTA_OPEN)) != _DTA_OPEN:
            return  # .dta formats 104-115: a binary layout without tags
        fh.seek(max(path.stat().st_size - _DTA_TAIL, 0))
        tail = fh.read().rstrip(b" \t\r\n\x00")
    if not tail.endswith(_DTA_CLOSE):
        raise ReadError(
            f"'{path}' is truncated: it does not end with </stata_dta>; download the file again"
        )


def _check_xpt_end(path: Path, length: int) -> None:
    """Raise ReadError when a transport file ends inside an observation."""
    # pyreadstat silently returns the observations before the cut. Padding after the last
    # observation is blank and shorter than an 80-byte record, so anything else is a cut.
    size = path.stat().st_size
    start = _xpt_data_start(path)
    if start is None or length <= 0:
        return  # no observation header: pyreadstat has already judged the file
    rest = (size - start) % length
    if not rest:
        return
    with open(path, "rb") as fh:
        fh.seek(size - rest)
        tail = fh.read()
    if rest >= _XPT_RECORD or (size - start) % _XPT_RECORD or tail.strip(b" \x00"):
        raise ReadError(
            f"'{path}' is truncated: the last observation is incomplete; download the file again"
        )


def _xpt_data_start(path: Path) -> int | None:
    """Return the byte offset where a transport file's observations begin, or None."""
    import mmap

    with open(path, "rb") as fh, mmap.mmap(fh.fileno(), 0, access=mmap.ACCESS_READ) as data:
        at = data.find(_XPT_OBS)
        while at >= 0 and at % _XPT_RECORD:  # header records start on a record boundary
            at = data.find(_XPT_OBS, at + 1)
    return None if at < 0 else at + _XPT_RECORD


def _read_chunks(
    path: Path,
    fmt: str,
    names: list[str],
    rows: Rows | None,
    progress: bool,
    encoding: str,
    total: int | None,
) -> Iterator[pd.DataFrame]:
    """Yield the data in one piece, or in chunks behind a progress bar."""
    start, stop = rows if rows is not None else (0, None)
    limit = 0 if stop is None else stop - start
    opts: dict[str, Any] = {"usecols": names, "disable_datetime_conversion": True}
    wanted = _rows_wanted(total, start, stop)
    if not progress or wanted is None or wanted <= _CHUNK_ROWS:
        yield _call(path, fmt, encoding, row_offset=start, row_limit=limit, **opts)[0]
        return
    with progress_bar(progress, f"reading {path.name}", wanted) as advance:
        done = 0
        while done < wanted:
            size = min(_CHUNK_ROWS, wanted - done)
            frame = _call(path, fmt, encoding, row_offset=start + done, row_limit=size, **opts)[0]
            done += size
            advance(done)
            yield frame


def _rows_wanted(total: int | None, start: int, stop: int | None) -> int | None:
    """Return how many rows a read will return, when the file's metadata says how many it has."""
    if total is None or total < 0:
        return None
    end = total if stop is None else min(stop, total)
    return max(end - start, 0)


def _column_arrays(series: pd.Series, numeric: bool) -> tuple[np.ndarray, np.ndarray | None]:
    """Return (data, tags) for one column of a pyreadstat frame."""
    if not numeric:
        return series.to_numpy(dtype=object, na_value=""), None
    if series.dtype.kind in "fiub":
        return series.to_numpy(dtype=np.float64, na_value=np.nan), None
    # Tag letters make the column object (or str, when a chunk holds only letters).
    return _split_tags(series)


def _split_tags(series: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Split a numeric column holding tag letters into float64 data (NaN there) and tags."""
    import pandas as pd

    data = pd.to_numeric(series, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
    letters = np.isnan(data) & series.notna().to_numpy(dtype=bool)
    tags = np.zeros(len(data), dtype=np.uint8)
    if letters.any():
        found = series.to_numpy(dtype=object)[letters].astype("U1")
        tags[letters] = found.view(np.uint32).astype(np.uint8)
    return data, tags


def _join(
    parts: list[tuple[np.ndarray, np.ndarray | None]],
) -> tuple[np.ndarray, np.ndarray | None]:
    """Concatenate the (data, tags) pieces of one column read in chunks."""
    if len(parts) == 1:
        return parts[0]
    data = np.concatenate([p[0] for p in parts])
    if all(p[1] is None for p in parts):
        return data, None
    tags = [np.zeros(len(d), np.uint8) if t is None else t for d, t in parts]
    return data, np.concatenate(tags)


def _raw_column(
    name: str, data: np.ndarray, tags: np.ndarray | None, numeric: bool, meta: Any
) -> RawColumn:
    """Attach the file's metadata for *name* to its data."""
    labels = meta.variable_value_labels.get(name, {})
    return RawColumn(
        name=name,
        data=data,
        label=meta.column_names_to_labels.get(name) or None,
        value_labels={_code(k, numeric): str(v) for k, v in labels.items()},
        tags=tags,
        user_missing=list(_user_missing(meta.missing_ranges.get(name, []))) if numeric else [],
        numeric=numeric,
        format=meta.original_variable_types.get(name) or None,
    )


def _code(key: Any, numeric: bool) -> float | str:
    """Return a value-label code as float for numeric columns (tag letters stay str)."""
    if numeric and isinstance(key, (int, float)) and not isinstance(key, bool):
        return float(key)
    return str(key)


def _user_missing(ranges: list[dict[str, Any]]) -> list[float | tuple[float, float]]:
    """Turn pyreadstat's ``[{'lo': .., 'hi': ..}]`` into single codes and (low, high) ranges."""
    out: list[float | tuple[float, float]] = []
    for item in ranges:
        low, high = float(item["lo"]), float(item["hi"])
        out.append(low if low == high else (low, high))
    return out
