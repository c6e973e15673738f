"""The Parquet cache in row groups: a row range reads only the groups that hold it.

Row groups and their statistics are the Parquet format's own (Apache Parquet format
specification, "File format": row groups, column chunks, statistics in the footer); that a
range read equals the slice of a whole read is common practice, no source.
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import wstats.readers.parquet as parquet
from wstats.errors import ReadError
from wstats.readers.dispatch import read_raw
from wstats.readers.raw import RawColumn, RawTable

NAN = np.nan


def _table(n: int) -> RawTable:
    """A table of *n* rows: numbers with NaN, tagged missing values, text."""
    values = np.arange(n, dtype=np.float64) * 1.5
    values[::5] = NAN
    tags = np.zeros(n, dtype=np.uint8)
    tags[::5] = ord("a")
    text = np.array([f"t{i}" if i % 3 else "" for i in range(n)], dtype=object)
    return RawTable(path="mem", format="dta", reader="test", n_rows=n, file_label=None,
                    file_columns=["v", "t"],
                    columns={"v": RawColumn("v", values, tags=tags),
                             "t": RawColumn("t", text, numeric=False)})


def _write(table: RawTable, folder: Path, group: int) -> Path:
    path = folder / "c.parquet"
    old = parquet.ROW_GROUP
    parquet.ROW_GROUP = group
    try:
        parquet.write_parquet(table, str(path), None)
    finally:
        parquet.ROW_GROUP = old
    return path


def test_cache_is_written_in_row_groups_with_statistics(tmp_path: Path) -> None:
    path = _write(_table(23), tmp_path, 5)
    meta = pq.ParquetFile(path).metadata
    assert meta.num_row_groups == 5  # 5 + 5 + 5 + 5 + 3 rows
    stats = meta.row_group(1).column(0).statistics
    assert stats is not None and stats.has_min_max
    assert (stats.min, stats.max) == (9.0, 13.5)  # rows 5-9 hold 1.5 x 5..9; row 5 is NaN
    assert parquet.ROW_GROUP == 262_144


@settings(max_examples=40, deadline=None)
@given(n=st.integers(1, 30), group=st.integers(1, 8), start=st.integers(0, 35),
       length=st.none() | st.integers(0, 35))
def test_a_row_range_equals_the_slice_of_the_whole(n: int, group: int, start: int,
                                                   length: int | None) -> None:
    table = _table(n)
    stop = None if length is None else start + length
    end = n if stop is None else min(stop, n)
    want = slice(min(start, end), end)
    with tempfile.TemporaryDirectory() as folder:
        path = _write(table, Path(folder), group)
        if end <= start:  # nothing in the range: the one-line error, as for every format
            with pytest.raises(ReadError, match="has no rows in the row subset"):
                read_raw(path, rows=(start, stop))
            return
        part = read_raw(path, rows=(start, stop))
    assert part.n_rows == end - start
    np.testing.assert_array_equal(part.columns["v"].data, table.columns["v"].data[want])
    tags = part.columns["v"].tags
    assert tags is not None and tags.dtype == np.uint8
    np.testing.assert_array_equal(tags, table.columns["v"].tags[want])  # type: ignore[index]
    assert list(part.columns["t"].data) == list(table.columns["t"].data[want])
    assert part.columns["v"].data.flags.writeable


def test_reading_a_cache_needs_neither_pandas_nor_pyarrow_compute(tmp_path: Path) -> None:
    path = _write(_table(50), tmp_path, 7)
    code = ("import sys; from wstats.readers.dispatch import read_raw; "
            f"t = read_raw({str(path)!r}); "
            "assert list(t.columns['t'].data)[:3] == ['', 't1', 't2']; "
            "print(sorted(m for m in ('pandas', 'pyarrow.compute') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "[]"


def test_a_damaged_tag_column_is_a_read_error(tmp_path: Path) -> None:
    import pyarrow as pa

    path = tmp_path / "bad.parquet"
    table = pa.table({"v": pa.array([1.0, 2.0]), f"{parquet.TAGS_PREFIX}v": pa.array([1, 2])})
    pq.write_table(table, path)
    with pytest.raises(ReadError, match="tag column .* damaged"):
        read_raw(path)


def test_only_the_row_groups_of_the_range_are_read(tmp_path: Path,
                                                   monkeypatch: pytest.MonkeyPatch) -> None:
    path = _write(_table(40), tmp_path, 10)
    asked: list[list[int]] = []
    real = pq.ParquetFile.read_row_groups

    def spy(self: pq.ParquetFile, groups: list[int], **kw: object) -> object:
        asked.append(list(groups))
        return real(self, groups, **kw)  # type: ignore[arg-type]

    monkeypatch.setattr(pq.ParquetFile, "read_row_groups", spy)
    part = read_raw(path, rows=(12, 25))
    assert asked == [[1, 2]]  # rows 10-19 and 20-29
    np.testing.assert_array_equal(part.columns["v"].data, _table(40).columns["v"].data[12:25])
