"""The fast transport (XPORT v5) reader, wstats.readers.xpt.

Oracles: pyreadstat.read_xport on the same files, and the record layout of
"The Record Layout of a Data Set in Transport (XPORT) Format", technical support document
TS-140 (from memory), which `build_xpt` below writes byte by byte.
"""

from __future__ import annotations

import struct
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pyreadstat
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from test_ibm_float import LARGEST, SMALLEST, ibm_value, ieee_to_ibm
from wstats.errors import ColumnError, ReadError, UsageError
from wstats.readers import xpt as _xpt
from wstats.readers.xpt import XptUnsupported, read_xpt, xpt_file_columns

DATE = b"13APR89:10:20:06"


@dataclass(frozen=True)
class Var:
    """A variable of a hand-built file: name, numeric or not, width, label, display format."""

    name: str
    numeric: bool = True
    width: int = 8
    label: str = ""
    form: tuple[str, int, int] = ("", 0, 0)


def header(kind: str, numbers: str = "0" * 30) -> bytes:
    """One 80-byte header record (TS-140: 20 + 8 + 20 fixed characters, 30 digits, 2 blanks)."""
    return b"HEADER RECORD*******" + kind.ljust(8).encode() + b"HEADER RECORD!!!!!!!" + (
        numbers.encode() + b"  "
    )


def namestr(var: Var, number: int, position: int) -> bytes:
    """One 140-byte NAMESTR (TS-140 struct: ntype nhfun nlng nvar0 nname nlabel nform ...)."""
    name, width, decimals = var.form
    return struct.pack(
        ">hhhh8s40s8shhh2s8shhi52s",
        1 if var.numeric else 2, 0, var.width, number,
        var.name.ljust(8).encode(), var.label.ljust(40).encode(), name.ljust(8).encode(),
        width, decimals, 0, b"", b"".ljust(8), 0, 0, position, b"",
    )


def pad80(data: bytes) -> bytes:
    """Blank-pad to a multiple of 80 bytes."""
    return data + b" " * (-len(data) % 80)


def member(variables: list[Var], records: list[bytes], label: str = "") -> bytes:
    """The member part of a v5 file: member headers, NAMESTRs, OBS header, observations."""
    positions = np.cumsum([0] + [v.width for v in variables]).tolist()
    names = b"".join(namestr(v, i + 1, positions[i]) for i, v in enumerate(variables))
    return b"".join([
        header("MEMBER", "000000000000000001600000000140"),
        header("DSCRPTR"),
        b"SAS     DATA    SASDATA 6.06    bsd4.2  " + b" " * 24 + DATE,
        DATE + b" " * 16 + label.ljust(40).encode() + b" " * 8,
        header("NAMESTR", f"000000{len(variables):04d}" + "0" * 20),
        pad80(names),
        header("OBS"),
        pad80(b"".join(records)),
    ])


def build_xpt(variables: list[Var], records: list[bytes], label: str = "") -> bytes:
    """A whole single-member v5 file."""
    library = header("LIBRARY") + b"SAS     SAS     SASLIB  6.06    bsd4.2  " + b" " * 24
    return library + DATE + DATE.ljust(80) + member(variables, records, label)


def num(x: float, width: int = 8) -> bytes:
    """A number as the leading *width* bytes of its IBM double."""
    return ieee_to_ibm(x).to_bytes(8, "big")[:width]


def missing(tag: str = ".", width: int = 8) -> bytes:
    """A missing value: the tag character followed by zero bytes."""
    return tag.encode() + bytes(width - 1)


def write(tmp_path: Path, data: bytes, name: str = "t.xpt") -> Path:
    """Write *data* to a file in *tmp_path*."""
    path = tmp_path / name
    path.write_bytes(data)
    return path


def read_oracle(path: Path, **kwargs: object) -> pd.DataFrame:
    """Read with pyreadstat (the independent reader) without date conversion."""
    frame, _ = pyreadstat.read_xport(str(path), disable_datetime_conversion=True, **kwargs)
    return frame


