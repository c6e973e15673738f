"""The Parquet cache: reading it back gives the same RawTable the source file gives."""

from __future__ import annotations

import json
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pyreadstat
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

from wstats.errors import OutputError, ReadError
from wstats.readers.cache import convert
from wstats.readers.dispatch import file_columns, read_raw
from wstats.readers.output import sha256_of
from wstats.readers.parquet import META_KEY, TAGS_PREFIX, write_parquet
from wstats.readers.raw import RawColumn, RawTable

NAN = np.nan
FRAME = pd.DataFrame(
    {
        "age": [34.0, 51.0, 77.0, 99.0, NAN, 22.0],
        "smoke": [1.0, 2.0, 7.0, 9.0, 1.0, 98.0],
        "town": ["Alder", "Birch", "", "Cedar", "Alder", "Dogwood"],
    }
)


def assert_same_table(a: RawTable, b: RawTable) -> None:
    """Assert two tables hold the same data and metadata (path, format and reader aside)."""
    assert (a.n_rows, a.file_columns, a.file_label) == (b.n_rows, b.file_columns, b.file_label)
    assert list(a.columns) == list(b.columns)
    for name, x in a.columns.items():
        y = b.columns[name]
        assert x.data.dtype == y.data.dtype, name
        np.testing.assert_array_equal(x.data, y.data)
        if x.tags is None:
            assert y.tags is None, name
        else:
            assert y.tags is not None and y.tags.dtype == np.uint8
            np.testing.assert_array_equal(x.tags, y.tags)
        assert (x.label, x.value_labels, x.user_missing, x.numeric, x.format) == (
            y.label,
            y.value_labels,
            y.user_missing,
            y.numeric,
            y.format,
        ), name


def _source(kind: str, folder: Path) -> Path:
    """Write FRAME (plus tagged values for .dta) as *kind* with pyreadstat or pandas."""
    path = folder / f"src.{kind}"
    labels: dict[str, str | None] = {"age": "Age in years", "smoke": "Smoked in past 30 days"}
    if kind == "sav":
        pyreadstat.write_sav(
            FRAME,
            path,
            file_label="Tamarack test",
            column_labels=labels,
            variable_value_labels={"smoke": {1: "Yes", 2: "No", 7: "Don't know"}},
            missing_ranges={"smoke": [7, {"lo": 97, "hi": 99}], "age": [99]},
        )
    elif kind == "dta":
        tagged = FRAME.assign(smoke=pd.Series([1.0, 2.0, "a", "r", 1.0, NAN], dtype=object))
        pyreadstat.write_dta(
            tagged,
            path,
            column_labels=labels,
            missing_user_values={"smoke": ["a", "r"]},
            variable_value_labels={"smoke": {1: "Yes", 2: "No"}},
        )
    elif kind == "xpt":
        pyreadstat.write_xport(FRAME, path, column_labels=labels, file_format_version=5)
    elif kind == "por":
        pyreadstat.write_por(FRAME, path)
    elif kind == "csv":
        FRAME.to_csv(path, index=False)
    return path


@pytest.mark.parametrize("kind", ["sav", "dta", "xpt", "por", "csv"])
def test_cache_round_trip(tmp_path: Path, kind: str) -> None:
    src = _source(kind, tmp_path)
    out = convert(src, tmp_path / "cache.parquet")
    assert out == tmp_path / "cache.parquet"
    original, cached = read_raw(src), read_raw(out)
    assert_same_table(original, cached)
    assert cached.format == "parquet" and cached.reader == "pyarrow"


def test_cache_keeps_user_missing_and_tags(tmp_path: Path) -> None:
    sav = read_raw(convert(_source("sav", tmp_path), tmp_path / "s.parquet"))
    assert sorted(sav.columns["smoke"].user_missing, key=str) == [(97.0, 99.0), 7.0]
    assert sav.columns["age"].user_missing == [99.0]
    assert sav.columns["smoke"].value_labels[7.0] == "Don't know"
    assert sav.file_label == "Tamarack test"
    dta = read_raw(convert(_source("dta", tmp_path), tmp_path / "d.parquet"))
    smoke = dta.columns["smoke"]
    assert smoke.tags is not None
    np.testing.assert_array_equal(smoke.tags, [0, 0, ord("a"), ord("r"), 0, 0])
    np.testing.assert_array_equal(smoke.data, [1.0, 2.0, NAN, NAN, 1.0, NAN])


