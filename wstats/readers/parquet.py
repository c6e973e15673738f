"""Parquet files, including the wstats cache that :func:`wstats.readers.cache.convert` writes.

Cache layout (our own): one Parquet column per data column (float64 for numeric columns,
UTF-8 string for character columns), zstd-compressed, in row groups of ``ROW_GROUP`` rows with
each column's statistics (pyarrow's default), so that a reader takes only the columns and the
row groups it needs. Tagged missing values are kept in an
extra ``uint8`` column named ``__tags__<name>`` beside each column that has tags (a column per
row rather than metadata, so it stays cheap for large files and is read only with its column);
the ``__tags__`` prefix is reserved and such columns are never listed as data. Everything
else the source file said is JSON under the key ``wstats`` of the file's key-value metadata::

    {"wstats_cache": 1, "source": {"path": ..., "format": ..., "reader": ..., "sha256": ...},
     "file_label": ..., "columns": {name: {"label": ..., "value_labels": [[code, label], ...],
     "user_missing": [code or [low, high], ...], "numeric": bool, "format": ...}}}

Any other Parquet file reads too: numeric and boolean columns become float64 (nulls NaN),
string columns text (nulls ""), with no labels.

Reading imports pyarrow's core and Parquet modules only: float64 columns are copied straight
from the Arrow buffers and text through Python lists, because pyarrow's ``to_numpy`` imports
pandas (about 0.3 s) and ``cast`` its compute module (about 30 ms; needed only for other
Parquet files' integer, boolean or float32 columns).
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from pathlib import Path
from typing import IO, TYPE_CHECKING, Any

import numpy as np

from wstats.errors import ColumnError, ReadError
from wstats.readers.common import Rows, progress_bar, select_columns
from wstats.readers.raw import EXACT_LIMIT, RawColumn, RawTable

if TYPE_CHECKING:
    import pyarrow as pa
    import pyarrow.parquet as pq

__all__ = ["META_KEY", "ROW_GROUP", "TAGS_PREFIX", "parquet_columns", "read_parquet",
           "write_parquet"]

META_KEY = b"wstats"
TAGS_PREFIX = "__tags__"
ROW_GROUP = 262_144  # rows per row group the cache is written in (the decoding tile's size)
_VERSION = 1


def parquet_columns(path: Path) -> list[str]:
    """Return the data column names of a Parquet file from its schema."""
    return [n for n in _schema(path).names if not n.startswith(TAGS_PREFIX)]


def read_parquet(
    path: Path,
    columns: Sequence[str] | None = None,
    rows: Rows | None = None,
    progress: bool = False,
) -> RawTable:
    """Read a Parquet file (a wstats cache or any other) into a RawTable.

    Only the named columns are read, and of them only the row groups that hold *rows*.
    """
    handle = _open(path)
    schema = handle.schema_arrow
    every = [n for n in schema.names if not n.startswith(TAGS_PREFIX)]
    names = select_columns(path, every, columns)
    tagged = [TAGS_PREFIX + n for n in names if TAGS_PREFIX + n in schema.names]
    groups, skip, count = _row_groups(handle, rows)
    table = _read_table(handle, path, names + tagged, groups, progress)
    if rows is not None:
        table = table.slice(skip, count)
    info = _cache_info(path, schema)
    described = info.get("columns", {})
    cols = {n: _raw_column(path, table, n, described.get(n, {})) for n in names}
    return RawTable(
        path=str(path),
        format="parquet",
        reader="pyarrow",
        n_rows=table.num_rows,
        columns=cols,
        file_columns=every,
        file_label=info.get("file_label"),
    )


def write_parquet(table: RawTable, sink: str | IO[bytes], source_sha256: str | None) -> None:
    """Write a RawTable as a wstats cache (zstd Parquet with the metadata described above)."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    arrays: dict[str, pa.Array] = {}
    for name, col in table.columns.items():
        if col.numeric:
            arrays[name] = pa.array(np.asarray(col.data, dtype=np.float64), type=pa.float64())
        else:
            arrays[name] = pa.array(col.data, type=pa.string())
        if col.tags is not None:
            arrays[TAGS_PREFIX + name] = pa.array(np.asarray(col.tags, dtype=np.uint8))
    info = {
        "wstats_cache": _VERSION,
        "source": {
            "path": table.path,
            "format": table.format,
            "reader": table.reader,
            "sha256": source_sha256,
        },
        "file_label": table.file_label,
        "columns": {name: _describe(col) for name, col in table.columns.items()},
    }
    out = pa.table(arrays).replace_schema_metadata({META_KEY: json.dumps(info).encode()})
    pq.write_table(out, sink, compression="zstd", row_group_size=ROW_GROUP,
                   write_statistics=True)


