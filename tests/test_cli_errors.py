"""Every user mistake ends in one clear line and the right exit code, and writes nothing.

Each case runs ``python -m wstats`` in a child process (see ``run_cli`` in conftest.py) and
checks the contract of docs/errors.md: exit 1 for data, codebook and design problems, 2 for
usage, 3 for outputs; exactly one ``wstats: error:`` line on stderr naming the file, variable
or line (warning lines may precede it); no traceback unless ``--debug``; and no output file
left behind.
"""

from __future__ import annotations

import json
import os
import re
import subprocess
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from conftest import CODEBOOK_TOML, permissions_enforced

Run = Callable[..., subprocess.CompletedProcess[str]]
DESIGN = ["--weight", "WT", "--strata", "STRAT", "--psu", "PSU"]


def assert_error(proc: subprocess.CompletedProcess[str], code: int, *needles: str,
                 absent: tuple[Path, ...] = ()) -> str:
    """Check exit code, one error line matching every regex in *needles*, no traceback."""
    where = f"exit {proc.returncode}\nstdout:\n{proc.stdout}\nstderr:\n{proc.stderr}"
    assert "Traceback" not in proc.stderr + proc.stdout, where
    lines = [line for line in proc.stderr.splitlines() if line.strip()]
    errors = [line for line in lines if line.startswith("wstats: error: ")]
    stray = [line for line in lines if not line.startswith(("wstats: error: ",
                                                             "wstats: warning: "))]
    assert len(errors) == 1 and not stray, where
    assert proc.returncode == code, where
    for needle in needles:
        assert re.search(needle, errors[0], flags=re.IGNORECASE), f"{needle!r} not in {where}"
    for path in absent:
        assert not path.exists(), f"{path} was written although the command failed"
    return errors[0]


def _estimate(data: Path, out: Path, *extra: Any) -> list[Any]:
    return ["estimate", data, "SLEEP", *DESIGN, *extra, "-o", out]


# ---------------------------------------------------------------- data files