# --- files written by pyreadstat ------------------------------------------------------------


@pytest.fixture(scope="module")
def written(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, pd.DataFrame]:
    rng = np.random.default_rng(20240607)
    n = 500
    magnitude = 10.0 ** rng.uniform(-70, 70, n)
    frame = pd.DataFrame({
        "WIDE": magnitude * rng.choice([-1.0, 1.0], n),
        "INTS": rng.integers(-10**9, 10**9, n).astype(float),
        "FRAC": rng.integers(0, 1000, n) / rng.integers(1, 97, n),
        "TEXT": rng.choice(["yes", "no", "", "  lead", "naïve", "x" * 20], n),
        "GAPS": np.where(rng.random(n) < 0.3, np.nan, rng.normal(size=n)),
    })
    path = tmp_path_factory.mktemp("xpt") / "pyreadstat.xpt"
    pyreadstat.write_xport(
        frame, str(path), file_label="Test file", table_name="TESTS", file_format_version=5,
        column_labels=["Spread", "Whole numbers", None, "Answer", "Some missing"],
        variable_format={"WIDE": "BEST12.", "FRAC": "F8.3"},
    )
    return path, frame


def test_values_match_pyreadstat(written: tuple[Path, pd.DataFrame]) -> None:
    path, frame = written
    table = read_xpt(path)
    oracle = read_oracle(path)
    assert table.n_rows == 500 and table.reader == "wstats-xpt" and table.format == "xpt"
    assert list(table.columns) == list(oracle.columns) == table.file_columns
    for name in ("WIDE", "INTS", "FRAC", "GAPS"):
        np.testing.assert_array_equal(table.columns[name].data, oracle[name].to_numpy())
        assert table.columns[name].numeric and table.columns[name].tags is None
    assert table.columns["TEXT"].data.tolist() == oracle["TEXT"].tolist()
    assert not table.columns["TEXT"].numeric


def test_values_match_what_was_written(written: tuple[Path, pd.DataFrame]) -> None:
    path, frame = written
    table = read_xpt(path)
    # Every double within IBM's range fits the 56-bit IBM fraction, so writing and reading
    # give back the very same numbers (see test_ibm_float.ieee_to_ibm).
    for name in ("WIDE", "INTS", "FRAC", "GAPS"):
        np.testing.assert_array_equal(table.columns[name].data, frame[name].to_numpy())
    assert table.columns["TEXT"].data.tolist() == [s.rstrip() for s in frame["TEXT"]]


def test_labels_and_formats_match_pyreadstat(written: tuple[Path, pd.DataFrame]) -> None:
    path, _ = written
    _, meta = pyreadstat.read_xport(str(path), metadataonly=True)
    table = read_xpt(path)
    assert table.file_label == meta.file_label == "Test file"
    assert [c.label for c in table.columns.values()] == meta.column_labels
    assert [c.format for c in table.columns.values()] == [
        meta.original_variable_types[name] for name in meta.column_names
    ]
    assert xpt_file_columns(path) == meta.column_names


def test_column_subset_in_requested_order(written: tuple[Path, pd.DataFrame]) -> None:
    path, _ = written
    table = read_xpt(path, columns=["GAPS", "TEXT"])
    oracle = read_oracle(path, usecols=["GAPS", "TEXT"])
    assert list(table.columns) == ["GAPS", "TEXT"]
    assert table.file_columns == ["WIDE", "INTS", "FRAC", "TEXT", "GAPS"]
    np.testing.assert_array_equal(table.columns["GAPS"].data, oracle["GAPS"].to_numpy())
    assert table.columns["TEXT"].data.tolist() == oracle["TEXT"].tolist()


