"""Readers: every format gives the values, labels and missing-value facts that were written.

Expected values are the ones each test writes into the file itself (with pyreadstat, pyarrow
or plain bytes), so the oracle is the writer, not wstats. Facts about the file formats that a
test relies on are cited beside it.
"""

from __future__ import annotations

import gzip
import os
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pyreadstat
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import wstats.readers.raw as readers
from wstats.errors import ColumnError, ReadError
from wstats.readers import stat as stat_reader
from wstats.readers import text as text_reader
from wstats.readers.dispatch import FORMATS, file_columns, format_of, read_raw

NAN = np.nan
IS_ROOT = hasattr(os, "geteuid") and os.geteuid() == 0

X = [1.0, 2.0, 7.0, 9.0, NAN, 97.0, 98.0]
S = ["u", "v", "", "w", "x", "DK", "z"]
FRAME = pd.DataFrame({"x": X, "y": [1.0, 7.0, 8.0, 9.0, 1.0, 1.0, 1.0], "s": S})


def _write(kind: str, folder: Path) -> Path:
    """Write FRAME as *kind* with the metadata each format can hold."""
    path = folder / f"t.{kind}"
    labels: dict[str, str | None] = {"x": "Lab X"}
    if kind in ("sav", "zsav"):
        pyreadstat.write_sav(
            FRAME,
            path,
            file_label="flab",
            column_labels=labels,
            compress=kind == "zsav",
            variable_value_labels={"x": {1: "one", 2: "two", 7: "dk"}},
            missing_ranges={"x": [7, {"lo": 97, "hi": 99}], "y": [7, 8, 9]},
        )
    elif kind == "por":
        pyreadstat.write_por(FRAME, path)
    elif kind == "xpt":
        pyreadstat.write_xport(FRAME, path, column_labels=labels, file_format_version=5)
    elif kind == "dta":
        pyreadstat.write_dta(
            FRAME, path, column_labels=labels, variable_value_labels={"x": {1: "one", 2: "two"}}
        )
    elif kind in ("csv", "tsv", "csv.gz", "tsv.gz"):
        FRAME.to_csv(path, sep="\t" if kind.startswith("tsv") else ",", index=False)
    elif kind == "parquet":
        pq.write_table(pa.Table.from_pandas(FRAME, preserve_index=False), path)
    return path


ALL_KINDS = ["sav", "zsav", "por", "xpt", "dta", "csv", "tsv", "csv.gz", "tsv.gz", "parquet"]