def _cut_half(data: bytes) -> bytes:
    return data[: len(data) // 2]


def _cut_tail(data: bytes) -> bytes:
    # One 80-byte record less: for .xpt a whole record, so only the half observation left
    # at the end (not blank padding) betrays the cut; for .dta the closing tags go missing.
    return data[:-80]


def _structural(fmt: str, path: Path, data: bytes) -> bytes:
    """Overwrite a structure-bearing part in the middle of the file (not plain data bytes)."""
    if fmt == "dta":
        i = data.index(b"<data>")  # the tag that opens the data section (.dta format 118)
        return data[:i] + b"<xxxx>" + data[i + 6:]
    if fmt == "sav":
        i = data.index((999).to_bytes(4, "little"))  # dictionary-termination record (type 999)
        return data[:i] + b"\xff" * 8 + data[i + 8:]
    if fmt == "xpt":
        i = data.index(b"HEADER RECORD*******OBS")  # the record that opens the observations
        return data[:i] + b"\xff" * 80 + data[i + 80:]
    if fmt == "parquet":
        import pyarrow.parquet as pq

        # The page header of the fourth column chunk, somewhere in the middle of the file.
        i = pq.ParquetFile(path).metadata.row_group(0).column(3).data_page_offset
        return data[:i] + b"\xff" * 16 + data[i + 16:]
    lines = data.split(b"\n")  # csv: a row in the middle with two fields too many
    lines[len(lines) // 2] += b",1,2"
    return b"\n".join(lines)


def _csv_cut_mid_row(data: bytes) -> bytes:
    return data.rstrip(b"\n")[:-3]  # the last row loses its last fields and its newline


@pytest.mark.parametrize("fmt", ["xpt", "sav", "dta", "parquet"])
@pytest.mark.parametrize("cut", [_cut_half, _cut_tail], ids=["half", "last-record"])
def test_truncated_binary_file(run_cli: Run, survey_copy: Callable[[str], Path],
                               tmp_path: Path, fmt: str, cut: Callable[[bytes], bytes]) -> None:
    data = survey_copy(fmt)
    data.write_bytes(cut(data.read_bytes()))
    out = tmp_path / "out.csv"
    assert_error(run_cli(*_estimate(data, out)), 1, re.escape(data.name),
                 r"truncat|corrupt|damaged|incomplete", absent=(out,))


def test_truncated_csv_mid_row(run_cli: Run, survey_copy: Callable[[str], Path],
                               tmp_path: Path) -> None:
    data = survey_copy("csv")
    data.write_bytes(_csv_cut_mid_row(data.read_bytes()))
    out = tmp_path / "out.csv"
    # The last line has fewer fields than the header and no line end: a cut download.
    assert_error(run_cli(*_estimate(data, out)), 1, re.escape(data.name),
                 r"truncat|fields|incomplete|line|row", absent=(out,))


@pytest.mark.parametrize("fmt", ["xpt", "sav", "dta", "parquet", "csv"])
def test_corrupted_in_the_middle(run_cli: Run, survey_copy: Callable[[str], Path],
                                 tmp_path: Path, fmt: str) -> None:
    data = survey_copy(fmt)
    data.write_bytes(_structural(fmt, data, data.read_bytes()))
    out = tmp_path / "out.csv"
    assert_error(run_cli(*_estimate(data, out)), 1, re.escape(data.name), absent=(out,))


def _commands(data: Path, tmp_path: Path, codebook: Path) -> dict[str, tuple[list[Any], Path]]:
    """Return command name -> (argv, output path it would write) for one data file."""
    return {
        "estimate": (_estimate(data, tmp_path / "est.csv"), tmp_path / "est.csv"),
        "nonresponse": (["nonresponse", data, "SLEEP", *DESIGN, "-o", tmp_path / "nr.json"],
                        tmp_path / "nr.json"),
        "convert": (["convert", data, tmp_path / "cache.parquet"], tmp_path / "cache.parquet"),
        "draft": (["codebook", "draft", data, "-o", tmp_path / "cb.toml"], tmp_path / "cb.toml"),
        "check": (["codebook", "check", data, codebook], tmp_path / "nothing"),
        "columns": (["columns", data], tmp_path / "nothing"),
    }


def _missing(tmp_path: Path) -> Path:
    return tmp_path / "no_such_survey.sav"


def _folder(tmp_path: Path) -> Path:
    folder = tmp_path / "survey_folder.sav"
    folder.mkdir()
    return folder


def _unknown_type(tmp_path: Path) -> Path:
    path = tmp_path / "survey.xls"
    path.write_bytes(b"STRAT,PSU\n1,1\n")
    return path


def _empty(tmp_path: Path) -> Path:
    path = tmp_path / "empty.sav"
    path.write_bytes(b"")
    return path


FILE_CASES: dict[str, tuple[Callable[[Path], Path], str]] = {
    "missing": (_missing, r"does not exist|not found|no such"),
    "folder": (_folder, r"folder|directory"),
    "unknown-type": (_unknown_type, r"unknown|not a known|type|extension"),
    "empty": (_empty, r"empty|0 bytes"),
}


ALL_COMMANDS = ["estimate", "nonresponse", "convert", "draft", "check", "columns"]


@pytest.mark.parametrize(
    ("case", "command"),
    [(case, command) for case in sorted(FILE_CASES) for command in ALL_COMMANDS
     if case in ("missing", "empty") or command in ("estimate", "columns")],
)
def test_unusable_data_file(run_cli: Run, tmp_path: Path, codebook_file: Path, case: str,
                            command: str) -> None:
    make, what = FILE_CASES[case]
    data = make(tmp_path)
    argv, out = _commands(data, tmp_path, codebook_file)[command]
    assert_error(run_cli(*argv), 1, re.escape(data.name), what, absent=(out,))


@pytest.mark.parametrize("fmt", ["csv", "xpt", "sav", "dta", "parquet"])
def test_empty_file_of_each_type(run_cli: Run, tmp_path: Path, fmt: str) -> None:
    data = tmp_path / f"empty.{fmt}"
    data.write_bytes(b"")
    out = tmp_path / "out.csv"
    assert_error(run_cli(*_estimate(data, out)), 1, re.escape(data.name), r"empty|0 bytes",
                 absent=(out,))


def test_unreadable_data_file(run_cli: Run, survey_copy: Callable[[str], Path],
                              tmp_path: Path) -> None:
    data = survey_copy("sav")
    data.chmod(0)
    try:
        if not permissions_enforced(data):
            pytest.skip("running as root (or on a file system without permissions): "
                        "chmod 000 does not stop reading")
        out = tmp_path / "out.csv"
        assert_error(run_cli(*_estimate(data, out)), 1, re.escape(data.name),
                     r"permission|cannot be opened|not readable", absent=(out,))
    finally:
        data.chmod(0o644)


@pytest.mark.parametrize("command", ["estimate", "nonresponse", "convert", "draft", "check"])
@pytest.mark.parametrize("fmt", ["csv", "xpt", "sav", "dta", "parquet"])
def test_zero_rows(run_cli: Run, make_survey: Callable[..., Path], tmp_path: Path,
                   codebook_file: Path, fmt: str, command: str) -> None:
    if command != "estimate" and fmt != "sav":
        pytest.skip("every command is tried on one format; every format on one command")
    data = make_survey(f"header_only.{fmt}", lambda frame: frame.iloc[:0])
    argv, out = _commands(data, tmp_path, codebook_file)[command]
    assert_error(run_cli(*argv), 1, re.escape(data.name), r"no rows|zero rows|0 rows",
                 absent=(out,))


@pytest.mark.parametrize("command", ["estimate", "columns"])
def test_column_named_twice(run_cli: Run, survey_copy: Callable[[str], Path], tmp_path: Path,
                            codebook_file: Path, command: str) -> None:
    data = survey_copy("csv")
    text = data.read_text(encoding="utf-8").split("\n", 1)
    data.write_text(text[0].replace("AGE", "SLEEP") + "\n" + text[1], encoding="utf-8")
    argv, out = _commands(data, tmp_path, codebook_file)[command]
    assert_error(run_cli(*argv), 1, re.escape(data.name), "SLEEP",
                 r"twice|more than once|duplicate", absent=(out,))


@pytest.mark.parametrize("command", ["estimate", "draft"])
def test_csv_not_utf8(run_cli: Run, survey_copy: Callable[[str], Path], tmp_path: Path,
                      codebook_file: Path, command: str) -> None:
    data = survey_copy("csv")
    data.write_bytes(data.read_bytes().replace(b"north", b"nord\xe9", 1))  # latin-1 e-acute
    argv, out = _commands(data, tmp_path, codebook_file)[command]
    assert_error(run_cli(*argv), 1, re.escape(data.name), r"utf-?8", r"encoding",
                 absent=(out,))


def test_transport_label_not_utf8_reads_as_latin1(run_cli: Run, survey_copy: Callable[[str], Path],
                                                  tmp_path: Path) -> None:
    # A v5 transport file declares no encoding; the fast reader falls back to latin-1 per
    # value (common practice for files from older systems, no source), so the label survives.
    data = survey_copy("xpt")
    raw = data.read_bytes()
    data.write_bytes(raw.replace(b"Hours of sleep", b"Hours of sl\xe9ep"))  # same length
    out = tmp_path / "cb.toml"
    proc = run_cli("codebook", "draft", data, "-o", out)
    assert proc.returncode == 0, proc.stderr
    assert "Hours of sl\u00e9ep" in out.read_text(encoding="utf-8")


@pytest.mark.parametrize("fmt", ["sav", "dta"])
def test_label_not_utf8(run_cli: Run, survey_copy: Callable[[str], Path], tmp_path: Path,
                        fmt: str) -> None:
    data = survey_copy(fmt)
    raw = data.read_bytes()
    assert raw.count(b"Hours of sleep") == 1
    data.write_bytes(raw.replace(b"Hours of sleep", b"Hours of sl\xe9ep"))  # same length
    out = tmp_path / "cb.toml"
    # draft reads every label; an undecodable one must name the file and the way out.
    assert_error(run_cli("codebook", "draft", data, "-o", out), 1, re.escape(data.name),
                 r"encoding", absent=(out,))


# ---------------------------------------------------------------- columns

@pytest.mark.parametrize(
    ("option", "wrong", "right"),
    [("variable", "SLEPE", "SLEEP"), ("--weight", "WTT", "WT"), ("--strata", "STRATA", "STRAT"),
     ("--psu", "PSUS", "PSU"), ("--fpc", "FPCC", "FPC"), ("--by", "SMOKES", "SMOKE")],
)
def test_column_not_in_file(run_cli: Run, survey_files: dict[str, Path], tmp_path: Path,
                            option: str, wrong: str, right: str) -> None:
    data, out = survey_files["sav"], tmp_path / "out.csv"
    design = {"--weight": "WT", "--strata": "STRAT", "--psu": "PSU"}
    if option in design:
        design[option] = wrong
    argv: list[Any] = ["estimate", data, wrong if option == "variable" else "SLEEP"]
    argv += [x for pair in design.items() for x in pair]
    if option in ("--fpc", "--by"):
        argv += [option, wrong]
    line = assert_error(run_cli(*argv, "-o", out), 1, re.escape(data.name),
                        rf"'{wrong}'", absent=(out,))
    assert f"did you mean '{right}'?" in line


def test_variable_not_in_file_nonresponse(run_cli: Run, survey_files: dict[str, Path],
                                          tmp_path: Path) -> None:
    out = tmp_path / "nr.csv"
    line = assert_error(run_cli("nonresponse", survey_files["dta"], "SMOKER", *DESIGN,
                                "-o", out), 1, "'SMOKER'", absent=(out,))
    assert "did you mean 'SMOKE'?" in line


def test_text_column_as_weight(run_cli: Run, survey_files: dict[str, Path],
                               tmp_path: Path) -> None:
    out = tmp_path / "out.csv"
    assert_error(run_cli("estimate", survey_files["sav"], "SLEEP", "--weight", "REGION",
                         "-o", out), 1, "REGION", r"text|string|not numer", absent=(out,))


# ---------------------------------------------------------------- weights

def _set_weight(value: float) -> Callable[[Any], None]:
    def edit(frame: Any) -> None:
        frame.loc[7, "WT"] = value

    return edit


@pytest.mark.parametrize(
    ("edit", "what"),
    [(_set_weight(-1.0), r"negative"), (_set_weight(float("nan")), r"missing|blank|no value"),
     (_set_weight(float("inf")), r"infinite"),
     (lambda frame: frame.__setitem__("WT", 0.0), r"\b0\b|zero")],
    ids=["negative", "missing", "infinite", "all-zero"],
)
def test_bad_weights(run_cli: Run, make_survey: Callable[..., Path], tmp_path: Path,
                     edit: Callable[[Any], None], what: str) -> None:
    data, out = make_survey("bad_weight.csv", edit), tmp_path / "out.csv"
    line = assert_error(run_cli(*_estimate(data, out)), 1, "'?WT'?", what, absent=(out,))
    if "zero" not in what:
        assert re.search(r"row 8\b", line), line  # rows count from 1: frame row 7 is row 8


# ---------------------------------------------------------------- design

def _blank(column: str) -> Callable[[Any], None]:
    def edit(frame: Any) -> None:
        frame.loc[10, column] = np.nan

    return edit


@pytest.mark.parametrize("column", ["STRAT", "PSU"])
def test_missing_design_values(run_cli: Run, make_survey: Callable[..., Path], tmp_path: Path,
                               column: str) -> None:
    data, out = make_survey("gaps.csv", _blank(column)), tmp_path / "out.csv"
    assert_error(run_cli(*_estimate(data, out)), 1, column, r"row 11\b",
                 r"drop[-_]incomplete", absent=(out,))


def test_singleton_strata_fail(run_cli: Run, make_survey: Callable[..., Path],
                               tmp_path: Path) -> None:
    def single(frame: Any) -> None:
        frame.loc[frame["STRAT"].isin([2.0, 4.0]), "PSU"] = 1.0

    data, out = make_survey("singles.csv", single), tmp_path / "out.csv"
    assert_error(run_cli(*_estimate(data, out)), 1, r"\b2 strata", r"'?2'?,", r"'?4'?",
                 "certainty", "center", "collapse", absent=(out,))


def test_one_psu_in_total(run_cli: Run, make_survey: Callable[..., Path],
                          tmp_path: Path) -> None:
    data = make_survey("one_psu.csv", lambda frame: frame.__setitem__("PSU", 1.0))
    out = tmp_path / "out.csv"
    assert_error(run_cli("estimate", data, "SLEEP", "--weight", "WT", "--psu", "PSU",
                         "--singleton", "certainty", "-o", out), 1, r"\b1 PSU", r"at least 2",
                 absent=(out,))


def _fpc(values: dict[float, float]) -> Callable[[Any], None]:
    def edit(frame: Any) -> None:
        frame["FPC"] = frame["STRAT"].map(values)

    return edit


@pytest.mark.parametrize(
    ("values", "what"),
    [({1.0: 0.5, 2.0: 0.5, 3.0: 30.0, 4.0: 30.0}, r"fraction.*count|count.*fraction"),
     ({1.0: 2.0, 2.0: 20.0, 3.0: 20.0, 4.0: 20.0}, r"\b2\b.*\b3\b"),
     ({1.0: -5.0, 2.0: 20.0, 3.0: 20.0, 4.0: 20.0}, r"positive|negative")],
    ids=["fractions-and-counts", "count-below-sampled", "negative"],
)
def test_unusable_fpc(run_cli: Run, make_survey: Callable[..., Path], tmp_path: Path,
                      values: dict[float, float], what: str) -> None:
    data, out = make_survey("fpc.csv", _fpc(values)), tmp_path / "out.csv"
    assert_error(run_cli(*_estimate(data, out, "--fpc", "FPC")), 1, "FPC", what,
                 absent=(out,))


@pytest.mark.parametrize(
    ("spec", "needles"),
    [("RX*", [r"RX\*", r"match"]), ("RWT1,RWT9", [r"'RWT9'", r"did you mean 'RWT\d'"])],
    ids=["glob-matches-nothing", "listed-column-absent"],
)
def test_replicates_not_found(run_cli: Run, survey_files: dict[str, Path], tmp_path: Path,
                              spec: str, needles: list[str]) -> None:
    out = tmp_path / "out.csv"
    proc = run_cli("estimate", survey_files["parquet"], "SLEEP", "--weight", "WT",
                   "--replicates", spec, "--replicate-method", "jackknife", "-o", out)
    assert_error(proc, 1, *needles, absent=(out,))


# ---------------------------------------------------------------- codebooks

def _codebook(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "bad_codebook.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _line_of(text: str, fragment: str) -> int:
    return next(i for i, line in enumerate(text.splitlines(), 1) if fragment in line)


_TWO_FAMILIES = """
[[family]]
name = "first-family"
match = ["SLEEP"]
codes = { 88 = "dont_know" }

[[family]]
name = "second-family"
match = ["S*"]
codes = { 88 = "refused" }
"""
_UNIT_ON_TEXT = """
[variables.REGION]
label = "Region"
[variables.REGION.unit_prefixed]
to = "year"
"""

#: name -> (codebook text, regexes the message must match); all found when loading.
LOAD_CASES: dict[str, tuple[str, list[str]]] = {
    "unknown-reason": (CODEBOOK_TOML.replace('99 = "refused"', '99 = "refusd"'),
                       ["SLEEP", "'refusd'", "did you mean 'refused'"]),
    "unknown-kind": (CODEBOOK_TOML.replace('kind = "continuous"', 'kind = "continous"', 1),
                     ["SLEEP", "continous", "did you mean 'continuous'"]),
    "two-families-claim-a-code": (CODEBOOK_TOML + _TWO_FAMILIES,
                                  ["SLEEP", r"\b88\b", "first-family", "second-family"]),
    "one-code-written-twice": (
        CODEBOOK_TOML.replace('77 = "dont_know",', '77 = "dont_know", "77.0" = "refused",'),
        ["SLEEP", r"\b77\b"]),
    "range-min-above-max": (CODEBOOK_TOML.replace("range = [1, 24]", "range = [24, 1]"),
                            ["SLEEP", r"\b24\b", r"min|greater"]),
}


@pytest.mark.parametrize("command", ["estimate", "check"])
@pytest.mark.parametrize("case", sorted(LOAD_CASES))
def test_codebook_rule_errors(run_cli: Run, survey_files: dict[str, Path], tmp_path: Path,
                              case: str, command: str) -> None:
    text, needles = LOAD_CASES[case]
    codebook, out = _codebook(tmp_path, text), tmp_path / "out.csv"
    argv: list[Any] = (["estimate", survey_files["sav"], "SLEEP", "--codebook", codebook,
                        "-o", out] if command == "estimate"
                       else ["codebook", "check", survey_files["sav"], codebook])
    assert_error(run_cli(*argv), 1, re.escape(codebook.name), *needles, absent=(out,))


@pytest.mark.parametrize("command", ["estimate", "check"])
@pytest.mark.parametrize(
    ("old", "new"),
    [('kind = "continuous"', 'kind = "continuous'), ("99 = \"refused\" }", "99 = }")],
    ids=["unterminated-string", "missing-value"],
)
def test_codebook_toml_syntax(run_cli: Run, survey_files: dict[str, Path], tmp_path: Path,
                              old: str, new: str, command: str) -> None:
    text = CODEBOOK_TOML.replace(old, new, 1)
    codebook, out = _codebook(tmp_path, text), tmp_path / "out.csv"
    argv: list[Any] = (["estimate", survey_files["sav"], "SLEEP", "--codebook", codebook,
                        "-o", out] if command == "estimate"
                       else ["codebook", "check", survey_files["sav"], codebook])
    line_no = _line_of(text, new)
    assert_error(run_cli(*argv), 1, re.escape(codebook.name), rf"line {line_no}\b",
                 r"column \d+", absent=(out,))


def test_unit_prefixed_on_text_variable_estimate(run_cli: Run, survey_files: dict[str, Path],
                                                 tmp_path: Path) -> None:
    codebook, out = _codebook(tmp_path, CODEBOOK_TOML + _UNIT_ON_TEXT), tmp_path / "out.csv"
    proc = run_cli("estimate", survey_files["sav"], "SLEEP", "--by", "REGION", "--codebook",
                   codebook, "-o", out)
    assert_error(proc, 1, "REGION", r"text|string|not numer", r"unit", absent=(out,))


def test_unit_prefixed_on_text_variable_check(run_cli: Run, survey_files: dict[str, Path],
                                              tmp_path: Path) -> None:
    codebook = _codebook(tmp_path, CODEBOOK_TOML + _UNIT_ON_TEXT)
    proc = run_cli("codebook", "check", survey_files["sav"], codebook)
    # check reports problems in its report (exit 1) rather than stopping at the first one.
    assert proc.returncode == 1, proc.stderr
    assert "Traceback" not in proc.stderr + proc.stdout
    assert re.search(r"REGION.*(text|string)", proc.stdout + proc.stderr, flags=re.I | re.S)


def _derived(expr: str) -> str:
    return CODEBOOK_TOML + f"\n[derived.BAD]\nkind = \"continuous\"\nexpr = {json.dumps(expr)}\n"


def test_expression_names_unknown_variable(run_cli: Run, survey_files: dict[str, Path],
                                           tmp_path: Path) -> None:
    codebook, out = _codebook(tmp_path, _derived("WEIGHT_KG / SLEEP")), tmp_path / "out.csv"
    proc = run_cli("estimate", survey_files["sav"], "BAD", "--codebook", codebook, "-o", out)
    assert_error(proc, 1, re.escape(codebook.name), r"derived\.BAD", "WEIGHT_KG",
                 absent=(out,))
    check = run_cli("codebook", "check", survey_files["sav"], codebook)
    assert check.returncode == 1 and "Traceback" not in check.stderr + check.stdout
    assert "WEIGHT_KG" in check.stdout + check.stderr


#: Constructs the expression language must refuse (docs/codebook.md); the canary file
#: would be created if any of them were ever executed as Python.
FORBIDDEN = {
    "attribute": "SLEEP.__class__",
    "import": "__import__('os').system('touch CANARY')",
    "open-call": "open('CANARY', 'w')",
    "eval-call": "eval('1 + 1')",
    "exec-call": "exec('x = 1')",
    "dunder-name": "__builtins__",
    "lambda": "lambda x: x",
    "indexing": "SLEEP[0]",
    "string": "\"seven\"",
    "python-power": "SLEEP ** 2",
    "python-ternary": "SLEEP if AGE > 30 else 0",
    "list": "[SLEEP, AGE]",
    "getattr": "getattr(SLEEP, 'real')",
}


@pytest.mark.parametrize(
    ("case", "command"),
    [(case, "estimate") for case in sorted(FORBIDDEN)]
    + [(case, "check") for case in ("attribute", "import", "open-call")],
)
def test_forbidden_expression_in_codebook(run_cli: Run, survey_files: dict[str, Path],
                                          tmp_path: Path, case: str, command: str) -> None:
    codebook, out = _codebook(tmp_path, _derived(FORBIDDEN[case])), tmp_path / "out.csv"
    argv: list[Any] = (["estimate", survey_files["sav"], "BAD", "--codebook", codebook,
                        "-o", out] if command == "estimate"
                       else ["codebook", "check", survey_files["sav"], codebook])
    assert_error(run_cli(*argv), 1, re.escape(codebook.name), r"derived\.BAD",
                 r"column \d+|not allowed|not part", absent=(out, tmp_path / "CANARY"))


@pytest.mark.parametrize("case", ["attribute", "import", "open-call", "lambda", "indexing",
                                  "string"])
def test_forbidden_expression_in_where(run_cli: Run, survey_files: dict[str, Path],
                                       tmp_path: Path, case: str) -> None:
    out = tmp_path / "out.csv"
    proc = run_cli(*_estimate(survey_files["sav"], out, "--where", FORBIDDEN[case]))
    assert_error(proc, 1, r"where", r"column \d+|not allowed|not part",
                 absent=(out, tmp_path / "CANARY"))


# ---------------------------------------------------------------- usage (exit 2)

@pytest.mark.parametrize(
    ("extra", "needle"),
    [(["--rows", "10:5"], r"--rows"), (["--ratio", "SLEEP"], r"--ratio"),
     (["--no-such-option"], r"no-such-option"), (["--level"], r"--level")],
    ids=["rows-backwards", "ratio-without-slash", "unknown-option", "option-without-value"],
)
def test_usage_errors(run_cli: Run, survey_files: dict[str, Path], tmp_path: Path,
                      extra: list[str], needle: str) -> None:
    out = tmp_path / "out.csv"
    assert_error(run_cli(*_estimate(survey_files["csv"], out), *extra), 2, needle,
                 absent=(out,))


def test_no_weight_is_a_usage_error(run_cli: Run, survey_files: dict[str, Path],
                                    tmp_path: Path) -> None:
    out = tmp_path / "out.csv"
    assert_error(run_cli("estimate", survey_files["csv"], "SLEEP", "-o", out), 2, "--weight",
                 absent=(out,))


# ---------------------------------------------------------------- outputs (exit 3)

def test_output_exists(run_cli: Run, survey_files: dict[str, Path], tmp_path: Path) -> None:
    out = tmp_path / "out.csv"
    out.write_text("old content\n", encoding="utf-8")
    before = out.stat().st_mtime_ns
    assert_error(run_cli(*_estimate(survey_files["sav"], out)), 3, "out.csv", "--overwrite")
    assert out.read_text(encoding="utf-8") == "old content\n"
    assert out.stat().st_mtime_ns == before


@pytest.mark.parametrize("command", ["convert", "draft", "nonresponse"])
def test_output_exists_other_commands(run_cli: Run, survey_files: dict[str, Path],
                                      tmp_path: Path, codebook_file: Path,
                                      command: str) -> None:
    argv, out = _commands(survey_files["dta"], tmp_path, codebook_file)[command]
    out.write_bytes(b"precious\n")
    assert_error(run_cli(*argv), 3, re.escape(out.name), "--overwrite")
    assert out.read_bytes() == b"precious\n"


def test_output_folder_missing(run_cli: Run, survey_files: dict[str, Path],
                               tmp_path: Path) -> None:
    out = tmp_path / "no_such_folder" / "out.csv"
    assert_error(run_cli(*_estimate(survey_files["sav"], out)), 3, "no_such_folder",
                 r"does not exist|missing|create")
    assert not out.parent.exists()


def test_output_folder_not_writable(run_cli: Run, survey_files: dict[str, Path],
                                    tmp_path: Path) -> None:
    folder = tmp_path / "locked"
    folder.mkdir()
    folder.chmod(0o555)
    try:
        if (hasattr(os, "geteuid") and os.geteuid() == 0) or os.access(folder, os.W_OK):
            pytest.skip("running as root: a read-only folder is still writable")
        out = folder / "out.csv"
        assert_error(run_cli(*_estimate(survey_files["sav"], out)), 3, "locked",
                     r"not writable|permission", absent=(out,))
        assert list(folder.iterdir()) == []
    finally:
        folder.chmod(0o755)


@pytest.mark.skipif(not os.path.exists("/dev/full"), reason="no /dev/full on this system")
@pytest.mark.parametrize("fmt", ["csv", "json", "table"])
def test_disk_full(run_cli: Run, survey_files: dict[str, Path], fmt: str) -> None:
    proc = run_cli(*_estimate(survey_files["sav"], Path("/dev/full"), "--format", fmt))
    assert_error(proc, 3, r"/dev/full", r"space|full")


@pytest.mark.skipif(not os.path.exists("/dev/full"), reason="no /dev/full on this system")
def test_disk_full_codebook_draft(run_cli: Run, survey_files: dict[str, Path]) -> None:
    proc = run_cli("codebook", "draft", survey_files["sav"], "-o", "/dev/full")
    assert_error(proc, 3, r"/dev/full", r"space|full")


# ---------------------------------------------------------------- --debug

@pytest.mark.parametrize(
    "argv",
    [lambda d, p: ["estimate", p / "missing.sav", "SLEEP", "--weight", "WT"],
     lambda d, p: ["estimate", d, "SLEEP", "--weight", "WTT"],
     lambda d, p: ["columns", p / "missing.xpt"]],
    ids=["missing-file", "missing-weight", "columns"],
)
def test_debug_shows_traceback(run_cli: Run, survey_files: dict[str, Path], tmp_path: Path,
                               argv: Callable[[Path, Path], list[Any]]) -> None:
    args = argv(survey_files["sav"], tmp_path)
    # --debug is accepted anywhere: first for one command, last for the others.
    proc = run_cli(*(["--debug", *args] if args[0] == "columns" else [*args, "--debug"]))
    assert proc.returncode == 1, proc.stderr
    assert "Traceback (most recent call last)" in proc.stderr
    assert re.search(r"wstats\.errors\.\w*Error", proc.stderr), proc.stderr
