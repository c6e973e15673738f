"""A row range of a Parquet file reads only the row groups that hold it (Dask partitions)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pytest

from wstats.readers.dispatch import read_raw


@pytest.fixture()
def grouped(tmp_path: Path) -> Path:
    import pyarrow as pa
    import pyarrow.parquet as pq

    n = 95
    table = pa.table({"a": np.arange(n, dtype=np.float64),
                      "t": [f"r{i}" for i in range(n)]})
    path = tmp_path / "g.parquet"
    pq.write_table(table, path, row_group_size=10)
    return path


@pytest.mark.parametrize("rows", [(0, 10), (15, 37), (30, 40), (90, None), (94, 95), (0, None)])
def test_a_row_range_equals_the_slice_of_the_whole(grouped: Path, rows: Any) -> None:
    whole = read_raw(grouped)
    part = read_raw(grouped, rows=rows)
    start, stop = rows
    stop = 95 if stop is None else stop
    assert part.n_rows == stop - start
    np.testing.assert_array_equal(part.columns["a"].data, whole.columns["a"].data[start:stop])
    assert list(part.columns["t"].data) == list(whole.columns["t"].data[start:stop])


def test_only_the_row_groups_of_the_range_are_read(grouped: Path,
                                                   monkeypatch: pytest.MonkeyPatch) -> None:
    import pyarrow.parquet as pq

    seen: list[int] = []
    one, many = pq.ParquetFile.read_row_group, pq.ParquetFile.read_row_groups

    def spy(self: Any, i: int, *args: Any, **kwargs: Any) -> Any:
        seen.append(i)
        return one(self, i, *args, **kwargs)

    def spy_many(self: Any, groups: list[int], *args: Any, **kwargs: Any) -> Any:
        seen.extend(groups)
        return many(self, groups, *args, **kwargs)

    monkeypatch.setattr(pq.ParquetFile, "read_row_group", spy)
    monkeypatch.setattr(pq.ParquetFile, "read_row_groups", spy_many)
    read_raw(grouped, rows=(15, 37))
    assert seen == [1, 2, 3]