@pytest.mark.parametrize("rows", [(0, 10), (123, 377), (490, None), (499, 600), (500, None)])
def test_row_subsets_match_pyreadstat(
    written: tuple[Path, pd.DataFrame], rows: tuple[int, int | None]
) -> None:
    path, _ = written
    start, stop = rows
    end = 500 if stop is None else min(stop, 500)
    table = read_xpt(path, columns=["WIDE", "TEXT"], rows=rows)
    oracle = read_oracle(path, row_offset=start, row_limit=max(end - start, 0) or 1)
    assert table.n_rows == end - start
    np.testing.assert_array_equal(table.columns["WIDE"].data, oracle["WIDE"][: end - start])
    assert table.columns["TEXT"].data.tolist() == oracle["TEXT"][: end - start].tolist()


@pytest.mark.parametrize("threads", [1, 2])
def test_many_small_chunks_give_the_same_result(
    written: tuple[Path, pd.DataFrame], threads: int, monkeypatch: pytest.MonkeyPatch
) -> None:
    path, _ = written
    whole = read_xpt(path)
    monkeypatch.setattr(_xpt, "_CHUNK_BYTES", 1000)  # 20 observations of 50 bytes per chunk
    chunked = read_xpt(path, rows=(7, None), threads=threads, progress=True)
    assert chunked.n_rows == 493
    for name, column in chunked.columns.items():
        np.testing.assert_array_equal(column.data, whole.columns[name].data[7:])


def test_progress_bar_on_a_terminal(
    written: tuple[Path, pd.DataFrame], monkeypatch: pytest.MonkeyPatch
) -> None:
    path, _ = written
    monkeypatch.setattr("sys.stderr.isatty", lambda: True)
    shown = read_xpt(path, columns=["INTS"], progress=True)
    np.testing.assert_array_equal(shown.columns["INTS"].data, read_xpt(path).columns["INTS"].data)


# --- hand-built files -----------------------------------------------------------------------


def test_special_missing_values_are_tagged(tmp_path: Path) -> None:
    tags = [".", "_", *map(chr, range(ord("A"), ord("Z") + 1))]
    records = [missing(t) + num(i) for i, t in enumerate(tags)] + [num(-1.5) + missing("Q")]
    path = write(tmp_path, build_xpt([Var("ITEM"), Var("OTHER")], records))
    table = read_xpt(path)
    item, other = table.columns["ITEM"], table.columns["OTHER"]
    assert np.isnan(item.data[:-1]).all() and item.data[-1] == -1.5
    assert item.tags is not None
    assert item.tags.tolist() == [0, *map(ord, tags[1:]), 0]
    assert other.data[:-1].tolist() == list(range(len(tags)))
    assert other.tags is not None and other.tags.tolist() == [0] * len(tags) + [ord("Q")]
    # pyreadstat reads every one of them as NaN too.
    assert read_oracle(path)["ITEM"].isna().sum() == len(tags)


def test_plain_missing_leaves_tags_empty(tmp_path: Path) -> None:
    path = write(tmp_path, build_xpt([Var("X")], [missing("."), num(2.0)]))
    column = read_xpt(path).columns["X"]
    assert column.tags is None and np.isnan(column.data[0]) and column.data[1] == 2.0


def test_unnormalised_numbers(tmp_path: Path) -> None:
    # Leading hex digits of zero are legal (TS-140 definition); expected value from it.
    words = [0x4100_1000_0000_0000, 0xC200_0000_0000_00FF, 0x4000_0123_4567_89AB]
    path = write(tmp_path, build_xpt([Var("U")], [w.to_bytes(8, "big") for w in words]))
    got = read_xpt(path).columns["U"].data
    assert got.tolist() == [2.0**-8, -(255 * 2.0**-56) * 16**2, ibm_value(words[2])]
    # Not compared with pyreadstat: its conversion assumes a normalised fraction (it returns
    # 1.00390625 for the first word, when measured with pyreadstat 1.3.8).


