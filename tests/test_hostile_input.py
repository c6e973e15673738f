"""Hostile and unusual input, second round: each class of issue 17 through the CLI and the API.

Every failing case checks the contract of docs/errors.md (see ``assert_error`` in
test_cli_errors.py): the exit code, exactly one ``wstats: error:`` line naming the file,
column or option and the fix, no traceback, no output left behind, and input files
byte-identical afterwards. Cases that must succeed check real numbers against the same data
computed another way (rescaled, recoded, or read from a plain file).
"""

from __future__ import annotations

import json
import math
import os
import re
import subprocess
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest

import wstats
from conftest import CODEBOOK_TOML, survey_frame, write_survey
from test_cli_errors import assert_error
from test_data_safety import fingerprint
from wstats.errors import (
    DesignError,
    EstimationError,
    ExpressionError,
    ReadError,
    WeightError,
    WstatsWarning,
)

Run = Callable[..., subprocess.CompletedProcess[str]]
DESIGN = ["--weight", "WT", "--strata", "STRAT", "--psu", "PSU"]


@pytest.fixture
def folder(tmp_path: Path, survey_files: dict[str, Path]) -> Iterator[Path]:
    """A folder with survey.csv/.sav/.parquet and the codebook; inputs checked unchanged."""
    for fmt in ("csv", "sav", "parquet"):
        (tmp_path / f"survey.{fmt}").write_bytes(survey_files[fmt].read_bytes())
    (tmp_path / "codebook.toml").write_text(CODEBOOK_TOML, encoding="utf-8")
    inputs = sorted(p for p in tmp_path.iterdir() if p.is_file())
    before = fingerprint(inputs)
    yield tmp_path
    assert fingerprint(inputs) == before, "an input file changed"


def _csv_rows(text: str) -> list[dict[str, str]]:
    """Return the data rows of a CSV output (provenance comment lines skipped)."""
    import csv

    lines = [line for line in text.splitlines() if not line.startswith("#")]
    return list(csv.DictReader(lines))


def _json_rows(text: str) -> list[dict[str, Any]]:
    rows: list[dict[str, Any]] = json.loads(text)["results"]
    return rows


def _warnings(proc: subprocess.CompletedProcess[str]) -> list[str]:
    return [line for line in proc.stderr.splitlines() if line.startswith("wstats: warning:")]


def _frame_to(folder: Path, name: str, edit: Callable[[Any], Any]) -> Path:
    frame = survey_frame()
    changed = edit(frame)
    return write_survey(frame if changed is None else changed, folder / name)


# ---------------------------------------------------------------- 1. zero-row domains

NOTHING = {"no-value-meets-it": "SLEEP > 1000", "overflowing-literal": "AGE > 1e400",
           "contradiction": "AGE > 50 and AGE < 40"}


@pytest.mark.parametrize("where", sorted(NOTHING))
@pytest.mark.parametrize("fmt", ["csv", "json"])
def test_empty_domain_estimate(run_cli: Run, folder: Path, where: str, fmt: str) -> None:
    proc = run_cli("estimate", "survey.sav", "SLEEP", "SMOKE", "--codebook", "codebook.toml",
                   "--by", "SMOKE", "--where", NOTHING[where], "--format", fmt, cwd=folder)
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr
    assert any("selects no row of survey.sav" in w and "n = 0" in w for w in _warnings(proc))
    rows = _csv_rows(proc.stdout) if fmt == "csv" else _json_rows(proc.stdout)
    assert rows, "an empty domain is still a row"
    for row in rows:
        assert int(row["n"]) == 0
        assert row["estimate"] in ("", None)
        flags = row["flags"] if fmt == "json" else row["flags"].split(";")
        assert "empty" in flags


def test_empty_domain_names_the_reason_of_a_special_code(run_cli: Run, folder: Path) -> None:
    # 77 is "dont_know" for SLEEP in the codebook: after decoding SLEEP never equals 77.
    proc = run_cli("estimate", "survey.sav", "SMOKE", "--codebook", "codebook.toml",
                   "--where", "SLEEP == 77", "--format", "json", cwd=folder)
    assert proc.returncode == 0, proc.stderr
    note = " ".join(_warnings(proc))
    assert "'dont_know'" in note and 'reason(SLEEP, "dont_know")' in note
    assert all(r["n"] == 0 for r in _json_rows(proc.stdout))


def test_select_by_reason(run_cli: Run, folder: Path) -> None:
    # The fixture sets SLEEP to 77 (dont_know) in rows 3 and 17 and to 99 (refused) in row 5.
    frame = survey_frame()
    proc = run_cli("estimate", "survey.sav", "SMOKE", "--codebook", "codebook.toml",
                   "--where", 'reason(SLEEP, "dont_know") or reason(SLEEP, "refused")',
                   "--statistics", "proportion", "--format", "json", cwd=folder)
    assert proc.returncode == 0, proc.stderr
    rows = _json_rows(proc.stdout)
    assert {r["n"] for r in rows} == {3}
    wanted = frame.loc[[3, 5, 17]]
    yes = wanted.loc[wanted["SMOKE"] == 1, "WT"].sum() / wanted["WT"].sum()
    got = next(r["estimate"] for r in rows if r["level"] == "Yes")
    if got is not None:  # suppressed cells carry no estimate in JSON
        assert got == pytest.approx(yes, rel=1e-12)  # a weighted share, by definition


