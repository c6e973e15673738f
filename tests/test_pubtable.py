"""Publication tables: spec checking, cells against independent numpy computations, outputs."""

from __future__ import annotations

import io
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from render_tables import PROVENANCE
from test_render import check_golden, draw
from wstats.errors import AnalysisError, OutputError
from wstats.render import TABLE_RENDERERS, write_table
from wstats.reports.cells import fmt_count, fmt_number
from wstats.reports.tables import build_table, load_table_spec

CODEBOOK = """
[survey]
name = "Render test survey"
[design]
weight = "WT"
strata = "STRAT"
psu = "PSU"
[variables.dm_sex]
kind = "categorical"
label = "Sex"
labels = { 1 = "Male", 2 = "Female" }
[variables.SLEEP]
label = "Hours of sleep"
kind = "continuous"
codes = { 77 = "dont_know", 99 = "refused" }
[variables.SMOKE]
label = "Smokes"
kind = "categorical"
labels = { 1 = "Yes", 2 = "No" }
codes = { 9 = "refused" }
[variables.EXER]
label = "Exercise sessions"
kind = "count"
codes = { 888 = 0 }
"""

SPEC = """
title = "Table 1. Test survey"
data = "sample.csv"
codebook = "cb.toml"
rows = ["SLEEP", {variable = "SMOKE", levels = ["Yes"]}, {variable = "EXER", statistic = "mean"}]
notes = ["Source: invented data."]
[columns]
by = ["dm_sex"]
[output]
files = ["t1.md", "t1.xlsx"]
"""


