"""wstats compare end to end, its renderers, age-adjusted estimate rows, table p-values."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from wstats import Dataset, Design, compare, estimate
from wstats.cli.main import main
from wstats.render import COMPARE_RENDERERS, ESTIMATE_RENDERERS
from wstats.reports.table_specs import load_table_spec
from wstats.reports.tables import build_table

CB = ('[design]\nweight = "W"\nstrata = "ST"\npsu = "CL"\n'
      '[variables.Q]\nkind = "categorical"\ncodes = { 7 = "dont_know", 9 = "refused" }\n'
      'labels = { 1 = "Yes", 2 = "No" }\n'
      '[variables.G]\nkind = "categorical"\nlabels = { 1 = "North", 2 = "South", 3 = "East" }\n'
      '[variables.A]\nkind = "categorical"\nlabels = { 1 = "young", 2 = "middle", 3 = "old" }\n')


@pytest.fixture()
def survey(tmp_path: Path) -> Path:
    """Invented survey: 4 strata x 3 PSUs, a yes/no item with 7/9 codes, groups, ages, Y."""
    rng = np.random.default_rng(11)
    n = 360
    g = rng.choice([1.0, 2.0, 3.0], n)
    a = rng.choice([1.0, 2.0, 3.0], n)
    frame = pd.DataFrame({
        "ST": np.repeat(np.arange(4.0), 90), "CL": np.tile(np.repeat(np.arange(3.0), 30), 4),
        "W": rng.uniform(1, 5, n), "Q": rng.choice([1.0, 2.0, 7.0, 9.0], n, p=[.5, .4, .06, .04]),
        "G": g, "A": a, "Y": rng.normal(20 + 2 * g + 3 * a, 4.0, n),
    })
    path = tmp_path / "s.csv"
    frame.to_csv(path, index=False)
    (tmp_path / "cb.toml").write_text(CB, encoding="utf-8")
    return path


def _data(path: Path) -> Dataset:
    from wstats.decoding.load import read

    return read(path, ["Q", "G", "A", "Y", "W", "ST", "CL"], path.parent / "cb.toml")


DESIGN = Design("W", strata="ST", psu="CL")


def test_compare_json_contract_equals_library(survey: Path,
                                              capsys: pytest.CaptureFixture[str]) -> None:
    # the output contract of the issue: {"provenance", "differences", "tests"} with its keys
    assert main(["compare", str(survey), "Y", "Q", "--by", "G", "--codebook",
                 str(survey.parent / "cb.toml"), "--format", "json", "--adjust-p", "bh",
                 "--trend", "--reasons"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert {"provenance", "differences", "tests"} <= set(out)
    lib = compare(_data(survey), DESIGN, ["Y", "Q"], by="G", adjust_p="bh", trend=True,
                  reasons=True)
    assert [r["difference"] for r in out["differences"]] == pytest.approx(
        [r["difference"] for r in lib.differences.rows])
    need = {"variable", "statistic", "level", "by", "group_a", "group_b", "estimate_a",
            "estimate_b", "difference", "se", "ci_low", "ci_high", "df", "t", "p", "p_adjusted",
            "flags"}
    assert all(need <= set(r) for r in out["differences"])
    assert out["differences"][0]["level"] is None and out["differences"][0]["group_a"] == "North"
    kinds = {r["test"] for r in out["tests"]}
    assert {"wald", "rao-scott", "trend-linear"} <= kinds
    rs = [r for r in out["tests"] if r["test"] == "rao-scott"][0]
    assert {"pearson_chisq", "first_order_f", "mean_deff", "deff_cv2", "df1", "df2"} <= set(rs)


def test_compare_other_formats(survey: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # markdown, CSV and terminal carry the same numbers; CSV reads back
    result = compare(_data(survey), DESIGN, ["Y", "Q"], by="G", reference="South")
    md = COMPARE_RENDERERS["markdown"](result)
    assert "Differences between levels of G" in md and "Tests across levels of G" in md
    assert "wstats provenance" in md and "Rao-Scott" in md
    text = COMPARE_RENDERERS["csv"](result)
    rows = list(csv.DictReader(io.StringIO("".join(
        ln for ln in text.splitlines(keepends=True) if not ln.startswith("#")))))
    diffs = [r for r in rows if r["row_type"] == "difference"]
    assert float(diffs[0]["difference"]) == pytest.approx(result.differences.rows[0]
                                                          ["difference"])
    assert diffs[0]["group_a"] == "South"
    from wstats.render import plain_text

    term = plain_text(COMPARE_RENDERERS["terminal"](result), width=200)
    assert "B - A" in term and "North" in term


def test_compare_cli_refuses_part_versus_whole(survey: Path,
                                               capsys: pytest.CaptureFixture[str]) -> None:
    # REFERENCES §13: a group against its own whole is refused, one line, exit code non-zero
    code = main(["compare", str(survey), "Y", "--by", "G", "--reference", "total",
                 "--codebook", str(survey.parent / "cb.toml")])
    err = capsys.readouterr().err
    assert code != 0 and "part-versus-whole" in err and len(err.strip().splitlines()) == 1


def test_compare_cli_age_adjusted(survey: Path, tmp_path: Path,
                                  capsys: pytest.CaptureFixture[str]) -> None:
    # a standard file: its name in every row and in the title
    std = tmp_path / "std.toml"
    std.write_text('name = "town"\nsource = "invented for a test"\n'
                   '[population]\n"1" = 5\n"2" = 3\n"3" = 2\n', encoding="utf-8")
    assert main(["compare", str(survey), "Y", "--by", "G", "--age-adjust", "A", "--standard",
                 str(std), "--codebook", str(survey.parent / "cb.toml"), "--format",
                 "json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert {r["standard"] for r in out["differences"]} == {"town"}
    assert out["settings"]["standard"] == "town"
    cells = estimate(_data(survey), DESIGN, ["Y"], by=["G", "A"]).frame.iloc[1:]
    adjusted = cells["estimate"].to_numpy().reshape(3, 3) @ np.array([0.5, 0.3, 0.2])
    assert out["differences"][0]["estimate_a"] == pytest.approx(adjusted[0])


def test_estimate_age_adjusted_rows(survey: Path) -> None:
    # REFERENCES §15: an adjusted row per domain beside the crude ones, "standard" set
    data = _data(survey)
    t = estimate(data, DESIGN, ["Y", "Q"], by=["G"], age_adjust="A", standard="us2000-adults18")
    f = t.frame
    adj = f[f["standard"].notna()]
    assert set(adj["standard"]) == {"us2000-adults18"}
    assert len(adj) == 4 + 4 * 2  # Y: population + 3 groups; Q: 2 levels each
    c = np.array([0.530535, 0.299194, 0.170271])
    cells = estimate(data, DESIGN, ["Y"], by=["A"]).frame.iloc[1:]["estimate"].to_numpy()
    whole = adj[(adj["variable"] == "Y") & adj["G"].isna()]["estimate"].iloc[0]
    assert whole == pytest.approx(float(cells @ c), rel=1e-5)
    assert t.settings["standard"] == "us2000-adults18"
    md = ESTIMATE_RENDERERS["markdown"](t)
    assert "age-adjusted (standard us2000-adults18)" in md
    records = t.records()
    assert records[-1]["standard"] == "us2000-adults18" and records[0]["standard"] is None
    # every row has an age group here, so an adjusted row leaves out the rows its crude row
    # leaves out, by reason (common practice, no source: the same rows enter both)
    crude = f[f["standard"].isna() & (f["variable"] == "Q")]
    adjusted = adj[adj["variable"] == "Q"]
    assert list(adjusted["reasons"]) == list(crude["reasons"])
    assert sum(crude["reasons"].iloc[0].values()) > 0


def test_estimate_age_adjust_empty_cell_names_domain(survey: Path) -> None:
    # REFERENCES §15: an empty age cell in a domain is an error naming domain and group
    from wstats import EstimationError

    data = _data(survey)
    y = data["Y"].values.copy()
    y[(data["G"].values == 3) & (data["A"].values == 2)] = np.nan
    cols = {k: data[k].values for k in ("W", "ST", "CL", "G", "A")}
    ds = Dataset.from_arrays({**cols, "Y": y})
    with pytest.raises(EstimationError, match="age group '2' of A .* domain G = 3"):
        estimate(ds, DESIGN, ["Y"], by=["G"], age_adjust="A", standard="us2000-adults18")


def test_table_p_values_equal_compare(survey: Path, tmp_path: Path) -> None:
    # the table's p column is the compare() global test of the row: Rao-Scott, Wald
    spec = tmp_path / "t.toml"
    spec.write_text(
        f'data = "{survey.name}"\ncodebook = "cb.toml"\ntitle = "T"\n'
        'rows = ["Q", "Y", { variable = "Y", age_adjust = "A", standard = "us2000-adults20" }]\n'
        '[columns]\nby = ["G"]\np_value = true\n', encoding="utf-8")
    table = build_table(load_table_spec(spec), time=False)
    p = table.numbers["p:G"].to_numpy()
    lib = compare(_data(survey), DESIGN, ["Q", "Y"], by="G").tests.rows
    rs = [r["p"] for r in lib if r["test"] == "rao-scott"][0]
    wald = [r["p"] for r in lib if r["test"] == "wald"][0]
    assert rs == pytest.approx(p[1]) and wald == pytest.approx(p[3])
    assert np.isfinite(p[4])
    assert "age-adjusted (standard us2000-adults20)" in table.cells["label"].iloc[4]
    assert "Rao-Scott" in table.methods and "d-k+2" in table.methods
    assert "us2000-adults20" in table.methods
    assert any(n.startswith("p: test across the levels of G") for n in table.footnotes)


def test_methods_paragraph_names_the_standard(survey: Path) -> None:
    # the methods text of age-adjusted estimates names the standard and its source
    from wstats import methods_paragraph

    t = estimate(_data(survey), DESIGN, ["Y"], age_adjust="A", standard="us2000-adults20")
    text = methods_paragraph(t.design, t.settings, {}, None, "s.csv", None)
    assert "age-adjusted (standard us2000-adults20)" in text and "levels of A" in text
    assert "Klein & Schoenborn" in text


@pytest.mark.parametrize("fmt", ["markdown", "csv", "json"])
def test_compare_renderers_match_golden(survey: Path, fmt: str) -> None:
    # golden files: a change in the layout of a comparison shows up as a diff to review
    from test_render import check_golden

    result = compare(_data(survey), DESIGN, ["Y", "Q"], by="G", trend=True, reasons=True,
                     adjust_p="holm")
    text = COMPARE_RENDERERS[fmt](result, provenance={"tool": "wstats", "command": "test"})
    check_golden(f"compare.{ {'markdown': 'md'}.get(fmt, fmt) }", text)


def test_table_spec_checks_age_keys(survey: Path, tmp_path: Path) -> None:
    # one-line errors naming the spec key (the house rule for spec mistakes)
    from wstats import AnalysisError

    spec = tmp_path / "bad.toml"
    head = f'data = "{survey.name}"\ncodebook = "cb.toml"\n'
    spec.write_text(head + 'rows = [{ variable = "Y", age_adjust = "A" }]\n', encoding="utf-8")
    with pytest.raises(AnalysisError, match=r"rows\[0\].age_adjust: give both"):
        load_table_spec(spec)
    spec.write_text(head + 'rows = [{ variable = "Y", age_adjust = "A", standard = '
                    '{ source = "x", population = { "1" = 2 } } }]\n', encoding="utf-8")
    with pytest.raises(AnalysisError, match=r"rows\[0\].standard: .*name"):
        load_table_spec(spec)
    spec.write_text(head + 'rows = ["Y"]\n[columns]\np_value = true\n', encoding="utf-8")
    with pytest.raises(AnalysisError, match="columns.p_value"):
        load_table_spec(spec)


def test_analysis_file_runs_a_comparison(survey: Path, tmp_path: Path) -> None:
    # a [[compare]] entry of an analysis file gives what compare() gives
    from wstats.cli.analysis import run_analysis

    doc = tmp_path / "a.toml"
    doc.write_text(
        f'data = "{survey.name}"\ncodebook = "cb.toml"\n'
        '[[compare]]\nvariables = ["Y", "Q"]\nby = "G"\nadjust_p = "holm"\nreasons = true\n'
        'age_adjust = "A"\nstandard = "us2000-adults18"\noutput = "cmp.json"\n',
        encoding="utf-8")
    paths = run_analysis(doc)
    out = json.loads(Path(paths[0]).read_text(encoding="utf-8"))
    lib = compare(_data(survey), DESIGN, ["Y", "Q"], by="G", adjust_p="holm", reasons=True,
                  age_adjust="A", standard="us2000-adults18")
    assert [r["p_adjusted"] for r in out["differences"]] == pytest.approx(
        [r["p_adjusted"] for r in lib.differences.records()], nan_ok=True)
    assert out["settings"]["standard"] == "us2000-adults18"


@pytest.mark.parametrize("command", ["compare", "bounds"])
def test_commands_without_a_dask_path_refuse_the_engine_in_one_line(
        survey: Path, command: str, capsys: pytest.CaptureFixture[str]) -> None:
    # the Dask engine either gives the in-memory numbers or says what it lacks (issue 16)
    args = [command, str(survey), "Q", "--codebook", str(survey.parent / "cb.toml"),
            "--engine", "dask", *(["--by", "G"] if command == "compare" else [])]
    code = main(args)
    err = capsys.readouterr().err
    assert code != 0 and len(err.strip().splitlines()) == 1
    assert f"{command} runs in memory only" in err and "leave out --engine dask" in err


def test_reasons_leave_not_applicable_out_of_the_asked_by_default(tmp_path: Path) -> None:
    # NCES Statistical Standards, Standard 1-3: the denominator excludes rows outside the
    # item's universe; not_applicable is such a reason by default, as in `nonresponse`
    from wstats import nonresponse
    from wstats.decoding.load import read

    rng = np.random.default_rng(5)
    n = 400
    pd.DataFrame({"W": rng.uniform(1, 3, n), "ST": np.repeat([0.0, 1.0], n // 2),
                  "CL": np.tile(np.repeat([0.0, 1.0, 2.0, 3.0], 50), 2),
                  "G": rng.choice([1.0, 2.0], n),
                  "Q": rng.choice([1.0, 2.0, 7.0, 8.0], n, p=[.5, .3, .05, .15])}
                 ).to_csv(tmp_path / "s.csv", index=False)
    (tmp_path / "cb.toml").write_text(
        '[variables.Q]\nkind = "categorical"\n'
        'codes = { 7 = "dont_know", 8 = "not_applicable" }\n', encoding="utf-8")
    ds = read(tmp_path / "s.csv", ["W", "ST", "CL", "G", "Q"], tmp_path / "cb.toml")
    r = compare(ds, DESIGN, ["Q"], by="G", reasons=True)
    nr = nonresponse(ds, DESIGN, ["Q"], by=["G"])
    rate = next(row for row in r.differences.rows if row["statistic"] == "nonresponse-rate")
    got = nr.frame["nonresponse_rate"].to_numpy()
    assert np.isclose(rate["estimate_a"], got[1]) and np.isclose(rate["estimate_b"], got[2])
    # by hand: don't know among the rows whose reason is not not_applicable, weighted
    q, w, g = ds["Q"].reasons, ds["W"].values, ds["G"].values
    asked = q != ds.vocabulary.code("not_applicable")
    dk = q == ds.vocabulary.code("dont_know")
    first = (g == 1) & asked
    assert np.isclose(rate["estimate_a"], w[first & dk].sum() / w[first].sum())