def test_reason_name_used_as_a_value(run_cli: Run, folder: Path) -> None:
    out = folder / "out.csv"
    proc = run_cli("estimate", "survey.sav", "SMOKE", "--codebook", "codebook.toml",
                   "--where", "SLEEP == dont_know", "-o", out, cwd=folder)
    assert_error(proc, 1, "dont_know", r"reason\(SLEEP, \"dont_know\"\)", absent=(out,))


def test_unknown_reason_in_reason_function(run_cli: Run, folder: Path) -> None:
    out = folder / "out.csv"
    proc = run_cli("estimate", "survey.sav", "SMOKE", "--codebook", "codebook.toml",
                   "--where", 'reason(SLEEP, "dont_kno")', "-o", out, cwd=folder)
    assert_error(proc, 1, "dont_kno", "did you mean 'dont_know'", absent=(out,))


@pytest.mark.parametrize("command", ["nonresponse", "bounds"])
def test_empty_domain_other_commands(run_cli: Run, folder: Path, command: str) -> None:
    var = "SLEEP" if command == "nonresponse" else "SMOKE"
    proc = run_cli(command, "survey.sav", var, "--codebook", "codebook.toml", "--where",
                   "SLEEP > 1000", "--format", "csv", cwd=folder)
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr
    rows = _csv_rows(proc.stdout)
    assert rows
    counts = [int(r["n_rows"]) for r in rows] if command == "nonresponse" else \
        [int(r["n_valid"]) for r in rows]
    assert counts and all(c == 0 for c in counts)
    screen = run_cli(command, "survey.sav", var, "--codebook", "codebook.toml", "--where",
                     "SLEEP > 1000", cwd=folder)
    assert screen.returncode == 0 and "nan" not in screen.stdout.lower(), screen.stdout


def test_empty_domain_table_and_run(run_cli: Run, folder: Path) -> None:
    (folder / "out").mkdir()
    (folder / "table.toml").write_text(
        'title = "Empty"\ndata = "survey.sav"\ncodebook = "codebook.toml"\n'
        'where = "SLEEP > 1000"\nrows = ["SLEEP", "SMOKE"]\n', encoding="utf-8")
    table = run_cli("table", "table.toml", "-o", "out/table.csv", cwd=folder)
    assert table.returncode == 0, table.stderr
    assert (folder / "out" / "table.csv").stat().st_size > 0
    (folder / "analysis.toml").write_text(
        'title = "Empty"\ndata = "survey.sav"\ncodebook = "codebook.toml"\n\n'
        '[[estimates]]\nname = "none"\nvariables = ["SLEEP"]\nwhere = "AGE > 200"\n'
        'output = "out/est.json"\n\n[[nonresponse]]\nvariables = ["SLEEP"]\n'
        'where = "AGE > 200"\noutput = "out/nr.json"\n', encoding="utf-8")
    run = run_cli("run", "analysis.toml", cwd=folder)
    assert run.returncode == 0, run.stderr
    rows = _json_rows((folder / "out" / "est.json").read_text(encoding="utf-8"))
    assert [r["n"] for r in rows] == [0] and rows[0]["estimate"] is None


def test_empty_domain_api(folder: Path) -> None:
    data = wstats.read(folder / "survey.sav", codebook=folder / "codebook.toml")
    with pytest.warns(WstatsWarning, match="selects no row"):
        table = wstats.estimate(data, wstats.Design("WT", "STRAT", "PSU"), ["SLEEP"],
                                by=["SMOKE"], where="SLEEP > 1000")
    frame = table.frame
    assert (frame["n"] == 0).all() and frame["estimate"].isna().all()
    assert all("empty" in f for f in frame["flags"])
    with pytest.warns(WstatsWarning, match="selects no row"):
        nr = wstats.nonresponse(data, wstats.Design("WT", "STRAT", "PSU"), ["SLEEP"],
                                where="SLEEP > 1000")
    assert int(nr.frame["n_rows"].sum()) == 0


# ---------------------------------------------------------------- 2. deep / long expressions

def test_deeply_nested_where_is_one_line(run_cli: Run, folder: Path) -> None:
    out = folder / "out.csv"
    where = "(" * 150 + "AGE > 30" + ")" * 150
    proc = run_cli("estimate", "survey.sav", "SLEEP", *DESIGN, "--where", where, "-o", out,
                   cwd=folder)
    line = assert_error(proc, 1, "where", r"more than 100 levels", "derived variables",
                        absent=(out,))
    assert len(line) < 400  # the expression is shown shortened