@pytest.mark.parametrize("width", [2, 3, 4, 5, 6, 7])
def test_short_numerics(tmp_path: Path, width: int) -> None:
    values = [1.0, -118.625, 100.0, 0.1, 1e10, -3e-5]
    records = [num(v, width) + b"ab" for v in values] + [missing(".", width) + b"cd"]
    records.append(missing("Z", width) + b"ef")
    path = write(tmp_path, build_xpt([Var("S", width=width), Var("C", False, 2)], records))
    table = read_xpt(path)
    expected = [ibm_value(ieee_to_ibm(v) >> (64 - 8 * width) << (64 - 8 * width)) for v in values]
    assert table.columns["S"].data[:-2].tolist() == expected
    assert np.isnan(table.columns["S"].data[-2:]).all()
    assert table.columns["S"].tags.tolist() == [0] * 7 + [ord("Z")]  # type: ignore[union-attr]
    assert table.columns["C"].data.tolist() == ["ab"] * 6 + ["cd", "ef"]
    if width > 2:  # pyreadstat 1.3.8 reads 2-byte numerics (legal in TS-140) as all missing
        np.testing.assert_array_equal(table.columns["S"].data, read_oracle(path)["S"])


def test_negative_zero_reads_as_negative_zero(tmp_path: Path) -> None:
    # By the definition, sign bit 1 with a zero fraction is -0.0, which equals 0.0. (pyreadstat
    # 1.3.8 returns NaN for this word, as measured; we keep the number, see _ibm's docstring.)
    path = write(tmp_path, build_xpt([Var("Z")], [bytes([0x80]) + bytes(7), bytes(8)]))
    got = read_xpt(path).columns["Z"].data
    assert got.tolist() == [0.0, 0.0]
    assert np.signbit(got).tolist() == [True, False]


def test_character_columns(tmp_path: Path) -> None:
    cells = ["plain", "  lead", "trail   ", "", "ünï", "ca\u0301"]
    records = [c.encode().ljust(12) for c in cells] + [b"caf\xe9".ljust(12)]  # latin-1 byte
    path = write(tmp_path, build_xpt([Var("T", False, 12, "Free text")], records))
    column = read_xpt(path).columns["T"]
    assert column.data.tolist() == ["plain", "  lead", "trail", "", "ünï", "ca\u0301", "café"]
    assert column.label == "Free text" and not column.numeric and column.tags is None


def test_labels_formats_and_file_label(tmp_path: Path) -> None:
    variables = [Var("A", label="Age in years", form=("F", 8, 2)), Var("D", form=("DATE", 9, 0))]
    path = write(tmp_path, build_xpt(variables, [num(1) + num(2)], label="Hand made"))
    table = read_xpt(path)
    _, meta = pyreadstat.read_xport(str(path), metadataonly=True)
    assert [c.format for c in table.columns.values()] == ["F8.2", "DATE9."]
    assert list(meta.original_variable_types.values()) == ["F8.2", "DATE9."]
    assert table.columns["A"].label == "Age in years" and table.columns["D"].label is None
    assert table.file_label == "Hand made" == meta.file_label


def test_trailing_blank_records_are_padding(tmp_path: Path) -> None:
    # 10-byte observations: 3 records of data, then 50 blank bytes = 5 blank "observations"
    # that are padding. A blank observation *followed* by data is data.
    records = [b"abc".ljust(10), b" " * 10, b"def".ljust(10)]
    path = write(tmp_path, build_xpt([Var("T", False, 10)], records))
    table = read_xpt(path)
    assert table.columns["T"].data.tolist() == ["abc", "", "def"]
    assert read_oracle(path)["T"].tolist() == ["abc", "", "def"]


def test_trailing_blank_observation_is_indistinguishable_from_padding(tmp_path: Path) -> None:
    # The documented ambiguity of the format: a blank last observation inside the final
    # 80 bytes reads as padding.
    path = write(tmp_path, build_xpt([Var("T", False, 10)], [b"abc".ljust(10), b" " * 10]))
    assert read_xpt(path).columns["T"].data.tolist() == ["abc"]


@pytest.mark.parametrize("width", [80, 81, 16])
def test_blank_observations_of_80_bytes_or_more_are_data(tmp_path: Path, width: int) -> None:
    records = [b"x".ljust(width), b" " * width, b" " * width]
    path = write(tmp_path, build_xpt([Var("T", False, width)], records))
    expected = 3 if width >= 80 else 1  # 16 bytes: the two blank ones lie in the padding zone
    assert read_xpt(path).n_rows == expected == len(read_oracle(path))