def test_cache_file_layout(tmp_path: Path) -> None:
    src = _source("dta", tmp_path)
    out = convert(src, tmp_path / "c.parquet")
    handle = pq.ParquetFile(out)
    # zstd compression and the tags column, as documented in wstats.readers.parquet.
    assert handle.metadata.row_group(0).column(0).compression == "ZSTD"
    assert handle.schema_arrow.names == ["age", "smoke", f"{TAGS_PREFIX}smoke", "town"]
    info = json.loads(handle.schema_arrow.metadata[META_KEY])
    assert info["source"]["sha256"] == sha256_of(src)
    assert info["source"]["format"] == "dta"
    assert info["columns"]["age"]["label"] == "Age in years"
    assert file_columns(out) == ["age", "smoke", "town"]


def test_cache_column_and_row_subset(tmp_path: Path) -> None:
    out = convert(_source("dta", tmp_path), tmp_path / "c.parquet")
    table = read_raw(out, columns=["smoke"], rows=(1, 4))
    assert list(table.columns) == ["smoke"]
    np.testing.assert_array_equal(table.columns["smoke"].data, [2.0, NAN, NAN])
    tags = table.columns["smoke"].tags
    assert tags is not None
    np.testing.assert_array_equal(tags, [0, ord("a"), ord("r")])


def test_existing_cache_is_refused_then_overwritten(tmp_path: Path) -> None:
    src = _source("csv", tmp_path)
    out = tmp_path / "c.parquet"
    out.write_bytes(b"old")
    with pytest.raises(OutputError, match="exists; pass --overwrite to replace it"):
        convert(src, out)
    assert out.read_bytes() == b"old"
    convert(src, out, overwrite=True)
    assert read_raw(out).n_rows == 6


def test_cache_name_must_be_parquet(tmp_path: Path) -> None:
    with pytest.raises(OutputError, match=r"must have a name ending in \.parquet"):
        convert(_source("csv", tmp_path), tmp_path / "c.csv")


def test_cache_cannot_replace_its_source(tmp_path: Path) -> None:
    src = tmp_path / "s.parquet"
    convert(_source("csv", tmp_path), src)
    before = src.read_bytes()
    with pytest.raises(OutputError, match="is the input file itself"):
        convert(src, src, overwrite=True)
    assert src.read_bytes() == before


def test_failed_read_writes_nothing(tmp_path: Path) -> None:
    src = tmp_path / "bad.sav"
    src.write_bytes(b"$FL2 this is not really a system file")
    with pytest.raises(ReadError, match="bad.sav"):
        convert(src, tmp_path / "c.parquet")
    assert list(tmp_path.iterdir()) == [src]


def test_missing_output_folder(tmp_path: Path) -> None:
    with pytest.raises(OutputError, match="does not exist; create it first"):
        convert(_source("csv", tmp_path), tmp_path / "no" / "c.parquet")


_floats = hnp.arrays(
    np.float64,
    st.integers(1, 30),
    elements=st.floats(allow_nan=True, allow_infinity=True, width=64),
)


@settings(max_examples=30, deadline=None)
@given(
    data=_floats,
    letters=st.lists(st.sampled_from("_ABZaz"), min_size=30, max_size=30),
    text=st.lists(st.text(max_size=5), min_size=30, max_size=30),
)
def test_write_then_read_is_identity(data: np.ndarray, letters: list[str], text: list[str]) -> None:
    n = len(data)
    tags = np.frombuffer("".join(letters[:n]).encode(), dtype=np.uint8).copy()
    tags[::2] = 0
    values = np.where(tags > 0, NAN, data)
    table = RawTable(
        path="mem",
        format="dta",
        reader="test",
        n_rows=n,
        file_label="F",
        file_columns=["v", "t"],
        columns={
            "v": RawColumn(
                "v",
                values,
                label="V",
                value_labels={1.0: "one", "a": "tag a"},
                tags=tags,
                user_missing=[9.0, (97.0, 99.0)],
                format="F8.2",
            ),
            "t": RawColumn("t", np.array(text[:n], dtype=object), numeric=False),
        },
    )
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "m.parquet"
        write_parquet(table, str(path), None)
        assert_same_table(table, read_raw(path))