@pytest.mark.parametrize("make", [
    lambda: "(" * 90 + "AGE > 30" + ")" * 90,
    lambda: " or ".join(f"AGE == {a}" for a in range(0, 2000)),
    lambda: " + ".join(["AGE"] * 5000) + " > 0",
    lambda: " and ".join(["AGE > 0"] * 3000),
    lambda: "-" * 61 + "AGE < 0",  # an odd number of signs: AGE > 0
], ids=["90-parentheses", "2000-term-or", "5000-term-sum", "3000-term-and", "61-signs"])
def test_long_or_deep_where_works(run_cli: Run, folder: Path, make: Callable[[], str]) -> None:
    proc = run_cli("estimate", "survey.csv", "SLEEP", *DESIGN, "--where", make(), "--format",
                   "json", cwd=folder)
    assert proc.returncode == 0, proc.stderr[-2000:]
    n = _json_rows(proc.stdout)[0]["n"]
    frame = survey_frame()
    assert n in (len(frame), int((frame["AGE"] > 30).sum()))


def test_long_chain_evaluates_like_its_meaning() -> None:
    from wstats.decoding.expressions import parse_expression

    data = wstats.Dataset.from_arrays({"A": [1.0, 2.0, 3.0, np.nan], "B": [0.5, 0.0, 7.0, 1.0]})
    total = parse_expression(" + ".join(["A"] * 4000), ["A"], "t").evaluate(
        data.columns, data.vocabulary)[0]
    np.testing.assert_array_equal(total, np.array([4000.0, 8000.0, 12000.0, np.nan]))
    anyof = parse_expression(" or ".join(f"A == {k}" for k in range(2, 1500)), ["A"], "t")
    np.testing.assert_array_equal(anyof.evaluate(data.columns, data.vocabulary)[0],
                                  np.array([0.0, 1.0, 1.0, np.nan]))
    mixed = parse_expression("A - B * 2 + A / B - 1", ["A", "B"], "t")
    with np.errstate(divide="ignore"):
        expect = np.array([1 - 1 + 2 - 1, np.nan, 3 - 14 + 3 / 7 - 1, np.nan])
    np.testing.assert_allclose(mixed.evaluate(data.columns, data.vocabulary)[0], expect)


def _chain_codebook(folder: Path, length: int) -> Path:
    lines = [CODEBOOK_TOML, '[derived.D0]\nexpr = "AGE + 1"\n']
    lines += [f'[derived.D{i}]\nexpr = "D{i - 1} + 1"\n' for i in range(1, length)]
    path = folder / "chain.toml"
    path.write_text("\n".join(lines), encoding="utf-8")
    return path


def test_long_chain_of_derived_variables(run_cli: Run, folder: Path) -> None:
    codebook = _chain_codebook(folder, 2500)
    proc = run_cli("estimate", "survey.sav", "D2499", *DESIGN, "--codebook", codebook,
                   "--format", "json", cwd=folder)
    assert proc.returncode == 0, proc.stderr[-2000:]
    frame = survey_frame()
    mean = float(np.average(frame["AGE"], weights=frame["WT"])) + 2500  # by definition
    assert _json_rows(proc.stdout)[0]["estimate"] == pytest.approx(mean, rel=1e-12)
    check = run_cli("codebook", "check", "survey.sav", codebook, cwd=folder)
    assert "Traceback" not in check.stderr + check.stdout


def test_derived_expression_too_deep(run_cli: Run, folder: Path) -> None:
    text = CODEBOOK_TOML + '\n[derived.DEEP]\nexpr = "' + "(" * 120 + "AGE" + ")" * 120 + '"\n'
    codebook = folder / "deep.toml"
    codebook.write_text(text, encoding="utf-8")
    out = folder / "out.csv"
    proc = run_cli("estimate", "survey.sav", "SLEEP", *DESIGN, "--codebook", codebook, "-o",
                   out, cwd=folder)
    assert_error(proc, 1, "deep.toml", r"derived\.DEEP", r"100 levels", absent=(out,))


def test_derived_cycle_still_found_without_recursion(folder: Path) -> None:
    text = CODEBOOK_TOML + "".join(f'\n[derived.C{i}]\nexpr = "C{(i + 1) % 1500} + 1"\n'
                                   for i in range(1500))
    path = folder / "cycle.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(wstats.CodebookError, match=r"cycle: C0 -> C1 -> .* -> C0"):
        wstats.load_codebook(path)


# ---------------------------------------------------------------- 3. extreme magnitudes

def _scaled(weight: float = 1.0, value: float = 1.0) -> wstats.Dataset:
    frame = survey_frame()
    frame["WT"] = frame["WT"] * weight
    frame["SLEEP"] = frame["SLEEP"] * value
    return wstats.Dataset.from_arrays({c: frame[c].to_numpy() for c in
                                       ("WT", "STRAT", "PSU", "SLEEP", "SMOKE")})


@pytest.mark.parametrize("weight", [1e-300, 1e-200, 3.7e-120, 1e160, 2.5e200, 1e300])
def test_weight_scale_changes_no_mean_or_proportion(weight: float) -> None:
    # Means, proportions and their SEs are ratios of weighted sums: invariant to multiplying
    # every weight by a constant (common practice, no source: it follows from the formulas).
    design = wstats.Design("WT", "STRAT", "PSU")
    base = wstats.estimate(_scaled(), design, ["SLEEP", "SMOKE"], categorical=["SMOKE"]).frame
    scaled = wstats.estimate(_scaled(weight=weight), design, ["SLEEP", "SMOKE"],
                             categorical=["SMOKE"]).frame
    for col in ("estimate", "se", "ci_low", "ci_high", "deff_weight"):
        np.testing.assert_allclose(scaled[col], base[col], rtol=1e-9)
    np.testing.assert_allclose(scaled["weighted_n"], base["weighted_n"] * weight, rtol=1e-12)