def test_numbers_never_look_like_padding(tmp_path: Path) -> None:
    records = [num(float(i)) for i in range(13)]  # 104 bytes, then 56 bytes of padding
    path = write(tmp_path, build_xpt([Var("N")], records))
    assert read_xpt(path).columns["N"].data.tolist() == list(map(float, range(13)))


def test_unpadded_file_is_read(tmp_path: Path) -> None:
    data = build_xpt([Var("N")], [num(1.0), num(2.0)])
    path = write(tmp_path, data[: -80 + 16])  # some writers do not pad the last record
    assert read_xpt(path).columns["N"].data.tolist() == [1.0, 2.0]


@settings(max_examples=30, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    st.lists(
        st.tuples(
            st.floats(min_value=SMALLEST, max_value=LARGEST, exclude_max=True),
            st.text(st.characters(codec="utf-8", exclude_characters="\x00"), max_size=3),
        ),
        max_size=60,
    )
)
def test_round_trip_of_hand_built_files(tmp_path: Path, rows: list[tuple[float, str]]) -> None:
    records = [num(x) + s.encode().ljust(12) for x, s in rows]
    path = write(tmp_path, build_xpt([Var("X"), Var("S", False, 12)], records + [num(0.5)]))
    table = read_xpt(path)
    assert table.columns["X"].data.tolist() == [x for x, _ in rows] + [0.5]
    assert table.columns["S"].data.tolist() == [s.rstrip(" ") for _, s in rows] + [""]


# --- errors ---------------------------------------------------------------------------------


def small_file() -> bytes:
    """Three variables, four observations."""
    variables = [Var("AGE"), Var("WEIGHT"), Var("NAME", False, 8)]
    return build_xpt(variables, [num(i) + num(i / 2) + b"n" for i in range(4)])


def test_truncated_in_the_namestrs(tmp_path: Path) -> None:
    path = write(tmp_path, small_file()[:700])
    with pytest.raises(ReadError, match=r"is truncated: header says 3 variables but the file "
                       r"ends at byte 700; re-download"):
        read_xpt(path)


def test_truncated_in_the_data(tmp_path: Path) -> None:
    data = small_file()
    path = write(tmp_path, data[: len(data) - 80 + 30])  # observations are 24 bytes
    with pytest.raises(ReadError, match=r"truncated: the data end inside observation 2"):
        read_xpt(path)


def test_truncated_at_a_record_boundary(tmp_path: Path) -> None:
    data = build_xpt([Var(f"V{i}") for i in range(20)], [num(1.0) * 20] * 2)  # 160-byte obs
    path = write(tmp_path, data[:-80])
    with pytest.raises(ReadError, match="inside observation 2"):
        read_xpt(path)


@pytest.mark.parametrize(
    ("content", "message"),
    [
        (b"", "is empty"),
        (b"SEQN,AGE\n1,2\n" * 10, "is not a transport"),
        (small_file()[:300], "truncated: it ends at byte 300, inside the header"),
    ],
)
def test_not_a_readable_file(tmp_path: Path, content: bytes, message: str) -> None:
    path = write(tmp_path, content)
    with pytest.raises(ReadError, match=message):
        read_xpt(path)
    with pytest.raises(ReadError, match=message):
        xpt_file_columns(path)


def test_missing_file_or_folder(tmp_path: Path) -> None:
    with pytest.raises(ReadError, match="cannot open .*nothing.xpt: No such file"):
        read_xpt(tmp_path / "nothing.xpt")
    with pytest.raises(ReadError, match="cannot read .*: Is a directory"):
        read_xpt(tmp_path)


def test_no_observations(tmp_path: Path) -> None:
    path = write(tmp_path, build_xpt([Var("A"), Var("T", False, 3)], []))
    table = read_xpt(path)
    assert table.n_rows == 0 == len(read_oracle(path))
    assert table.columns["A"].data.shape == (0,) and table.columns["T"].data.shape == (0,)