def _schema(path: Path) -> pa.Schema:
    """Read a Parquet file's schema, turning pyarrow failures into ReadError."""
    return _open(path).schema_arrow


def _open(path: Path) -> pq.ParquetFile:
    """Open a Parquet file (its footer is read once), turning pyarrow failures into ReadError."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        return pq.ParquetFile(path)
    except (pa.ArrowException, OSError, ValueError) as exc:
        raise _damaged(path, exc) from exc


def _row_groups(handle: pq.ParquetFile, rows: Rows | None) -> tuple[list[int], int, int | None]:
    """Return the row groups holding *rows*, the rows to skip in the first, and the count.

    ``rows`` is ``(start, stop)`` (stop None = to the end); None means every row group.
    """
    meta = handle.metadata
    if rows is None:
        return list(range(meta.num_row_groups)), 0, None
    start, stop = rows
    first = 0
    groups = []
    for i in range(meta.num_row_groups):  # a loop over row groups (a few per million rows)
        n = meta.row_group(i).num_rows
        if first + n > start and (stop is None or first < stop):
            groups.append(i)
        first += n
    begin = sum(meta.row_group(i).num_rows for i in range(groups[0])) if groups else 0
    skip = max(start - begin, 0)
    return groups, skip, None if stop is None else max(stop - max(start, begin), 0)


def _read_table(handle: pq.ParquetFile, path: Path, names: list[str], groups: list[int],
                progress: bool) -> pa.Table:
    """Read the named columns of *groups*, behind a progress bar when asked."""
    import pyarrow as pa

    try:
        if not progress or len(groups) < 2:
            return handle.read_row_groups(groups, columns=names)
        parts = []
        with progress_bar(progress, f"reading {path.name}", len(groups)) as advance:
            for done, i in enumerate(groups, 1):
                parts.append(handle.read_row_group(i, columns=names))
                advance(done)
        return pa.concat_tables(parts)
    except (pa.ArrowException, OSError, ValueError) as exc:
        raise _damaged(path, exc) from exc


def _damaged(path: Path, exc: Exception) -> ReadError:
    """Return the one-line ReadError for a file pyarrow cannot read."""
    # pyarrow's messages run over several lines; the first says what went wrong.
    lines = [" ".join(line.split()) for line in str(exc).splitlines()]
    detail = next((line for line in lines if line), type(exc).__name__)
    return ReadError(
        f"'{path}' cannot be read as a Parquet file ({detail}); it may be truncated or "
        "corrupt: download or convert it again"
    )


def _cache_info(path: Path, schema: pa.Schema) -> dict[str, Any]:
    """Return the wstats metadata of a cache file ({} for other Parquet files)."""
    raw = (schema.metadata or {}).get(META_KEY)
    if raw is None:
        return {}
    try:
        info = json.loads(raw)
    except ValueError as exc:
        raise ReadError(f"the wstats metadata of '{path}' is damaged; convert again") from exc
    if not isinstance(info, dict) or info.get("wstats_cache") != _VERSION:
        raise ReadError(f"'{path}' is a wstats cache of an unknown version; convert again")
    return info


def _raw_column(path: Path, table: pa.Table, name: str, info: dict[str, Any]) -> RawColumn:
    """Build one RawColumn from its Parquet column and its cache description."""
    exact = _beyond_float(table.column(name))
    if exact:  # whole numbers beyond 2**53: decimal text keeps each one distinct
        data, numeric = _decimal_text(table.column(name)), False
    else:
        data, numeric = _to_numpy(path, name, table.column(name))
    tag_name = TAGS_PREFIX + name
    tags = None
    if tag_name in table.column_names:
        tags = _uint8(table.column(tag_name))
    return RawColumn(
        name=name,
        data=data,
        label=info.get("label"),
        value_labels={_key(code): str(label) for code, label in info.get("value_labels", [])},
        tags=tags,
        user_missing=[_missing(item) for item in info.get("user_missing", [])],
        numeric=numeric,
        format=info.get("format"),
        exact_integers=exact,
    )


def _beyond_float(column: pa.ChunkedArray) -> bool:
    """Tell whether an integer column holds a value float64 cannot hold exactly."""
    import pyarrow as pa

    kind = column.type
    if pa.types.is_dictionary(kind):
        kind = kind.value_type
    if not pa.types.is_integer(kind) or kind.bit_width < 54:
        return False
    import pyarrow.compute as pc  # only for 64-bit integers: the cache's numbers are float64
    bounds = pc.min_max(column if kind == column.type else column.cast(kind))
    low, high = bounds["min"].as_py(), bounds["max"].as_py()
    return low is not None and max(abs(low), abs(high)) > EXACT_LIMIT


def _decimal_text(column: pa.ChunkedArray) -> np.ndarray:
    """Return an integer column as an object array of decimal text ("" for null)."""
    import pyarrow as pa

    text = column.cast(pa.string()).combine_chunks() if not pa.types.is_dictionary(
        column.type) else column.cast(column.type.value_type).cast(pa.string()).combine_chunks()
    out = np.asarray(text.to_numpy(zero_copy_only=False), dtype=object)
    out[np.asarray(text.is_null().to_numpy(zero_copy_only=False), dtype=bool)] = ""
    return out


def _to_numpy(path: Path, name: str, column: pa.ChunkedArray) -> tuple[np.ndarray, bool]:
    """Convert an Arrow column to float64 (numbers, booleans) or an object array of str."""
    import pyarrow as pa

    kind = column.type
    if pa.types.is_dictionary(kind):
        column = column.cast(kind.value_type)
        kind = column.type
    if pa.types.is_integer(kind) or pa.types.is_floating(kind) or pa.types.is_boolean(kind):
        if kind != pa.float64():  # not a cache's own column: cast (imports pyarrow.compute)
            column = column.cast(pa.float64())
        return _chunks_float64(column), True
    if pa.types.is_string(kind) or pa.types.is_large_string(kind):
        text = np.empty(len(column), dtype=object)
        text[:] = ["" if v is None else v for v in column.to_pylist()]
        return text, False
    raise ColumnError(
        f"column '{name}' of '{path}' has type {kind}, which wstats cannot use; "
        "store it as a number or as text"
    )


def _chunks_float64(column: pa.ChunkedArray) -> np.ndarray:
    """Return a float64 Arrow column (one chunk per row group) as one writable numpy array."""
    out = np.empty(len(column))
    at = 0
    for chunk in column.chunks:  # a loop over row groups, not rows
        _float64(chunk, out[at : at + len(chunk)])
        at += len(chunk)
    return out


def _float64(array: pa.Array, out: np.ndarray | None = None) -> np.ndarray:
    """Return a float64 Arrow array as a writable numpy copy (into *out*), nulls as NaN.

    Straight from the Arrow buffers: pyarrow's own ``to_numpy`` imports pandas (0.3 s).
    """
    n = len(array)
    values = np.empty(n) if out is None else out
    if n == 0:
        return values
    data = array.buffers()[1]
    values[:] = np.frombuffer(data, dtype=np.float64, count=n, offset=array.offset * 8)
    if array.null_count:
        values[~_valid_bits(array)] = np.nan
    return values


def _valid_bits(array: pa.Array) -> np.ndarray:
    """Return an Arrow array's validity bitmap as booleans (True = not null)."""
    bits = np.unpackbits(np.frombuffer(array.buffers()[0], dtype=np.uint8), bitorder="little")
    return bits[array.offset : array.offset + len(array)].astype(bool)