@pytest.mark.parametrize("value", [1e-300, 1e-250, 1e150, 3e250, 1e300])
@pytest.mark.parametrize("statistic", ["mean", "quantile", "total"])
def test_value_scale_scales_estimate_and_se(value: float, statistic: str) -> None:
    # SE(c*y) = c*SE(y) and the estimate scales by c (common practice, no source).
    design = wstats.Design("WT", "STRAT", "PSU")
    base = wstats.estimate(_scaled(), design, ["SLEEP"], statistics=statistic).frame
    scaled = wstats.estimate(_scaled(value=value), design, ["SLEEP"],
                             statistics=statistic).frame
    for col in ("estimate", "se"):
        assert np.isfinite(scaled[col]).all(), (col, scaled[col])
        np.testing.assert_allclose(scaled[col] / value, base[col], rtol=1e-9)


def test_huge_values_and_weights_together() -> None:
    design = wstats.Design("WT", "STRAT", "PSU")
    base = wstats.estimate(_scaled(), design, ["SLEEP"]).frame
    both = wstats.estimate(_scaled(weight=1e250, value=1e250), design, ["SLEEP"]).frame
    np.testing.assert_allclose(both["se"] / 1e250, base["se"], rtol=1e-9)


def test_total_beyond_float_range_is_one_line(run_cli: Run, folder: Path) -> None:
    def huge(frame: Any) -> None:
        frame["WT"] = frame["WT"] * 1e200
        frame["SLEEP"] = frame["SLEEP"] * 1e200

    data = _frame_to(folder, "huge.csv", huge)
    out = folder / "out.csv"
    proc = run_cli("estimate", data, "SLEEP", *DESIGN, "--statistics", "total", "-o", out,
                   cwd=folder)
    assert_error(proc, 1, "total of SLEEP", r"1\.8e308", "divide", absent=(out,))
    mean = run_cli("estimate", data, "SLEEP", *DESIGN, "--format", "csv", cwd=folder)
    assert mean.returncode == 0, mean.stderr
    row = _csv_rows(mean.stdout)[0]
    assert math.isfinite(float(row["se"])) and float(row["se"]) > 0


@pytest.mark.parametrize("weight", [1e170, 1e-250])
def test_extreme_weights_through_the_cli(run_cli: Run, folder: Path, weight: float) -> None:
    data = _frame_to(folder, "w.csv", lambda f: f.__setitem__("WT", f["WT"] * weight))
    proc = run_cli("estimate", data, "SLEEP", *DESIGN, "--format", "csv", cwd=folder)
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr and "weighting design effect" not in proc.stderr
    base = run_cli("estimate", folder / "survey.csv", "SLEEP", *DESIGN, "--format", "csv",
                   cwd=folder)
    got, want = _csv_rows(proc.stdout)[0], _csv_rows(base.stdout)[0]
    for col in ("estimate", "se", "deff_weight"):
        assert float(got[col]) == pytest.approx(float(want[col]), rel=1e-9)


def test_weight_spread_check_ignores_scale() -> None:
    from wstats.estimation.sanity import check_weight_spread

    w = np.r_[np.ones(99), 500.0]  # Kish deff = n sum w^2 / (sum w)^2 (Kish 1965)
    expect = check_weight_spread(w, "W")
    assert expect, "the unscaled weights must trip the check"
    for c in (1e-300, 1e-200, 1e160, 1e300):
        assert check_weight_spread(w * c, "W") == expect


def test_huge_number_shown_short_on_screen(run_cli: Run, folder: Path) -> None:
    data = _frame_to(folder, "big.csv", lambda f: f.__setitem__("SLEEP", f["SLEEP"] * 1e300))
    proc = run_cli("estimate", data, "SLEEP", *DESIGN, cwd=folder)
    assert proc.returncode == 0, proc.stderr
    assert re.search(r"\d\.\d{6}e\+300", proc.stdout), proc.stdout
    assert "000,000,000,000" not in proc.stdout


# ---------------------------------------------------------------- 4. integers beyond 2^53

BIG = 2**62