def test_version_8_is_left_to_pyreadstat(tmp_path: Path) -> None:
    path = tmp_path / "v8.xpt"
    pyreadstat.write_xport(pd.DataFrame({"A": [1.0]}), str(path), file_format_version=8)
    with pytest.raises(XptUnsupported, match="LIBV8"):
        read_xpt(path)


@pytest.mark.parametrize("rows", [None, (3, None)])
@pytest.mark.parametrize(
    "first",
    [
        ([Var("C", False, 10)], [b"abc".ljust(10)] * 9),  # short observations
        # 4 x 24 bytes: the header at byte 160 of the data is not an observation start.
        ([Var("A"), Var("B"), Var("C", False, 8)], [num(1.0) + num(2.0) + b"abc".ljust(8)] * 4),
        ([Var(f"N{i}") for i in range(20)], [num(1.0) * 20] * 5),  # 160 bytes
        ([Var(f"C{i}", False, 200) for i in range(5)], [b"x" * 1000] * 3),  # 1000 bytes
    ],
)
def test_two_members_are_refused(
    tmp_path: Path, rows: tuple[int, int | None] | None, first: tuple[list[Var], list[bytes]]
) -> None:
    # A library of two members (TS-140: the next member header follows the padded data).
    # A ReadError, not XptUnsupported: pyreadstat 1.3.8 would read the second member's
    # header records as observations (measured: 'HEADER REC', 'ORD*******', ...).
    data = build_xpt(*first) + member([Var("B")], [num(5.0)] * 3)
    path = write(tmp_path, data)
    with pytest.raises(ReadError, match=r"holds more than one data set \(the second starts at "
                       r"byte \d+\); export each data set"):
        read_xpt(path, rows=rows)


def test_rows_before_a_second_member_are_the_first_members(tmp_path: Path) -> None:
    records = [f"r{i}".encode().ljust(10) for i in range(9)]
    path = write(tmp_path, build_xpt([Var("C", False, 10)], records) + member([Var("B")], []))
    # Only rows 2-3 are read (and scanned), and they belong to the first member.
    assert read_xpt(path, rows=(2, 4)).columns["C"].data.tolist() == ["r2", "r3"]


def test_unknown_column_suggests_a_name(tmp_path: Path) -> None:
    path = write(tmp_path, small_file())
    with pytest.raises(ColumnError, match=r"column 'WEIGTH' is not in .*; did you mean 'WEIGHT'"):
        read_xpt(path, columns=["AGE", "WEIGTH"])
    with pytest.raises(ColumnError, match="asked for twice"):
        read_xpt(path, columns=["AGE", "AGE"])


@pytest.mark.parametrize("rows", [(-1, 3), (3, 1)])
def test_bad_row_range(tmp_path: Path, rows: tuple[int, int]) -> None:
    path = write(tmp_path, small_file())
    with pytest.raises(UsageError, match="row range"):
        read_xpt(path, rows=rows)


def test_corrupt_namestr(tmp_path: Path) -> None:
    data = bytearray(small_file())
    data[640:642] = b"\x00\x07"  # type code 7
    with pytest.raises(ReadError, match=r"variable #1 \('AGE'\) has type 7"):
        read_xpt(write(tmp_path, bytes(data)))


@settings(max_examples=60, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.data())
def test_damaged_files_raise_only_read_errors(tmp_path: Path, data: st.DataObject) -> None:
    original = small_file()
    cut = data.draw(st.integers(min_value=0, max_value=len(original)))
    damaged = bytearray(original[:cut])
    for _ in range(data.draw(st.integers(min_value=0, max_value=4))):
        if damaged:
            at = data.draw(st.integers(min_value=0, max_value=len(damaged) - 1))
            damaged[at] = data.draw(st.integers(min_value=0, max_value=255))
    path = write(tmp_path, bytes(damaged))
    try:
        table = read_xpt(path)
    except (ReadError, XptUnsupported) as exc:
        assert "\n" not in str(exc)  # messages stay on one line
        return
    assert table.n_rows <= 4