def _uint8(column: pa.ChunkedArray) -> np.ndarray:
    """Return a cache's uint8 tag column as one numpy array (it has no nulls)."""
    import pyarrow as pa

    if column.type != pa.uint8() or column.null_count:
        raise ReadError("a missing-value tag column of this wstats cache is damaged; "
                        "convert again")
    out = np.empty(len(column), dtype=np.uint8)
    at = 0
    for chunk in column.chunks:  # a loop over row groups, not rows
        n = len(chunk)
        out[at : at + n] = np.frombuffer(chunk.buffers()[1], dtype=np.uint8, count=n,
                                         offset=chunk.offset)
        at += n
    return out


def _describe(col: RawColumn) -> dict[str, Any]:
    """Return the JSON-ready metadata of one column."""
    return {
        "label": col.label,
        "value_labels": [[code, label] for code, label in col.value_labels.items()],
        "user_missing": [list(m) if isinstance(m, tuple) else m for m in col.user_missing],
        "numeric": col.numeric,
        "format": col.format,
    }


def _key(code: Any) -> float | str:
    """Return a value-label code read from JSON: numbers as float, text as str."""
    return code if isinstance(code, str) else float(code)


def _missing(item: Any) -> float | tuple[float, float]:
    """Return a user-missing declaration read from JSON: a code or a (low, high) range."""
    if isinstance(item, list):
        return (float(item[0]), float(item[1]))
    return float(item)
