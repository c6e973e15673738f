"""What a new user tripped over (issue 19, point 5): each fixed, each pinned by a test here.

The survey is invented for these tests (240 rows, 4 strata x 3 PSUs); the checks are about
what the command line says and refuses, not about numbers (those are tested elsewhere).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from wstats.cli.main import main

CODEBOOK = """\
[design]
weight = "W"
strata = "ST"
psu = "CL"

[variables.Q]
kind = "categorical"
codes = { 7 = "dont_know", 9 = "refused" }
labels = { 1 = "Yes", 2 = "No" }

[variables.AGE]
kind = "continuous"
"""


@pytest.fixture()
def survey(tmp_path: Path) -> Path:
    """A small coded survey with a yes/no item, an age, two amounts and a text column."""
    rng = np.random.default_rng(19)
    n = 240
    frame = pd.DataFrame({
        "ST": np.repeat(np.arange(4.0), 60), "CL": np.tile(np.repeat(np.arange(3.0), 20), 4),
        "W": rng.uniform(1, 5, n), "Q": rng.choice([1.0, 2.0, 7.0, 9.0], n, p=[.5, .4, .06, .04]),
        "G": rng.choice([1.0, 2.0], n), "H": rng.choice([1.0, 2.0, 3.0], n),
        "AGE": rng.integers(18, 90, n).astype(float), "X": rng.uniform(0, 10, n),
        "Y": rng.uniform(5, 10, n), "TXT": rng.choice(["north", "south", "east"], n),
    })
    path = tmp_path / "s.csv"
    frame.to_csv(path, index=False)
    (tmp_path / "cb.toml").write_text(CODEBOOK, encoding="utf-8")
    return path


def _run(capsys: pytest.CaptureFixture[str], *argv: object) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, " ".join(err.split())


def test_proportion_of_a_continuous_variable_is_refused(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    code, out, err = _run(capsys, "estimate", survey, "AGE", "--statistics", "proportion",
                          "--codebook", survey.parent / "cb.toml")
    assert code != 0 and out == ""
    assert "proportion of 'AGE'" in err and "--categorical AGE" in err


def test_proportion_of_a_forced_categorical_still_works(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    code, out, _ = _run(capsys, "estimate", survey, "H", "--statistics", "proportion",
                        "--categorical", "H", "--codebook", survey.parent / "cb.toml",
                        "--format", "csv")
    assert code == 0 and out.count("\nH,proportion,") == 3


def test_ratio_alone_needs_no_variable(survey: Path, capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = _run(capsys, "estimate", survey, "--ratio", "X/Y", "--codebook",
                        survey.parent / "cb.toml", "--format", "csv")
    assert code == 0 and "\nX/Y,ratio," in out
    code, _, err = _run(capsys, "estimate", survey, "--codebook", survey.parent / "cb.toml")
    assert code != 0 and "--ratio" in err


def test_singleton_error_names_the_cli_option(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    frame = pd.read_csv(survey)
    frame.loc[frame["ST"] == 0, "CL"] = 0.0  # stratum 0 keeps one PSU
    frame.to_csv(survey, index=False)
    code, _, err = _run(capsys, "estimate", survey, "X", "--codebook", survey.parent / "cb.toml")
    assert code != 0 and "--singleton certainty" in err


def test_codebook_check_catches_a_design_column_that_does_not_exist(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    bad = survey.parent / "bad.toml"
    bad.write_text(CODEBOOK.replace('weight = "W"', 'weight = "WT"'), encoding="utf-8")
    code, out, _ = _run(capsys, "codebook", "check", survey, bad)
    out = " ".join(out.split())
    assert code == 1
    assert "weight = 'WT' is not a column of" in out and "did you mean 'W'" in out
    code, out, _ = _run(capsys, "codebook", "check", survey, survey.parent / "cb.toml")
    assert code == 0 and "OK" in out


def _without(monkeypatch: pytest.MonkeyPatch, module: str) -> None:
    """Make *module* look uninstalled to importlib (an optional package that is absent)."""
    import importlib.util

    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec",
                        lambda name, *a: None if name == module else real(name, *a))


def test_plot_without_matplotlib_is_refused_before_any_output(
    survey: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    _without(monkeypatch, "matplotlib")
    code, out, err = _run(capsys, "estimate", survey, "X", "--codebook",
                          survey.parent / "cb.toml", "--plot", survey.parent / "x.svg")
    assert code == 2 and out == ""  # nothing computed or printed first
    assert "--plot" in err and "pip install 'wstats[plot]'" in err


def test_xlsx_without_openpyxl_says_what_to_install(
    survey: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    _without(monkeypatch, "openpyxl")
    code, out, err = _run(capsys, "estimate", survey, "X", "--codebook",
                          survey.parent / "cb.toml", "-o", survey.parent / "x.xlsx")
    assert code == 2 and out == "" and not (survey.parent / "x.xlsx").exists()
    assert "pip install 'wstats[xlsx]'" in err


def test_each_warning_once_per_command(survey: Path, capsys: pytest.CaptureFixture[str]) -> None:
    frame = pd.read_csv(survey)
    frame.loc[::40, "W"] = 400.0  # a few huge weights: a weighting-effect warning
    frame.to_csv(survey, index=False)
    spec = survey.parent / "t.toml"
    spec.write_text('data = "s.csv"\ncodebook = "cb.toml"\ntitle = "T"\n'
                    'rows = ["Q", "X", "AGE"]\ncolumns = { by = ["G"], total = "All" }\n',
                    encoding="utf-8")
    code, _, err = _run(capsys, "table", spec)
    assert code == 0 and err.count("Kish weighting design effect") == 1


def test_bounds_suppress_what_estimate_suppresses(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    import json

    args = [survey, "Q", "--by", "G", "H", "--codebook", survey.parent / "cb.toml",
            "--format", "json"]
    _, out, _ = _run(capsys, "estimate", *args)
    hidden = [r["suppress"] for r in json.loads(out)["results"]]
    _, out, _ = _run(capsys, "bounds", *args)
    rows = json.loads(out)["results"]
    assert any(hidden) and not all(hidden)  # the fixture has both kinds of cell
    assert [r["suppress"] for r in rows] == hidden
    assert all(r["estimate"] is None and r["lower"] is None for r in rows if r["suppress"])
    _, out, _ = _run(capsys, "bounds", *args[:-2])
    assert out.count("[suppressed]") == sum(hidden) + 1  # the cells and their note
    assert "Design: weight W" in out


def test_where_subpopulation_is_named_on_screen_in_notes_and_methods(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    cb = survey.parent / "cb.toml"
    _, out, _ = _run(capsys, "estimate", survey, "X", "--codebook", cb, "--where", "AGE >= 65")
    assert "subpopulation AGE >= 65 (full design kept)" in " ".join(out.split())
    _, out, _ = _run(capsys, "nonresponse", survey, "Q", "--codebook", cb, "--where", "AGE >= 65")
    assert "subpopulation AGE >= 65" in " ".join(out.split())
    spec = survey.parent / "t.toml"
    spec.write_text('data = "s.csv"\ncodebook = "cb.toml"\ntitle = "T"\nwhere = "AGE >= 65"\n'
                    'rows = ["Q", "X"]\ncolumns = { by = ["G"], total = "All" }\n',
                    encoding="utf-8")
    _, out, _ = _run(capsys, "table", spec)
    flat = " ".join(out.split())
    assert "subpopulation AGE >= 65 (full design kept)" in flat
    assert "Estimates are for the subpopulation AGE >= 65, keeping the full design" in flat


def test_domain_df_rule_shows_its_range(survey: Path, capsys: pytest.CaptureFixture[str]) -> None:
    import json

    cb = survey.parent / "cb.toml"
    _, out, _ = _run(capsys, "estimate", survey, "X", "--codebook", cb, "--by", "G",
                     "--where", "ST <= 1", "--domain-df", "domain", "--format", "json")
    df = sorted({r["df"] for r in json.loads(out)["results"]})
    _, out, _ = _run(capsys, "estimate", survey, "X", "--codebook", cb, "--by", "G",
                     "--where", "ST <= 1", "--domain-df", "domain")
    shown = f"df per domain {df[0]:g}" + (f"–{df[-1]:g}" if df[-1] != df[0] else "")
    assert shown in out and "df 8;" not in out
    _, out, _ = _run(capsys, "estimate", survey, "X", "--codebook", cb, "--by", "G")
    assert "df 8;" in out


def test_every_output_of_run_carries_provenance(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    analysis = survey.parent / "a.toml"
    analysis.write_text(
        'data = "s.csv"\ncodebook = "cb.toml"\n[[estimates]]\nname = "e"\nvariables = ["X"]\n'
        'output = "e.txt"\n[methods]\nestimates = "e"\n'
        'output = ["m.txt", "m.md", "m.tex"]\n'
        '[[plot]]\nkind = "domains"\nfrom = "e"\noutput = "d.svg"\n', encoding="utf-8")
    assert _run(capsys, "run", analysis)[0] == 0
    for name in ("e.txt", "m.txt", "m.md", "m.tex", "d.svg"):
        text = (survey.parent / name).read_text(encoding="utf-8")
        assert "wstats provenance" in text and "s.csv" in text and "sha256" in text, name


def test_categorical_text_column_in_a_csv_works(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    import json

    cb = survey.parent / "txt.toml"
    cb.write_text('[design]\nweight = "W"\n[variables.TXT]\nkind = "categorical"\n'
                  'codes = { "east" = "refused" }\n', encoding="utf-8")
    code, out, err = _run(capsys, "estimate", survey, "TXT", "--codebook", cb, "--format", "json")
    assert code == 0, err
    rows = json.loads(out)["results"]
    frame = pd.read_csv(survey)
    answered = frame[frame["TXT"] != "east"]
    share = answered.loc[answered["TXT"] == "north", "W"].sum() / answered["W"].sum()
    # the weighted share by hand (common practice, no source)
    assert {r["level"] for r in rows} == {"north", "south"}
    north = next(r for r in rows if r["level"] == "north")
    assert north["estimate"] == pytest.approx(share, rel=1e-12)
    assert north["reasons"] == {"refused": int((frame["TXT"] == "east").sum())}
    cb.write_text('[design]\nweight = "W"\n[variables.TXT]\nkind = "continuous"\n',
                  encoding="utf-8")
    code, _, err = _run(capsys, "estimate", survey, "TXT", "--codebook", cb)
    assert code != 0 and 'kind = "categorical"' in err


def test_table_labels_totals_and_separators(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    frame = pd.read_csv(survey)
    frame["BIG"] = frame["X"] * 900.0  # totals in the hundreds of thousands, means below 10,000
    frame.to_csv(survey, index=False)
    spec = survey.parent / "t.toml"
    spec.write_text(
        'data = "s.csv"\ncodebook = "cb.toml"\ntitle = "T"\nrows = [\n'
        '  { variable = "AGE", statistic = "quantile", label = "Age, median" },\n'
        '  { variable = "BIG", statistic = "total", label = "Amount, weighted total",'
        ' decimals = 0 },\n'
        '  { variable = "BIG", statistic = "mean", label = "Amount" },\n'
        '  { variable = "Q", label = "Says yes, %" },\n]\n'
        'columns = { by = ["G"], total = "All" }\n'
        'cells = { mean = "{est} ({se})", total = "{est} ({se})" }\n', encoding="utf-8")
    code, out, err = _run(capsys, "table", spec, "--format", "markdown")
    assert code == 0, err
    rows = {ln.split("|")[1].strip(): ln.split("|")[2:-1] for ln in out.splitlines()
            if ln.startswith("| ")}
    assert "Age, median" in rows and "Age, median, median" not in out
    assert "Amount, weighted total" in rows and "total, total" not in out
    assert "Says yes, %" in out and "%, %" not in out and "Amount, mean" in rows
    for cell in rows["Amount, weighted total"]:  # decimals = 0: no decimals in the SE either
        est, se = cell.strip().rstrip(")").split(" (")
        assert "." not in est and "." not in se and "," in est
    means = [c.strip().split(" (")[0] for c in rows["Amount, mean"]]
    assert all(float(m.replace(",", "")) >= 1000 and "," in m for m in means)


def test_python_and_cli_share_one_vocabulary(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    import json
    import warnings

    import wstats

    cb = survey.parent / "cb.toml"
    design = wstats.Design.from_codebook(cb)
    assert (design.weight, design.strata, design.psu) == ("W", "ST", "CL")
    assert wstats.Design.from_codebook(cb, psu=None, singleton="collapse").psu == "CL"
    data = wstats.read(survey, ["X", "AGE", "W", "ST", "CL"], codebook=cb)
    lib = wstats.estimate(data, design, ["X", "AGE"],
                          statistics={"AGE": ["mean", "quantile"]}).frame
    assert list(zip(lib["variable"], lib["statistic"], strict=True)) == [
        ("X", "mean"), ("AGE", "mean"), ("AGE", "quantile")]
    _, out, _ = _run(capsys, "estimate", survey, "X", "--statistics", "total", "--codebook", cb,
                     "--format", "json")
    new = json.loads(out)["results"]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        _, old_out, err = _run(capsys, "estimate", survey, "X", "--stats", "total",
                               "--codebook", cb, "--format", "json")
    assert [r["statistic"] for r in new] == ["total"]
    assert json.loads(old_out)["results"] == new
    assert "--stats is the old name of --statistics" in err


def test_statistics_per_variable_in_an_analysis_file(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    import json

    analysis = survey.parent / "a.toml"
    analysis.write_text(
        'data = "s.csv"\ncodebook = "cb.toml"\n[[estimates]]\nvariables = ["Q", "AGE"]\n'
        'statistics = { AGE = ["mean", "quantile"] }\nby = ["G", "H"]\nmargins = true\n'
        'output = "e.json"\n', encoding="utf-8")
    assert _run(capsys, "run", analysis)[0] == 0
    rows = json.loads((survey.parent / "e.json").read_text(encoding="utf-8"))["results"]
    assert sorted({(r["variable"], r["statistic"]) for r in rows}) == [
        ("AGE", "mean"), ("AGE", "quantile"), ("Q", "proportion")]
    ages = [r["group"] for r in rows if r["variable"] == "AGE" and r["statistic"] == "mean"]
    # population, 2 + 3 one-way margins, 2 x 3 crossed cells
    assert len(ages) == 1 + 5 + 6 and {"G": 1, "H": None} in ages


def test_margins_add_the_one_way_rows_to_a_crossed_by(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    import json

    cb = survey.parent / "cb.toml"
    common = [survey, "X", "--codebook", cb, "--format", "json", "--standard", "none"]
    _, out, _ = _run(capsys, "estimate", *common, "--by", "G", "H", "--margins")
    rows = json.loads(out)["results"]
    _, out, _ = _run(capsys, "estimate", *common, "--by", "G", "H")
    crossed = json.loads(out)["results"]
    for b in ("G", "H"):
        _, out, _ = _run(capsys, "estimate", *common, "--by", b)
        alone = [r for r in json.loads(out)["results"] if r["group"]]
        other = "H" if b == "G" else "G"
        got = [r for r in rows if r["group"] and r["group"][other] is None]
        assert [(r["group"][b], r["estimate"], r["se"]) for r in got] == [
            (r["group"][b], r["estimate"], r["se"]) for r in alone]
    assert [r for r in rows if r["group"] and None not in r["group"].values()] == crossed[1:]
    assert rows[0] == crossed[0] and len(rows) == len(crossed) + 2 + 3


def test_a_chart_from_the_command_line_carries_provenance(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    chart = survey.parent / "x.svg"
    code, _, err = _run(capsys, "estimate", survey, "X", "--by", "G", "--codebook",
                        survey.parent / "cb.toml", "--plot", chart)
    assert code == 0, err
    text = chart.read_text(encoding="utf-8")
    assert "wstats provenance" in text and "s.csv" in text and "sha256" in text


def test_statistics_for_a_variable_not_estimated_is_refused(survey: Path) -> None:
    import wstats

    cb = survey.parent / "cb.toml"
    data = wstats.read(survey, ["X", "AGE", "W", "ST", "CL"], codebook=cb)
    with pytest.raises(wstats.EstimationError, match="'AGE', which is not among the variables"):
        wstats.estimate(data, wstats.Design.from_codebook(cb), ["X"],
                        statistics={"AGE": "quantile"})