def _big_ids(fmt: str, folder: Path, unsigned: bool = False) -> tuple[Path, Path]:
    """Write the fixture with PSU/stratum codes beyond 2^53 (neighbours 1 apart) and small."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    frame = survey_frame()
    small = write_survey(frame, folder / f"small.{fmt}")
    kind = np.uint64 if unsigned else np.int64
    offset = kind(2**63 + 7) if unsigned else kind(BIG)
    psu = (frame["STRAT"] * 10 + frame["PSU"]).astype(kind) + offset  # distinct, 1 apart
    strat = frame["STRAT"].astype(kind) + offset
    path = folder / f"bigids.{fmt}"
    if fmt == "parquet":
        table = pa.table({**{c: frame[c].to_numpy() for c in ("WT", "SLEEP", "SMOKE")},
                          "STRAT": pa.array(strat.to_numpy()), "PSU": pa.array(psu.to_numpy())})
        pq.write_table(table, path)
    else:
        out = frame[["WT", "SLEEP", "SMOKE"]].copy()
        out["STRAT"], out["PSU"] = [str(int(v)) for v in strat], [str(int(v)) for v in psu]
        out.to_csv(path, index=False)
    return path, small


@pytest.mark.parametrize(("fmt", "unsigned"), [("parquet", False), ("parquet", True),
                                               ("csv", False)],
                         ids=["parquet-int64", "parquet-uint64", "csv"])
def test_big_identifiers_stay_distinct(run_cli: Run, folder: Path, fmt: str,
                                       unsigned: bool) -> None:
    big, small = _big_ids(fmt, folder, unsigned)
    argv = ["SLEEP", *DESIGN, "--by", "STRAT", "--format", "json"]
    got = run_cli("estimate", big, *argv, cwd=folder)
    want = run_cli("estimate", small, *argv, cwd=folder)
    assert got.returncode == 0, got.stderr
    # The same design as with small codes: 12 PSUs in 4 strata, the same SEs.
    rows, ref = _json_rows(got.stdout), _json_rows(want.stdout)
    assert len(rows) == len(ref) == 5
    for a, b in zip(rows, ref, strict=True):
        assert a["n"] == b["n"] and a["se"] == pytest.approx(b["se"], rel=1e-12)
    design = json.loads(got.stdout)["provenance"]["design"]
    assert design["n_psu"] == 12 and design["n_strata"] == 4
    levels = [r["group"]["STRAT"] for r in rows[1:]]
    assert all(str(v).startswith(str(2**63 + 7)[:6] if unsigned else str(BIG)[:6])
               for v in levels)


@pytest.mark.parametrize("command", ["convert", "draft", "columns"])
def test_big_identifiers_in_other_commands(run_cli: Run, folder: Path, command: str) -> None:
    big, _ = _big_ids("parquet", folder, unsigned=True)
    argv = {"convert": ["convert", big, folder / "cache.parquet"],
            "draft": ["codebook", "draft", big, "-o", folder / "cb.toml"],
            "columns": ["columns", big]}[command]
    proc = run_cli(*argv, cwd=folder)
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr
    if command == "convert":
        again = run_cli("estimate", folder / "cache.parquet", "SLEEP", *DESIGN, "--format",
                        "json", cwd=folder)
        assert json.loads(again.stdout)["provenance"]["design"]["n_psu"] == 12


def test_big_integer_analysis_variable_says_so_once(run_cli: Run, folder: Path) -> None:
    big, _ = _big_ids("parquet", folder)
    proc = run_cli("estimate", big, "PSU", "SLEEP", *DESIGN, "--format", "csv", cwd=folder)
    assert proc.returncode == 0, proc.stderr
    said = [w for w in _warnings(proc) if "beyond 2^53" in w]
    assert len(said) == 1 and "PSU" in said[0]
    row = _csv_rows(proc.stdout)[0]
    assert float(row["estimate"]) == pytest.approx(BIG + 25, rel=1e-15)


# ---------------------------------------------------------------- 5. --encoding and --rows

@pytest.mark.parametrize(("fmt", "encoding", "needle"), [
    ("csv", "no-such-codec", "unknown encoding"), ("csv", "rot13", "not a text encoding"),
    ("sav", "base64", "not a text encoding"), ("sav", "utf-16", "ASCII"),
])
def test_bad_encoding(run_cli: Run, folder: Path, fmt: str, encoding: str, needle: str) -> None:
    out = folder / "out.csv"
    proc = run_cli("estimate", f"survey.{fmt}", "SLEEP", *DESIGN, "--encoding", encoding,
                   "-o", out, cwd=folder)
    assert_error(proc, 1, re.escape(encoding), needle, "latin-1", absent=(out,))


@pytest.mark.parametrize("fmt", ["sav", "xpt", "dta", "parquet", "csv"])
@pytest.mark.parametrize("stop", [2**31 + 5, 2**63 + 5, 10**30])
def test_row_range_end_past_the_file_means_to_the_end(run_cli: Run, survey_files: dict[str, Path],
                                                      folder: Path, fmt: str, stop: int) -> None:
    data = survey_files[fmt]
    argv = ["SLEEP", *DESIGN, "--singleton", "certainty", "--format", "csv"]
    part = run_cli("estimate", data, *argv, "--rows", f"5:{stop}", cwd=folder)
    tail = run_cli("estimate", data, *argv, "--rows", "5:", cwd=folder)
    whole = run_cli("estimate", data, *argv, cwd=folder)
    assert part.returncode == 0, part.stderr
    assert int(_csv_rows(part.stdout)[0]["n"]) == len(survey_frame()) - 5
    assert _csv_rows(part.stdout) == _csv_rows(tail.stdout) != _csv_rows(whole.stdout)


@pytest.mark.parametrize("fmt", ["sav", "parquet"])
def test_row_range_start_past_the_file(run_cli: Run, survey_files: dict[str, Path],
                                       folder: Path, fmt: str) -> None:
    out = folder / "out.csv"
    proc = run_cli("estimate", survey_files[fmt], "SLEEP", *DESIGN, "--rows",
                   f"{2**40}:{2**41}", "-o", out, cwd=folder)
    assert_error(proc, 1, "no rows", "count from 0", absent=(out,))


@pytest.mark.parametrize("rows", ["-5:10", "5", "a:b", "10:5", "0:-1"])
def test_rows_syntax_explained(run_cli: Run, folder: Path, rows: str) -> None:
    out = folder / "out.csv"
    for argv in (["--rows", rows], [f"--rows={rows}"]):
        proc = run_cli("estimate", "survey.csv", "SLEEP", *DESIGN, *argv, "-o", out, cwd=folder)
        assert_error(proc, 2, re.escape(rows), r"--rows 0:1000", "to the end", absent=(out,))


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="no FIFOs here")
def test_rows_and_encoding_checked_before_reading(run_cli: Run, folder: Path) -> None:
    # A FIFO blocks whoever opens it: an answer proves the file was never opened.
    fifo = folder / "pipe.csv"
    os.mkfifo(fifo)
    proc = run_cli("estimate", fifo, "SLEEP", *DESIGN, "--rows", "-5:10", cwd=folder, timeout=60)
    assert_error(proc, 2, r"--rows")


# ---------------------------------------------------------------- 6. special files

@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="no FIFOs here")
@pytest.mark.parametrize("command", ["estimate", "columns", "look", "nonresponse", "convert",
                                     "draft"])
def test_fifo_refused_before_opening(run_cli: Run, folder: Path, command: str) -> None:
    fifo = folder / "pipe.csv"
    os.mkfifo(fifo)
    out = folder / "out.parquet"
    argv = {"estimate": ["estimate", fifo, "SLEEP", *DESIGN],
            "columns": ["columns", fifo],
            "look": ["look", fifo, "SLEEP"],
            "nonresponse": ["nonresponse", fifo, "SLEEP", *DESIGN],
            "convert": ["convert", fifo, out],
            "draft": ["codebook", "draft", fifo]}[command]
    proc = run_cli(*argv, cwd=folder, timeout=60)
    assert_error(proc, 1, "pipe.csv", r"named pipe", r"regular file", absent=(out,))


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="no /dev/zero")
def test_device_is_not_called_empty(run_cli: Run, folder: Path) -> None:
    link = folder / "zero.csv"
    link.symlink_to("/dev/zero")
    line = assert_error(run_cli("columns", link, cwd=folder, timeout=60), 1, "zero.csv",
                        "character device")
    assert "empty" not in line and "0 bytes" not in line


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="no FIFOs here")
def test_fifo_refused_by_the_api(tmp_path: Path) -> None:
    fifo = tmp_path / "pipe.parquet"
    os.mkfifo(fifo)
    with pytest.raises(ReadError, match="named pipe"):
        wstats.read(fifo)


# ---------------------------------------------------------------- 7. very long cells

def test_long_cells_cut_on_screen_whole_in_machine_formats(run_cli: Run, folder: Path) -> None:
    long_a, long_b = "a" * 300_000, "b" * 200_001

    def edit(frame: Any) -> None:
        frame["LONG"] = np.where(frame["SMOKE"] == 1, long_a, long_b)

    data = _frame_to(folder, "long.csv", edit)
    screen = run_cli("estimate", data, "LONG", *DESIGN, cwd=folder)
    assert screen.returncode == 0, screen.stderr
    # Each label is cut to 200 characters (folded over lines, repeated per column block).
    assert "…" in screen.stdout and "cut here" in screen.stdout
    assert screen.stdout.count("a") < 2000 and len(screen.stdout) < 20_000
    as_json = run_cli("estimate", data, "LONG", *DESIGN, "--format", "json", cwd=folder)
    levels = {r["level"] for r in _json_rows(as_json.stdout)}
    assert {long_a, long_b} <= levels


def test_terminal_grid_holds_no_long_cell() -> None:
    from wstats.render._grid import estimate_grid
    from wstats.render._terminal import MAX_CELL, GridView

    data = wstats.Dataset.from_arrays({
        "W": np.ones(40), "T": np.array(["x" * 50_000, "y"] * 20, dtype=object)})
    table = wstats.estimate(data, wstats.Design("W"), ["T"])
    view = GridView(estimate_grid(table), per_section=True)
    assert max(len(c) for row in view.grid.rows for c in row) <= MAX_CELL


# ---------------------------------------------------------------- 8, 11. replicate columns

def _replicates(run_cli: Run, data: Path, spec: str, folder: Path,
                out: Path | None = None) -> subprocess.CompletedProcess[str]:
    extra = ["-o", out] if out else ["--format", "csv"]
    return run_cli("estimate", data, "SLEEP", "--weight", "WT", "--replicates", spec,
                   "--replicate-method", "jackknife", *extra, cwd=folder)


def test_replicate_named_twice(run_cli: Run, folder: Path) -> None:
    out = folder / "out.csv"
    proc = _replicates(run_cli, folder / "survey.csv", "RWT1,RWT2,RWT2,RWT3", folder, out)
    assert_error(proc, 1, "RWT2", r"more than once", "once", absent=(out,))
    with pytest.raises(DesignError, match="RWT2"):
        wstats.Design("WT", replicates=["RWT1", "RWT2", "RWT2"],
                      replicate_method="jackknife").bind(_replicate_data(folder))


def _replicate_data(folder: Path) -> wstats.Dataset:
    return wstats.read(folder / "survey.csv")


def test_replicate_with_the_same_values_warns(run_cli: Run, folder: Path) -> None:
    data = _frame_to(folder, "dup.csv", lambda f: f.__setitem__("RWT5", f["RWT2"]))
    proc = _replicates(run_cli, data, "RWT*", folder)
    assert proc.returncode == 0, proc.stderr
    said = [w for w in _warnings(proc) if "same values" in w]
    assert len(said) == 1 and "RWT2" in said[0] and "RWT5" in said[0]


def test_replicate_column_of_zeros(run_cli: Run, folder: Path) -> None:
    data = _frame_to(folder, "zero.csv", lambda f: f.__setitem__("RWT3", 0.0))
    out = folder / "out.csv"
    assert_error(_replicates(run_cli, data, "RWT*", folder, out), 1, "RWT3", r"0 in every row",
                 "standard error", absent=(out,))
    with pytest.raises(WeightError, match="RWT3"):
        wstats.Design("WT", replicates="RWT*", replicate_method="jackknife").bind(
            wstats.read(data))


# ---------------------------------------------------------------- 9. ratio over zero

def test_ratio_over_zero_denominator_same_everywhere(run_cli: Run, folder: Path) -> None:
    data = _frame_to(folder, "ratio.csv", lambda f: f.__setitem__("ZERO", 0.0))
    argv = ["estimate", data, "SLEEP", "--ratio", "SLEEP/ZERO", *DESIGN]
    as_csv = _csv_rows(run_cli(*argv, "--format", "csv", cwd=folder).stdout)[-1]
    as_json = _json_rows(run_cli(*argv, "--format", "json", cwd=folder).stdout)[-1]
    screen = run_cli(*argv, cwd=folder).stdout
    assert as_csv["estimate"] == "" and as_csv["flags"] == "no-estimate"
    assert as_json["estimate"] is None and as_json["flags"] == ["no-estimate"]
    assert "inf" not in screen and "no-estimate" in screen
    frame = wstats.estimate(wstats.read(data), wstats.Design("WT", "STRAT", "PSU"), ["SLEEP"],
                            ratios=[("SLEEP", "ZERO")]).frame
    ratio = frame[frame["statistic"] == "ratio"].iloc[0]
    assert math.isnan(ratio["estimate"]) and "no-estimate" in ratio["flags"]


# ---------------------------------------------------------------- 10. proportion of a number

def test_proportion_of_a_continuous_variable(run_cli: Run, folder: Path) -> None:
    out = folder / "out.csv"
    proc = run_cli("estimate", "survey.csv", "AGE", *DESIGN, "--statistics", "proportion", "-o",
                   out, cwd=folder)
    assert_error(proc, 1, "'AGE'", "--categorical AGE", absent=(out,))
    fine = run_cli("estimate", "survey.csv", "AGE", *DESIGN, "--statistics", "proportion",
                   "--categorical", "AGE", "--format", "csv", cwd=folder)
    assert fine.returncode == 0, fine.stderr
    with pytest.raises(EstimationError, match="proportion of 'AGE' needs a categorical"):
        wstats.estimate(wstats.read(folder / "survey.csv"), wstats.Design("WT"), ["AGE"],
                        statistics="proportion")


def test_proportion_of_an_indicator(run_cli: Run, folder: Path) -> None:
    # A 0/1 column without a codebook is a number too: it needs --categorical, and then
    # its proportion is the weighted share of ones.
    data = _frame_to(folder, "ind.csv", lambda f: f.__setitem__("OLD", (f["AGE"] > 50) * 1.0))
    out = folder / "out.csv"
    refused = run_cli("estimate", data, "OLD", *DESIGN, "--statistics", "proportion", "-o", out,
                      cwd=folder)
    assert_error(refused, 1, "'OLD'", "--categorical OLD", absent=(out,))
    frame = survey_frame()
    share = frame.loc[frame["AGE"] > 50, "WT"].sum() / frame["WT"].sum()
    table = wstats.estimate(wstats.read(data), wstats.Design("WT", "STRAT", "PSU"), ["OLD"],
                            statistics="proportion", categorical=["OLD"]).frame
    got = table.loc[table["level"] == "1", "estimate"].iloc[0]
    assert got == pytest.approx(share, rel=1e-12)  # a weighted share, by definition


# ---------------------------------------------------------------- messages that help

def test_semicolon_csv(run_cli: Run, folder: Path) -> None:
    path = folder / "semi.csv"
    survey_frame().to_csv(path, index=False, sep=";")
    out = folder / "out.csv"
    for argv in (["estimate", path, "SLEEP", *DESIGN, "-o", out], ["columns", path]):
        assert_error(run_cli(*argv, cwd=folder), 1, "semi.csv", "semicolon", "commas",
                     absent=(out,))


def test_non_ascii_column_name(run_cli: Run, folder: Path) -> None:
    data = _frame_to(folder, "umlaut.csv", lambda f: f.rename(columns={"AGE": "größe"}))
    out = folder / "out.csv"
    bad = run_cli("estimate", data, "SLEEP", *DESIGN, "--where", "größe > 50", "-o", out,
                  cwd=folder)
    assert_error(bad, 1, "backticks", "`größe`", absent=(out,))
    good = run_cli("estimate", data, "SLEEP", *DESIGN, "--where", "`größe` > 50", "--format",
                   "json", cwd=folder)
    assert good.returncode == 0, good.stderr
    assert _json_rows(good.stdout)[0]["n"] == int((survey_frame()["AGE"] > 50).sum())


def test_numbers_made_text_by_na(run_cli: Run, folder: Path) -> None:
    def edit(frame: Any) -> Any:
        frame["Q"] = frame["SLEEP"].astype(int).astype(str)
        frame.loc[[1, 2, 9], "Q"] = "NA"
        return frame

    data = _frame_to(folder, "na.csv", edit)
    out = folder / "out.csv"
    mean = run_cli("estimate", data, "Q", *DESIGN, "--statistics", "mean", "-o", out, cwd=folder)
    assert_error(mean, 1, "'Q'", r"'NA' \(3 rows\)", r'codes = \{ "NA" = "missing" \}',
                 absent=(out,))
    weight = run_cli("estimate", data, "SLEEP", "--weight", "Q", "-o", out, cwd=folder)
    assert_error(weight, 1, "'Q'", r"'NA' \(3 rows\)", absent=(out,))
    counted = run_cli("estimate", data, "Q", *DESIGN, "--format", "csv", cwd=folder)
    assert any("'NA' (3 rows)" in w for w in _warnings(counted))


@pytest.mark.parametrize(("real", "named", "words"), [
    ("parquet", "csv", "Parquet"), ("sav", "parquet", ".sav system file"),
    ("xpt", "csv", "transport"),
])
def test_file_that_is_not_what_its_name_says(run_cli: Run, survey_files: dict[str, Path],
                                             folder: Path, real: str, named: str,
                                             words: str) -> None:
    path = folder / f"lying.{named}"
    path.write_bytes(survey_files[real].read_bytes())
    out = folder / "out.csv"
    for argv in (["estimate", path, "SLEEP", *DESIGN, "-o", out], ["columns", path]):
        assert_error(run_cli(*argv, cwd=folder), 1, "lying", words, rf"\.{real}\b",
                     absent=(out,))


def test_infinite_fpc(run_cli: Run, folder: Path) -> None:
    data = _frame_to(folder, "fpc.csv", lambda f: f.__setitem__("FPC", np.inf))
    out = folder / "out.csv"
    line = assert_error(run_cli("estimate", data, "SLEEP", *DESIGN, "--fpc", "FPC", "-o", out,
                                cwd=folder), 1, "'FPC'", "infinite", "count", absent=(out,))
    assert "missing" not in line


def test_pandas_frame_given_to_the_api() -> None:
    frame = survey_frame()
    for call in (lambda: wstats.estimate(frame, wstats.Design("WT"), ["SLEEP"]),
                 lambda: wstats.nonresponse(frame, wstats.Design("WT"), ["SLEEP"]),
                 lambda: wstats.bounds(frame, wstats.Design("WT"), ["SMOKE"]),
                 lambda: wstats.Design("WT").bind(frame)):
        with pytest.raises(EstimationError, match=r"pandas DataFrame.*Dataset\.from_arrays"):
            call()
    wrapped = wstats.Dataset.from_arrays(frame)
    est = wstats.estimate(wrapped, wstats.Design("WT"), ["SLEEP"]).frame["estimate"][0]
    assert est == pytest.approx(np.average(frame["SLEEP"], weights=frame["WT"]), rel=1e-12)


def test_expression_errors_stay_one_line() -> None:
    from wstats.decoding.expressions import parse_expression

    for text in ("(" * 500 + "A", "A +" * 3000, "`unclosed", "``", 'reason(A, 7)',
                 'reason(1 + A, "x")'):
        with pytest.raises(ExpressionError) as info:
            parse_expression(text, ["A"], "test")
        assert "\n" not in str(info.value) and len(str(info.value)) < 500


def test_encoding_and_rows_through_the_api(folder: Path) -> None:
    for encoding, words in (("rot13", "not a text encoding"), ("utf-16", "ASCII"),
                            ("no-such", "unknown encoding")):
        with pytest.raises(ReadError, match=words):
            wstats.read(folder / "survey.sav", encoding=encoding)
    whole = wstats.read(folder / "survey.parquet")
    for stop in (2**31 + 1, 2**63 + 1, 10**40):
        part = wstats.read(folder / "survey.parquet", rows=(3, stop))
        assert part.n_rows == whole.n_rows - 3
        np.testing.assert_array_equal(part["AGE"].values, whole["AGE"].values[3:])