@pytest.fixture(scope="module")
def files(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    folder = tmp_path_factory.mktemp("formats")
    return {kind: _write(kind, folder) for kind in ALL_KINDS}


def _names(kind: str) -> list[str]:
    # The portable format stores names in upper case (pyreadstat writes them so).
    return ["X", "Y", "S"] if kind == "por" else ["x", "y", "s"]


@pytest.mark.parametrize("kind", ALL_KINDS)
def test_every_format_round_trips_the_data(files: dict[str, Path], kind: str) -> None:
    table = read_raw(files[kind])
    nx, ny, ns = _names(kind)
    assert table.n_rows == 7
    assert table.file_columns == [nx, ny, ns]
    assert list(table.columns) == [nx, ny, ns]
    np.testing.assert_array_equal(table.columns[nx].data, np.array(X))
    assert table.columns[nx].data.dtype == np.float64 and table.columns[nx].numeric
    text = table.columns[ns]
    assert not text.numeric and text.data.dtype == object
    assert list(text.data) == S  # blank cells come back as "" (RawColumn contract)
    assert format_of(files[kind]) == FORMATS["." + kind]
    assert file_columns(files[kind]) == [nx, ny, ns]


def test_sav_user_missing_values_and_ranges(files: dict[str, Path]) -> None:
    table = read_raw(files["sav"])
    x, y = table.columns["x"], table.columns["y"]
    # Declared codes: one value plus one range on x, three values on y (as written above);
    # the raw codes stay in the data.
    assert sorted(x.user_missing, key=str) == [(97.0, 99.0), 7.0]
    assert y.user_missing == [7.0, 8.0, 9.0]
    np.testing.assert_array_equal(y.data, [1.0, 7.0, 8.0, 9.0, 1.0, 1.0, 1.0])
    assert x.label == "Lab X" and y.label is None
    assert x.value_labels == {1.0: "one", 2.0: "two", 7.0: "dk"}
    assert table.file_label == "flab"
    assert x.format == "F8.2"
    assert table.reader == "pyreadstat" and table.format == "sav"


def test_zsav_keeps_user_missing(files: dict[str, Path]) -> None:
    table = read_raw(files["zsav"])
    assert table.format == "zsav"
    assert table.columns["y"].user_missing == [7.0, 8.0, 9.0]


def test_dta_and_xpt_labels(files: dict[str, Path]) -> None:
    dta = read_raw(files["dta"])
    assert dta.columns["x"].label == "Lab X"
    assert dta.columns["x"].value_labels == {1.0: "one", 2.0: "two"}
    assert dta.columns["x"].tags is None  # no tagged missing values written
    xpt = read_raw(files["xpt"])
    assert xpt.columns["x"].label == "Lab X"


def test_dta_tagged_missing_become_nan_and_tags(tmp_path: Path) -> None:
    # .dta extended missing values .a-.z (written by pyreadstat.write_dta missing_user_values).
    frame = pd.DataFrame({"q": pd.Series([1.0, "a", 3.0, "z", NAN, "a"], dtype=object)})
    path = tmp_path / "tagged.dta"
    pyreadstat.write_dta(frame, path, missing_user_values={"q": ["a", "z"]})
    col = read_raw(path).columns["q"]
    np.testing.assert_array_equal(col.data, [1.0, NAN, 3.0, NAN, NAN, NAN])
    assert col.tags is not None and col.tags.dtype == np.uint8
    np.testing.assert_array_equal(col.tags, [0, ord("a"), 0, ord("z"), 0, ord("a")])
    # Chunked reading (progress on a terminal) must give the same columns.
    chunked = _read_in_chunks(path, chunk_rows=4)
    np.testing.assert_array_equal(chunked.columns["q"].tags, col.tags)


def _read_in_chunks(path: Path, chunk_rows: int) -> readers.RawTable:
    """Read *path* through the progress-bar path with tiny chunks."""
    mp = pytest.MonkeyPatch()
    try:
        mp.setattr(stat_reader, "_CHUNK_ROWS", chunk_rows)
        mp.setattr(text_reader, "_CHUNK_ROWS", chunk_rows)
        mp.setattr("sys.stderr.isatty", lambda: True)
        return read_raw(path, progress=True)
    finally:
        mp.undo()


@pytest.mark.parametrize("kind", ["sav", "dta", "csv", "csv.gz"])
def test_chunked_progress_read_equals_plain_read(files: dict[str, Path], kind: str) -> None:
    plain, chunked = read_raw(files[kind]), _read_in_chunks(files[kind], chunk_rows=3)
    assert chunked.n_rows == plain.n_rows
    for name, col in plain.columns.items():
        np.testing.assert_array_equal(chunked.columns[name].data, col.data)


def test_csv_text_columns_keep_spelling_and_na_is_text(tmp_path: Path) -> None:
    path = tmp_path / "codes.csv"
    path.write_text("id,code,n\n1,007,5\n2,NA,\n3,A1,2.5\n")
    table = read_raw(path)
    # "NA" is not treated as missing: only empty cells are blank.
    assert list(table.columns["code"].data) == ["007", "NA", "A1"]
    assert not table.columns["code"].numeric
    np.testing.assert_array_equal(table.columns["n"].data, [5.0, NAN, 2.5])


def test_parquet_types(tmp_path: Path) -> None:
    path = tmp_path / "types.parquet"
    table = pa.table(
        {
            "i": pa.array([1, None, 3], pa.int32()),
            "b": pa.array([True, False, None]),
            "t": pa.array(["a", None, "c"]),
            "d": pa.array(["p", "q", "p"]).dictionary_encode(),
        }
    )
    pq.write_table(table, path)
    raw = read_raw(path)
    np.testing.assert_array_equal(raw.columns["i"].data, [1.0, NAN, 3.0])
    np.testing.assert_array_equal(raw.columns["b"].data, [1.0, 0.0, NAN])
    assert list(raw.columns["t"].data) == ["a", "", "c"]
    assert list(raw.columns["d"].data) == ["p", "q", "p"]


def test_parquet_numbers_across_row_groups_with_nulls(tmp_path: Path) -> None:
    # common practice, no source: numbers come straight from the Arrow buffers; nulls (in
    # any row group, at any bit offset) become NaN, NaN stays NaN, the arrays are writable
    path = tmp_path / "groups.parquet"
    rng = np.random.default_rng(3)
    ints = [None if k % 7 == 3 else int(k) for k in range(50)]
    floats = rng.normal(size=50)
    floats[[5, 17]] = NAN
    table = pa.table({"i": pa.array(ints, pa.int16()),
                      "f": pa.array(floats, mask=np.arange(50) % 11 == 4)})
    pq.write_table(table, path, row_group_size=9)
    raw = read_raw(path)
    want_i = np.array([NAN if v is None else v for v in ints])
    want_f = np.where(np.arange(50) % 11 == 4, NAN, floats)
    np.testing.assert_array_equal(raw.columns["i"].data, want_i)
    np.testing.assert_array_equal(raw.columns["f"].data, want_f)
    assert raw.columns["f"].data.flags.writeable
    sliced = pa.table({"x": pa.array([1.0, None, 3.0, None, 5.0]).slice(1)})
    pq.write_table(sliced, tmp_path / "sliced.parquet")
    np.testing.assert_array_equal(read_raw(tmp_path / "sliced.parquet").columns["x"].data,
                                  [NAN, 3.0, NAN, 5.0])
    from wstats.readers.parquet import _float64

    offset = pa.array([1.0, None, 3.0, None, 5.0, 6.0, 7.0, 8.0, 9.0, None, 11.0]).slice(3)
    np.testing.assert_array_equal(_float64(offset),
                                  [NAN, 5.0, 6.0, 7.0, 8.0, 9.0, NAN, 11.0])


@pytest.mark.parametrize("kind", ALL_KINDS)
def test_column_subset_in_requested_order(files: dict[str, Path], kind: str) -> None:
    nx, _ny, ns = _names(kind)
    table = read_raw(files[kind], columns=[ns, nx])
    assert list(table.columns) == [ns, nx]
    assert table.file_columns == _names(kind)
    assert list(table.columns[ns].data) == S


@pytest.mark.parametrize("kind", ALL_KINDS)
def test_row_subset(files: dict[str, Path], kind: str) -> None:
    nx, _ny, ns = _names(kind)
    table = read_raw(files[kind], rows=(2, 5))
    assert table.n_rows == 3
    np.testing.assert_array_equal(table.columns[nx].data, X[2:5])
    assert list(table.columns[ns].data) == S[2:5]
    tail = read_raw(files[kind], rows=(5, None))
    np.testing.assert_array_equal(tail.columns[nx].data, X[5:])


@settings(max_examples=20, deadline=None)
@given(start=st.integers(0, 6), length=st.integers(1, 9))
def test_row_subset_equals_slice_property(files: dict[str, Path], start: int, length: int) -> None:
    for kind in ("sav", "csv", "parquet"):
        table = read_raw(files[kind], columns=["x"], rows=(start, start + length))
        np.testing.assert_array_equal(table.columns["x"].data, X[start : start + length])


# ---- errors: one line, naming the file ----------------------------------------------------


def _one_line_error(exc: pytest.ExceptionInfo[Exception], path: Path | str) -> None:
    message = str(exc.value)
    assert "\n" not in message
    assert str(path) in message


def test_missing_file(tmp_path: Path) -> None:
    path = tmp_path / "gone.sav"
    with pytest.raises(ReadError, match="does not exist") as exc:
        read_raw(path)
    _one_line_error(exc, path)


def test_directory(tmp_path: Path) -> None:
    with pytest.raises(ReadError, match="is a folder, not a data file") as exc:
        read_raw(tmp_path)
    _one_line_error(exc, tmp_path)


@pytest.mark.skipif(IS_ROOT, reason="root can read files without read permission")
def test_unreadable_file(files: dict[str, Path], tmp_path: Path) -> None:
    path = tmp_path / "locked.csv"
    path.write_bytes(files["csv"].read_bytes())
    path.chmod(0)
    with pytest.raises(ReadError, match="cannot be opened: Permission denied"):
        read_raw(path)


def test_unreadable_file_simulated(files: dict[str, Path], monkeypatch: pytest.MonkeyPatch) -> None:
    # Stands in for a file without read permission when the tests run as root.
    def deny(*_args: object, **_kwargs: object) -> int:
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(os, "open", deny)
    with pytest.raises(ReadError, match="cannot be opened: Permission denied") as exc:
        read_raw(files["csv"])
    _one_line_error(exc, files["csv"])


def test_unknown_extension_lists_supported(tmp_path: Path) -> None:
    path = tmp_path / "data.xlsx"
    path.write_bytes(b"PK")
    with pytest.raises(ReadError, match=r"unknown file type; wstats reads .*\.csv\.gz.*\.zsav"):
        read_raw(path)


@pytest.mark.parametrize("ext", sorted(FORMATS))
def test_empty_file(tmp_path: Path, ext: str) -> None:
    path = tmp_path / f"empty{ext}"
    path.touch()
    with pytest.raises(ReadError, match=r"is empty \(0 bytes\)") as exc:
        read_raw(path)
    _one_line_error(exc, path)


@pytest.mark.parametrize(
    ("kind", "keep"),
    [
        ("xpt", lambda n: n - 17),
        ("sav", lambda n: n - 40),
        ("zsav", lambda n: n - 40),
        ("dta", lambda n: n // 3),
        ("parquet", lambda n: n // 2),
    ],
)
def test_truncated_file(files: dict[str, Path], tmp_path: Path, kind: str, keep: object) -> None:
    data = files[kind].read_bytes()
    path = tmp_path / f"cut.{kind}"
    path.write_bytes(data[: keep(len(data))])  # type: ignore[operator]
    with pytest.raises(ReadError, match="truncated|corrupt") as exc:
        read_raw(path)
    _one_line_error(exc, path)


_LINES = "".join(f"{i},{i * 7919 % 1000}\n" for i in range(3000))
_GZ = gzip.compress(f"a,b\n{_LINES}".encode())  # varied rows, so half the stream is cut


@pytest.mark.parametrize(
    ("name", "content", "pattern"),
    [
        ("bad.csv", b"a,b\n1,2\n3,4,5\n", r"cannot be parsed: .*Expected 2 fields in line 3"),
        ("bad.csv.gz", b"not gzip at all", "not a valid gzip file"),
        ("cut.csv.gz", _GZ[: len(_GZ) // 2], "not a valid gzip file"),
    ],
)
def test_bad_text_file(tmp_path: Path, name: str, content: bytes, pattern: str) -> None:
    path = tmp_path / name
    path.write_bytes(content)
    with pytest.raises(ReadError, match=pattern) as exc:
        read_raw(path)
    _one_line_error(exc, path)


def test_no_rows(tmp_path: Path) -> None:
    csv = tmp_path / "head.csv"
    csv.write_text("a,b\n")
    sav = tmp_path / "none.sav"
    pyreadstat.write_sav(pd.DataFrame({"a": np.array([], dtype=float)}), sav)
    for path in (csv, sav):
        with pytest.raises(ReadError, match="has no rows; nothing to analyse") as exc:
            read_raw(path)
        _one_line_error(exc, path)


def test_rows_past_the_end(files: dict[str, Path]) -> None:
    with pytest.raises(ReadError, match=r"has no rows in the row subset \(50, 60\)"):
        read_raw(files["sav"], rows=(50, 60))


def test_bad_row_subset(files: dict[str, Path]) -> None:
    with pytest.raises(ReadError, match=r"row subset \(5, 2\) .* is not valid"):
        read_raw(files["csv"], rows=(5, 2))


def test_duplicate_column_in_file(tmp_path: Path) -> None:
    csv = tmp_path / "dup.csv"
    csv.write_text("a,b,a\n1,2,3\n")
    pqt = tmp_path / "dup.parquet"
    pq.write_table(pa.Table.from_arrays([pa.array([1]), pa.array([2])], names=["b", "b"]), pqt)
    for path, name in ((csv, "a"), (pqt, "b")):
        with pytest.raises(ReadError, match=f"column '{name}' occurs more than once") as exc:
            read_raw(path)
        _one_line_error(exc, path)


def test_empty_column_name_in_csv(tmp_path: Path) -> None:
    path = tmp_path / "noname.csv"
    path.write_text("a,,c\n1,2,3\n")
    with pytest.raises(ReadError, match="column 2 of .* has an empty name"):
        read_raw(path)


@pytest.mark.parametrize("kind", ["sav", "csv", "parquet", "dta"])
def test_unknown_column_suggests(files: dict[str, Path], kind: str) -> None:
    with pytest.raises(ColumnError, match=r"column 'X' is not in .*; did you mean 'x'\?") as exc:
        read_raw(files[kind], columns=["X"])
    _one_line_error(exc, files[kind])


def test_non_utf8_csv_suggests_encoding(tmp_path: Path) -> None:
    path = tmp_path / "latin.csv"
    path.write_bytes("name,n\ncafé,1\n".encode("latin-1"))
    with pytest.raises(ReadError, match="not valid utf-8 .* encoding='latin-1'") as exc:
        read_raw(path)
    _one_line_error(exc, path)
    assert list(read_raw(path, encoding="latin-1").columns["name"].data) == ["café"]


@pytest.mark.parametrize("kind", ["dta", "sav"])
def test_non_utf8_labels(tmp_path: Path, kind: str) -> None:
    # Write a label, then swap its bytes for latin-1 ones ("é" = 0xE9 in ISO 8859-1).
    path = tmp_path / f"lab.{kind}"
    frame = pd.DataFrame({"x": [1.0, 2.0]})
    writer = pyreadstat.write_dta if kind == "dta" else pyreadstat.write_sav
    writer(frame, path, column_labels={"x": "Lab X"})
    data = path.read_bytes()
    path.write_bytes(data.replace(b"Lab X", b"L\xe9b X", 1))
    with pytest.raises(ReadError, match="not valid utf-8 .*encoding option") as exc:
        read_raw(path)
    _one_line_error(exc, path)
    assert read_raw(path, encoding="latin-1").columns["x"].label == "Léb X"


def test_unknown_encoding(files: dict[str, Path]) -> None:
    with pytest.raises(ReadError, match="unknown encoding 'klingon'"):
        read_raw(files["csv"], encoding="klingon")


def test_parquet_unusable_type(tmp_path: Path) -> None:
    path = tmp_path / "when.parquet"
    pq.write_table(pa.table({"when": pa.array([1, 2], pa.timestamp("s"))}), path)
    with pytest.raises(ColumnError, match="column 'when' of .* has type timestamp"):
        read_raw(path)


@settings(max_examples=15, deadline=None)
@given(junk=st.binary(min_size=1, max_size=400))
def test_garbage_never_escapes_as_another_exception(junk: bytes) -> None:
    # Whatever the bytes, a bad file is a ReadError (or a valid read), never another type.
    import tempfile

    with tempfile.TemporaryDirectory() as folder:
        for ext in (".sav", ".dta", ".parquet", ".csv", ".por"):
            path = Path(folder) / f"junk{ext}"
            path.write_bytes(junk)
            try:
                read_raw(path)
            except ReadError:
                pass


def test_sas_tag_letters_are_split_vectorised() -> None:
    # Transport/.sas7bdat special missing values .A-.Z and ._ arrive from pyreadstat
    # (user_missing=True) as letters inside the numeric column; no .sas7bdat writer exists to
    # make a file in the test.
    mixed = pd.Series([1.5, "A", "_", None, "Z", NAN], dtype=object)
    data, tags = stat_reader._split_tags(mixed)
    np.testing.assert_array_equal(data, [1.5, NAN, NAN, NAN, NAN, NAN])
    np.testing.assert_array_equal(tags, [0, ord("A"), ord("_"), 0, ord("Z"), 0])
    only_letters = pd.Series(["B", None], dtype="str")  # a chunk holding tags only
    data, maybe = stat_reader._column_arrays(only_letters, numeric=True)
    assert maybe is not None
    np.testing.assert_array_equal(maybe, [ord("B"), 0])
    assert data.dtype == np.float64 and np.isnan(data).all()


def test_published_csv_matches_pandas() -> None:
    # Lohr (2010) agsrs data (/work/shared/data/README.md); oracle: pandas.read_csv.
    path = Path("/work/shared/data/agsrs.csv")
    if not path.exists():
        pytest.skip("shared reference data not available")
    expected = pd.read_csv(path)
    table = read_raw(path, columns=["acres92", "region"])
    assert table.n_rows == len(expected) == 300
    np.testing.assert_array_equal(table.columns["acres92"].data, expected["acres92"].to_numpy())
    assert list(table.columns["region"].data) == list(expected["region"])
    assert table.file_columns == list(expected.columns)


# ---------------------------------------------------------------- damaged files, line widths

_CELL = st.text(alphabet=st.sampled_from(list('ab1,"\n\r ')), max_size=5)


def _field_counts(text: str) -> list[int]:
    """Return the field count of each record, by Python's csv module (the oracle)."""
    import csv
    import io

    return [len(row) for row in csv.reader(io.StringIO(text, newline="")) if row]


def _restyle(text: str, style: str) -> str:
    """Replace the CR LF line ends outside quoted values of *text* by *style*."""
    parts = text.split('"')  # even parts lie outside quotes
    return '"'.join(p.replace("\r\n", style) if i % 2 == 0 else p for i, p in enumerate(parts))


@settings(max_examples=60, deadline=None)
@given(rows=st.lists(st.lists(_CELL, min_size=1, max_size=4), min_size=1, max_size=6),
       chunk=st.integers(1, 9), eol=st.booleans(), style=st.sampled_from(["\r\n", "\n", "\r"]))
def test_field_counter_agrees_with_csv_module(rows: list[list[str]], chunk: int, eol: bool,
                                              style: str) -> None:
    # Oracle: the csv module's reader on text written by its writer (common practice, no
    # source); the counter sees the bytes in chunks of *chunk*, so records span chunks.
    import csv
    import io

    out = io.StringIO(newline="")
    # With CR LF as line end the writer quotes every value holding a CR or an LF; the line
    # ends themselves are then CR LF, LF or CR (pandas and the csv module take all three).
    csv.writer(out, lineterminator="\r\n").writerows([["h1", "h2", "h3"], *rows])
    text = out.getvalue()
    text = text if eol else text[:-2]
    if style != "\r\n":
        text = _restyle(text, style)
    counts = _field_counts(text)
    counter = text_reader._FieldCounter(ord(","), 3, None)
    data = text.encode()
    for at in range(0, len(data), chunk):
        counter.feed(data[at : at + chunk])
    complete = counts if eol else counts[:-1]
    if any(n > 3 for n in complete[1:]):
        assert counter.bad is not None and counter.bad[1] == next(n for n in complete if n > 3)
        return
    assert counter.bad is None
    last = rows[-1]  # the writer writes [""] as '""', so every row leaves bytes on its line
    expect_bad = not eol and (len(last) != 3 or last[-1] == "")
    assert (counter.finish() is not None) == expect_bad, (text, counter.finish())


@pytest.mark.parametrize(
    ("content", "columns", "pattern"),
    [
        # A cut download: the last line stops short and has no line break.
        (b"a,b,c\n1,2,3\n4,5", None, r"line 3 has 2 fields, the header has 3; .*truncated"),
        (b"a,b,c\n1,2,3\n4,5,", ["a"], r"ends inside line 3: its last field is empty"),
        # Extra fields in a middle row, also when only some columns are read.
        (b"a,b\n1,2\n3,4,5\n6,7\n", ["b"], r"line 3 has 3 fields, the header has 2; quote"),
        (b'a,b\n"x\ny",2\n3,"4,5",6\n', ["a"], r"line 4 has 3 fields"),  # line counts the \n
        (b"a\tb\n1\t2\n1\t2\t3\n", ["a"], r"line 3 has 3 fields.*contain a tab"),
    ],
)
def test_bad_line_widths(tmp_path: Path, content: bytes, columns: list[str] | None,
                         pattern: str) -> None:
    path = tmp_path / ("t.tsv" if b"\t" in content else "t.csv")
    path.write_bytes(content)
    with pytest.raises(ReadError, match=pattern) as exc:
        read_raw(path, columns=columns)
    _one_line_error(exc, path)


@pytest.mark.parametrize(
    "content",
    [
        b"a,b\n1,2",  # the last line lacks a line break but has every field
        b"a,b\r\n1,2\r\n\r\n3,4\r\n",  # CRLF and a blank line
        b'a,b\n"1,5","x\n""y"""\n',  # quoted separators, line breaks and quotes
        b"a,b\n5'11\",2\n",  # a quote inside an unquoted value: left to pandas
        b"a,b\r1,2\r3,4",  # lines ended by CR alone
        b"a,b,c\n1,2\n3,4,5\n",  # a short row in the middle is read with a blank
    ],
)
def test_good_line_widths(tmp_path: Path, content: bytes) -> None:
    path = tmp_path / "t.csv"
    path.write_bytes(content)
    assert read_raw(path, columns=["a"]).n_rows == read_raw(path).n_rows >= 1


def test_row_subset_ignores_bad_lines_after_it(tmp_path: Path) -> None:
    path = tmp_path / "t.csv"
    path.write_bytes(b"a,b\n1,2\n3,4\n5,6,7\n8")
    assert read_raw(path, columns=["a"], rows=(0, 2)).n_rows == 2


def test_cut_transport_file_read_by_pyreadstat(tmp_path: Path) -> None:
    # pyreadstat writes version 8 files, which the fast reader leaves to pyreadstat; 80 bytes
    # less leaves part of an observation (8 numbers of 8 bytes = 64-byte rows) at the end.
    path = tmp_path / "v8.xpt"
    pyreadstat.write_xport(pd.DataFrame({f"v{i}": np.arange(9.0) + i for i in range(8)}), path)
    assert read_raw(path).reader == "pyreadstat"
    path.write_bytes(path.read_bytes()[:-80])
    with pytest.raises(ReadError, match="is truncated: the last observation is incomplete"):
        read_raw(path)


def test_cut_dta_file(files: dict[str, Path], tmp_path: Path) -> None:
    path = tmp_path / "cut.dta"
    path.write_bytes(files["dta"].read_bytes()[:-20])
    with pytest.raises(ReadError, match="truncated: it does not end with </stata_dta>") as exc:
        read_raw(path)
    _one_line_error(exc, path)


def test_sav_with_a_nameless_column(files: dict[str, Path], tmp_path: Path) -> None:
    data = bytearray(files["sav"].read_bytes())
    # A .sav file has a 176-byte header; the first variable record follows, its 8-byte name
    # at offset 24 of the record (from memory; pyreadstat writes the short name "X").
    assert data[200:208] == b"X       "
    data[200] = 0
    path = tmp_path / "noname.sav"
    path.write_bytes(bytes(data))
    with pytest.raises(ReadError, match=r"has a column with no name \(position 1\)") as exc:
        file_columns(path)
    _one_line_error(exc, path)


def test_sav_row_count_beyond_file_size(files: dict[str, Path], tmp_path: Path) -> None:
    # .sav header: the case count is the int32 at byte 80 (little-endian file from pyreadstat).
    data = bytearray(files["sav"].read_bytes())
    data[80:84] = (10**8).to_bytes(4, "little")
    path = tmp_path / "many.sav"
    path.write_bytes(bytes(data))
    with pytest.raises(ReadError, match="header says 100000000 rows, more than its"):
        read_raw(path)


def test_parquet_error_is_one_line(files: dict[str, Path], tmp_path: Path) -> None:
    path = tmp_path / "shifted.parquet"
    path.write_bytes(b"\x00" + files["parquet"].read_bytes())
    with pytest.raises(ReadError, match="cannot be read as a Parquet file") as exc:
        read_raw(path)
    _one_line_error(exc, path)