@pytest.fixture(scope="module")
def survey(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """Write a small invented survey (4 strata x 4 PSUs x 25 rows), codebook and spec."""
    folder = tmp_path_factory.mktemp("pub")
    rng = np.random.default_rng(1)
    n = 400
    df = pd.DataFrame({"STRAT": np.repeat([1, 2, 3, 4], 100), "PSU": np.repeat(np.arange(16), 25),
                       "WT": rng.uniform(50, 150, n).round(1), "dm_sex": rng.integers(1, 3, n),
                       "SLEEP": rng.integers(4, 10, n).astype(float),
                       "SMOKE": rng.integers(1, 3, n), "EXER": rng.integers(0, 20, n)})
    df.loc[rng.choice(n, 20, replace=False), "SLEEP"] = 77
    df.loc[rng.choice(n, 8, replace=False), "SLEEP"] = 99
    df.loc[rng.choice(n, 30, replace=False), "EXER"] = 888
    df.loc[rng.choice(n, 6, replace=False), "SMOKE"] = 9
    df.to_csv(folder / "sample.csv", index=False)
    (folder / "cb.toml").write_text(CODEBOOK, encoding="utf-8")
    (folder / "t1.toml").write_text(SPEC, encoding="utf-8")
    return folder


def _raw(folder: Path) -> pd.DataFrame:
    return pd.read_csv(folder / "sample.csv")


def test_cells_match_numpy_weighted_estimates(survey: Path) -> None:
    table = build_table(survey / "t1.toml", time=False)
    raw = _raw(survey)
    cells = table.cells.set_index("label")
    # weighted mean of the valid values, sum(w y) / sum(w) (Horvitz-Thompson ratio mean;
    # Lohr 2010, Sampling: Design and Analysis, 2nd ed., section 4.3)
    ok = ~raw["SLEEP"].isin([77, 99])
    mean = np.average(raw.loc[ok, "SLEEP"], weights=raw.loc[ok, "WT"])
    assert cells.loc["Hours of sleep, mean", "all"].startswith(fmt_number(mean, 1) + " (")
    male = ok & (raw["dm_sex"] == 1)
    m_mean = np.average(raw.loc[male, "SLEEP"], weights=raw.loc[male, "WT"])
    assert cells.loc["Hours of sleep, mean", "dm_sex=Male"].startswith(fmt_number(m_mean, 1))
    # proportion of Yes among valid answers, in percent (same source, section 4.3)
    ok = raw["SMOKE"] != 9
    p = np.average(raw.loc[ok, "SMOKE"] == 1, weights=raw.loc[ok, "WT"])
    assert cells.loc["Yes", "all"].startswith(fmt_number(100 * p, 1) + "% (")
    # 888 means zero sessions: it enters the mean as 0
    exer = raw["EXER"].where(raw["EXER"] != 888, 0)
    assert cells.loc["Exercise sessions, mean", "all"].startswith(
        fmt_number(np.average(exer, weights=raw["WT"]), 1) + " (")


def test_sample_size_rows(survey: Path) -> None:
    table = build_table(survey / "t1.toml", time=False)
    raw = _raw(survey)
    cells = table.cells.set_index("label")
    assert cells.loc["Unweighted n", "all"] == "400"
    assert cells.loc["Unweighted n", "dm_sex=Female"] == fmt_count((raw["dm_sex"] == 2).sum())
    male_weight = raw.loc[raw["dm_sex"] == 1, "WT"].sum()
    assert cells.loc["Weighted N", "dm_sex=Male"] == fmt_count(male_weight)
    nums = table.numbers.set_index("label")
    assert nums.loc["Weighted N", "all"] == pytest.approx(raw["WT"].sum())


def test_layout_columns_notes_methods(survey: Path) -> None:
    table = build_table(survey / "t1.toml", time=False)
    assert [c.key for c in table.columns] == ["all", "dm_sex=Male", "dm_sex=Female"]
    assert [c.group for c in table.columns] == [None, "Sex", "Sex"]
    assert list(table.cells["kind"]) == ["data", "section", "data", "data", "summary", "summary"]
    assert table.footnotes[-1] == "Source: invented data."
    assert any(n.startswith("Proportion cells: percent (lower–upper)") for n in table.footnotes)
    assert "EXER: 888 → 0" in table.methods and "sample.csv" in table.methods
    assert table.provenance["inputs"][0]["name"] == "sample.csv"
    assert table.provenance["codebook"]["name"] == "cb.toml"


@pytest.mark.parametrize("fmt", ["markdown", "latex", "html", "csv", "json"])
def test_publication_golden(survey: Path, fmt: str) -> None:
    table = build_table(survey / "t1.toml", time=False)
    suffix = {"markdown": "md", "latex": "tex", "html": "html", "csv": "csv", "json": "json"}
    check_golden(f"pubtable.{suffix[fmt]}", TABLE_RENDERERS[fmt](table, provenance=PROVENANCE))


def test_publication_terminal_golden(survey: Path) -> None:
    table = build_table(survey / "t1.toml", time=False)
    check_golden("pubtable_terminal_100.txt", draw(TABLE_RENDERERS["terminal"](table), 100))


def test_publication_json_and_xlsx(survey: Path) -> None:
    from openpyxl import load_workbook

    table = build_table(survey / "t1.toml", time=False)
    doc = json.loads(TABLE_RENDERERS["json"](table, provenance=PROVENANCE))
    assert set(doc) == {"provenance", "title", "columns", "rows", "footnotes", "methods",
                        "results", "rules"}
    assert doc["rows"][0]["cells"]["all"] == table.cells.loc[0, "all"]
    wb = load_workbook(io.BytesIO(TABLE_RENDERERS["xlsx"](table)))
    rows = list(wb["Table"].iter_rows(values_only=True))
    assert rows[1][1:4] == (None, "Sex", None)  # spanning header, merged over the two levels
    assert rows[2] == (None, "All", "Male", "Female")  # openpyxl reads an empty cell as None
    assert rows[3][1] == table.cells.loc[0, "all"]


def test_write_table_writes_spec_outputs_and_refuses_to_overwrite(survey: Path) -> None:
    table = build_table(survey / "t1.toml", time=False)
    written = write_table(table)
    assert [p.name for p in written] == ["t1.md", "t1.xlsx"]
    assert (survey / "t1.md").read_text(encoding="utf-8").startswith("<!--\nwstats provenance")
    with pytest.raises(OutputError):
        write_table(table)
    write_table(table, overwrite=True)


# ------------------------------------------------------------------ spec errors


def _spec(folder: Path, text: str) -> Path:
    path = folder / "bad.toml"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.mark.parametrize("text,message", [
    ('data = "sample.csv"\nrowz = ["SLEEP"]\n',
     r"bad.toml: rowz: unknown key.*did you mean 'rows'"),
    ('data = "sample.csv"\n', r"bad.toml: rows: missing"),
    ('rows = ["SLEEP"]\n', r"bad.toml: data: missing"),
    ('data = "nope.csv"\nrows = ["SLEEP"]\n', r"bad.toml: data: file .*nope.csv does not exist"),
    ('data = "sample.csv"\nrows = [{variable = "SLEEP", statistic = "meen"}]\n',
     r"rows\[0\].statistic: 'meen' is not one of .*did you mean 'mean'"),
    ('data = "sample.csv"\nrows = ["SLEEP"]\n[cells]\nmean = "{est} ({ses})"\n',
     r"cells.mean: unknown placeholder \{ses\}.*did you mean 'se'"),
    ('data = "sample.csv"\nrows = ["SLEEP"]\n[cells]\nmean = "{pct}"\n',
     r"cells.mean: \{pct\} is for proportions"),
    ('data = "sample.csv"\nrows = ["SLEEP"]\n[intervals]\nproportion = "wilsn"\n',
     r"intervals.proportion: 'wilsn'.*did you mean 'wilson'"),
    ('data = "sample.csv"\nrows = ["SLEEP"]\nreliability = "nchs"\n', r"reliability: 'nchs'"),
    ('data = "sample.csv"\nrows = ["SLEEP"]\n[design]\nwieght = "WT"\n',
     r"design.wieght: unknown key.*did you mean 'weight'"),
    ('data = "sample.csv"\nrows = ["SLEEP"]\n[output]\nfiles = ["t.docx"]\n',
     r"output.files\[0\]: 't.docx' has no known suffix"),
    ('data = "sample.csv"\nrows = ["SLEEP"\n', r"bad.toml: not valid TOML: Unclosed array"),
    ('data = "sample.csv"\nrows = ["SLEEP"]\n[columns]\ntotal = false\n',
     r"columns.total: false leaves the table without columns"),
])
def test_spec_errors_are_one_line_and_name_the_key(survey: Path, text: str, message: str) -> None:
    with pytest.raises(AnalysisError, match=message) as info:
        load_table_spec(_spec(survey, text))
    assert "\n" not in str(info.value)


def test_unknown_variable_is_named_with_a_suggestion(survey: Path) -> None:
    spec = _spec(survey, 'data = "sample.csv"\ncodebook = "cb.toml"\nrows = ["SLEPE"]\n')
    with pytest.raises(AnalysisError, match=r"rows\[0\].variable: 'SLEPE' is not a column of "
                       r"sample.csv.*did you mean 'SLEEP'"):
        build_table(spec, time=False)


def test_unknown_level_is_named(survey: Path) -> None:
    spec = _spec(survey, 'data = "sample.csv"\ncodebook = "cb.toml"\n'
                 'rows = [{variable = "SMOKE", levels = ["Yess"]}]\n')
    with pytest.raises(AnalysisError, match=r"rows\[0\].levels: 'Yess' is not a level of SMOKE"
                       r".*did you mean 'Yes'"):
        build_table(spec, time=False)


def test_levels_by_code_and_missing_spec_file(survey: Path) -> None:
    spec = _spec(survey, 'data = "sample.csv"\ncodebook = "cb.toml"\n'
                 'rows = [{variable = "SMOKE", levels = [2]}]\n')
    table = build_table(spec, time=False)
    assert list(table.cells["label"])[:2] == ["Smokes, %", "No"]
    with pytest.raises(AnalysisError, match="cannot be read"):
        load_table_spec(survey / "absent.toml")


def test_codebook_check_rendering(survey: Path) -> None:
    from wstats.decoding.codebook import load_codebook
    from wstats.decoding.draft import check_codebook
    from wstats.readers.dispatch import read_raw
    from wstats.render import render_check

    report = check_codebook(read_raw(str(survey / "sample.csv")), load_codebook(survey / "cb.toml"))
    text = draw(render_check(report), 90)
    raw = _raw(survey)
    line = next(x for x in text.splitlines() if x.startswith("EXER") and "888" in x)
    assert line.split()[-1] == str(int((raw["EXER"] == 888).sum()))
    assert "OK: every codebook variable was found" in text


def test_the_documented_example_spec_is_valid(tmp_path: Path) -> None:
    doc = (Path(__file__).parents[1] / "docs" / "tables.md").read_text(encoding="utf-8")
    example = doc.split("```toml\n", 1)[1].split("```", 1)[0]
    (tmp_path / "table1.toml").write_text(example, encoding="utf-8")
    for name in ("tbchs_sample.xpt", "tbchs_codebook.toml"):
        (tmp_path / name).write_text("", encoding="utf-8")  # only existence is checked here
    spec = load_table_spec(tmp_path / "table1.toml")
    assert [r.variable for r in spec.rows] == ["sl_hours", "tc_ever", "pa_mmin", "bd_bmi"]
    assert spec.rows[2].p == 0.5 and spec.rows[3].decimals == 2
    assert spec.by == ("dm_age5", "ar_dist") and spec.total == "All adults"
    assert [f for _, f in spec.outputs] == ["markdown", "xlsx"]
    assert spec.styles["proportion"] == "{pct} ({lo}–{hi})"


def test_real_nonresponse_table_renders_in_every_format(survey: Path) -> None:
    from wstats.decoding.load import read
    from wstats.design.declared import Design
    from wstats.render import NONRESPONSE_RENDERERS
    from wstats.reports.nonresponse import nonresponse

    data = read(survey / "sample.csv", codebook=survey / "cb.toml")
    table = nonresponse(data, Design("WT", "STRAT", "PSU"), ["SLEEP"], by=["dm_sex"])
    raw = _raw(survey)
    dk = str(int((raw["SLEEP"] == 77).sum()))
    for fmt, render in NONRESPONSE_RENDERERS.items():
        out = render(table, provenance=PROVENANCE)
        if fmt == "terminal":
            assert f" {dk} " in draw(out, 100)
        elif fmt == "xlsx":
            assert out[:2] == b"PK"  # a zip container
        else:
            assert dk in out and "sample.csv" not in out  # provenance given: the fixed record
