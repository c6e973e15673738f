"""A second new-user pass over every command (after issues 16, 17 and 19): each fix pinned here.

The small survey and the runner are those of ``test_new_user.py``; the checks are about what
the command line says, accepts and refuses, and that the same thing has the same name in
every command.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from test_new_user import _run, survey

__all__ = ["survey"]  # the fixture, imported so that pytest finds it here


def test_bounds_takes_the_reliability_option_that_estimate_takes(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    args = [survey, "Q", "--by", "G", "H", "--codebook", survey.parent / "cb.toml",
            "--format", "json"]
    hidden = {}
    for command in ("estimate", "bounds"):
        code, out, err = _run(capsys, command, *args, "--reliability", "none")
        assert code == 0, err
        hidden[command] = [r["suppress"] for r in json.loads(out)["results"]]
    assert hidden["bounds"] == hidden["estimate"] == [False] * len(hidden["bounds"])
    # the earlier name still works, and says what it is called now
    code, out, err = _run(capsys, "bounds", *args, "--standard", "none")
    assert code == 0
    assert "--standard is the old name of --reliability" in err
    assert [r["suppress"] for r in json.loads(out)["results"]] == hidden["bounds"]


def test_the_methods_of_run_name_the_substituted_codes_as_a_table_does(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    folder = survey.parent
    with (folder / "cb.toml").open("a", encoding="utf-8") as f:
        f.write('\n[variables.H]\nkind = "count"\ncodes = { 3 = 0 }\n')
    (folder / "a.toml").write_text(
        'data = "s.csv"\ncodebook = "cb.toml"\n[[estimates]]\nname = "e"\n'
        'variables = ["H", "X"]\noutput = "e.json"\n[methods]\nestimates = "e"\n'
        'output = "m.txt"\n[[table]]\nrows = ["H", "X"]\noutput = "t.md"\n', encoding="utf-8")
    code, _, err = _run(capsys, "run", folder / "a.toml")
    assert code == 0, err
    said = "Codes meaning none were counted as the value zero (H: 3 → 0)"
    assert said in (folder / "t.md").read_text(encoding="utf-8")
    assert said in (folder / "m.txt").read_text(encoding="utf-8")


@pytest.mark.parametrize(("argv", "said"), [
    (["estimate", "s.csv", "Q", "--nope"],
     "wstats: error: wstats estimate: unrecognized arguments: --nope "
     "(see 'wstats estimate --help')"),
    (["codebook", "check", "s.csv", "cb.toml", "--nope"],
     "wstats: error: wstats codebook check: unrecognized arguments: --nope "
     "(see 'wstats codebook check --help')"),
    (["--nope"], "wstats: error: unrecognized arguments: --nope (see 'wstats --help')"),
])
def test_an_unknown_option_names_the_command_whose_help_lists_the_options(
    survey: Path, capsys: pytest.CaptureFixture[str], argv: list[str], said: str
) -> None:
    # it used to read "wstats: error: wstats: unrecognized arguments ... (see 'wstats --help')"
    code, _, err = _run(capsys, *argv)
    assert code == 2
    assert err == said


def test_an_interval_with_a_negative_end_is_written_with_to() -> None:
    from wstats.reports.cells import interval

    assert interval("0.12", "0.50") == "0.12–0.50"
    assert interval("-0.10", "-0.02") == "-0.10 to -0.02"  # not "-0.10–-0.02"
    assert interval("-0.10", "0.02") == "-0.10 to 0.02"
    assert interval("", "0.02") == ""
    assert interval("0.12", "0.50", words=True) == "0.12 to 0.50"  # a column of differences


def test_compare_reads_like_estimate_design_line_first_and_a_level_ci_header(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    code, out, err = _run(capsys, "compare", survey, "X", "--by", "G", "--codebook",
                          survey.parent / "cb.toml", "--level", "0.9")
    assert code == 0, err
    lines = out.splitlines()
    assert lines[0] == "Differences between levels of G"
    assert lines[1].startswith("Design: weight W, 4 strata, 12 PSUs")
    assert out.count("Design: weight W") == 1
    header = next(line for line in lines if "B - A" in line and "SE" in line)
    assert "90% CI" in header and "Interval" not in header
    row = lines[lines.index(header) + 2]
    assert " to " in row and "–" not in row  # one style in the column of differences
    # only the tests that were made are explained
    notes = " ".join(out.split())
    assert "Wald F: all group means" in notes
    assert "Rao-Scott" not in notes and "quadratic t" not in notes


def test_the_demo_names_the_period_files_and_its_hint_fits_80_columns(tmp_path: Path) -> None:
    from conftest import run_wstats

    done = run_wstats("demo", "--rows", "3000", "--periods", "2", cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    tail = done.stdout.splitlines()[-3:]
    assert tail[0] == "Also 2 periods of the survey to pool (period1.xpt, period2.xpt):"
    assert tail[1].strip() == "wstats estimate 'wstats-demo/period*.xpt' sl_hours --by _file \\"
    assert max(len(line) for line in tail) <= 80  # the default folder name


def test_a_table_says_why_its_quantile_and_total_rows_have_no_p_value(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    spec = survey.parent / "t.toml"
    spec.write_text(
        'data = "s.csv"\ncodebook = "cb.toml"\nrows = ["X", { variable = "Y", statistic = '
        '"quantile" }, { variable = "AGE", statistic = "total" }]\n'
        '[columns]\nby = ["G"]\np_value = true\n', encoding="utf-8")
    code, out, err = _run(capsys, "table", spec)
    assert code == 0, err
    assert "same Wald F on the adjusted values; totals and quantiles: no test." in " ".join(
        out.split())
    spec.write_text(spec.read_text(encoding="utf-8").replace(
        ', { variable = "AGE", statistic = "total" }', ""), encoding="utf-8")
    out = _run(capsys, "table", spec)[1]
    assert "adjusted values; quantiles: no test." in " ".join(out.split())


def test_bounds_refuse_a_count_as_estimate_does_unless_named_categorical(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    args = [survey, "AGE", "--codebook", survey.parent / "cb.toml"]
    for command in ("estimate", "bounds"):
        extra = ["--statistics", "proportion"] if command == "estimate" else []
        code, out, err = _run(capsys, command, *args, *extra)
        assert code != 0 and out == "", command  # bounds used to print 72 ages
        assert "a proportion of 'AGE' needs a categorical variable" in err
        assert "--categorical AGE" in err
    code, out, err = _run(capsys, "bounds", *args, "--categorical", "AGE", "--format", "json")
    assert code == 0, err
    assert len({r["level"] for r in json.loads(out)["results"]}) > 10
    (survey.parent / "a.toml").write_text(
        'data = "s.csv"\ncodebook = "cb.toml"\n[[bounds]]\nvariables = ["AGE"]\n'
        'categorical = ["AGE"]\noutput = "b.csv"\n', encoding="utf-8")
    assert _run(capsys, "run", survey.parent / "a.toml")[0] == 0


def test_bounds_from_python_refuse_a_continuous_variable(survey: Path) -> None:
    import wstats
    from wstats.errors import EstimationError

    data = wstats.read(survey, codebook=survey.parent / "cb.toml")
    with pytest.raises(EstimationError, match="needs a categorical variable"):
        wstats.bounds(data, wstats.Design("W"), ["X"])
    assert len(wstats.bounds(data, wstats.Design("W"), ["Q"])) == 2


def test_compare_reasons_and_nonresponse_agree_on_who_was_asked(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # not_applicable is outside the item's universe by default (issue 19): compare --reasons
    # used to count it as nonresponse, so its rates disagreed with the nonresponse command's
    with (survey.parent / "cb.toml").open("a", encoding="utf-8") as f:
        f.write('\n[variables.H]\nkind = "categorical"\ncodes = { 3 = "not_applicable" }\n')
    args = [survey, "Q", "H", "--codebook", survey.parent / "cb.toml", "--format", "json"]
    code, out, err = _run(capsys, "nonresponse", *args, "--by", "G")
    assert code == 0, err
    rates = {(r["variable"], f'{float((r.get("group") or {}).get("G") or 0):g}'):
             r["nonresponse_rate"] for r in json.loads(out)["results"]}
    code, out, err = _run(capsys, "compare", *args, "--by", "G", "--reasons")
    assert code == 0, err
    rows = [r for r in json.loads(out)["differences"] if r["statistic"] == "nonresponse-rate"]
    assert {r["variable"] for r in rows} == {"Q", "H"}
    for r in rows:
        for side in ("a", "b"):
            asked = rates[(r["variable"], f'{float(r[f"group_{side}"]):g}')]
            assert r[f"estimate_{side}"] == pytest.approx(asked, abs=1e-12)


def test_only_estimate_help_speaks_of_standard_as_a_reliability_standard(
    capsys: pytest.CaptureFixture[str]
) -> None:
    from wstats.cli.main import main

    helps = {}
    for command in ("estimate", "compare"):
        with pytest.raises(SystemExit):
            main([command, "--help"])
        helps[command] = " ".join(capsys.readouterr().out.split())
    assert "without --age-adjust: the reliability standard" in helps["estimate"]
    assert "reliability standard" not in helps["compare"]  # compare has none to choose


@pytest.mark.parametrize("argv", [["look", "s*.csv", "Q"], ["columns", "s*.csv"],
                                  ["convert", "s*.csv", "out.parquet"]])
def test_a_pattern_given_to_a_one_file_command_says_which_commands_pool(
    survey: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch,
    argv: list[str]
) -> None:
    monkeypatch.chdir(survey.parent)
    code, _, err = _run(capsys, *argv)
    assert code != 0
    assert err == ("wstats: error: data file 's*.csv' does not exist: a pattern pools several "
                   "files only in estimate, compare, nonresponse, bounds, table and run; name "
                   "one file here")


@pytest.mark.parametrize(("options", "said"), [
    (["--quantiles", "0.9"], "wstats: error: --quantiles 0.9 needs --statistics quantile "
     "(e.g. --statistics quantile --quantiles 0.9)"),  # a mean was shown instead
    (["--statistics", "quantile", "--quantiles", "abc"],  # a ValueError traceback
     "wstats: error: --quantiles 'abc' is not a comma list of probabilities between 0 and 1 "
     "(e.g. --quantiles 0.25,0.5,0.75)"),
])
def test_quantile_options_that_would_be_ignored_or_crash_are_refused(
    survey: Path, capsys: pytest.CaptureFixture[str], options: list[str], said: str
) -> None:
    code, out, err = _run(capsys, "estimate", survey, "X", "--codebook",
                          survey.parent / "cb.toml", *options)
    assert (code, out, err) == (2, "", said)


def test_quantiles_given_with_the_statistic_still_work(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    code, out, err = _run(capsys, "estimate", survey, "X", "--codebook",
                          survey.parent / "cb.toml", "--statistics", "quantile",
                          "--quantiles", "0.25,0.75", "--format", "json")
    assert code == 0, err
    assert [r["p"] for r in json.loads(out)["results"]] == [0.25, 0.75]


@pytest.mark.parametrize("by", [[], ["G"]])
def test_margins_without_a_crossed_by_is_refused_not_ignored(
    survey: Path, capsys: pytest.CaptureFixture[str], by: list[str]
) -> None:
    by_args = ["--by", *by] if by else []
    code, out, err = _run(capsys, "estimate", survey, "X", "--codebook",
                          survey.parent / "cb.toml", *by_args, "--margins")
    assert code == 2 and out == ""
    assert err.startswith("wstats: error: --margins adds each by-variable alone to a crossed")


@pytest.mark.parametrize("command", ["compare", "bounds"])
def test_the_dask_engine_on_an_in_memory_command_says_where_it_runs(
    survey: Path, capsys: pytest.CaptureFixture[str], command: str
) -> None:
    code, _, err = _run(capsys, command, survey, "Q", "--by", "G", "--engine", "dask")
    assert code == 2 and len(err.strip().splitlines()) == 1
    assert err.startswith(f"wstats: error: {command} runs in memory only (")
    assert err.strip().endswith("the Dask engine serves estimate and nonresponse "
                                "(docs/scale.md): leave out --engine dask")


@pytest.mark.parametrize("command", ["estimate", "nonresponse", "compare", "bounds"])
def test_screens_written_to_a_pipe_have_no_padding_at_line_ends(
    survey: Path, capsys: pytest.CaptureFixture[str], command: str
) -> None:
    code, out, err = _run(capsys, command, survey, "Q", "--by", "G", "--codebook",
                          survey.parent / "cb.toml")
    assert code == 0, err
    assert [line for line in out.splitlines() if line != line.rstrip()] == []


def test_an_estimate_block_writes_its_intervals_in_one_style() -> None:
    from wstats.estimation.results import EstimateTable
    from wstats.render._grid import estimate_grid

    rows = {"variable": ["d", "d"], "statistic": ["mean", "mean"], "level": [None, None],
            "p": [None, None], "g": [1.0, 2.0], "estimate": [0.5, 0.1],
            "se": [0.1, 0.1], "ci_low": [0.3, -0.1], "ci_high": [0.7, 0.3], "df": [9.0, 9.0],
            "cv": [0.2, 1.0], "deff": [1.0, 1.0], "deff_weight": [1.0, 1.0],
            "n_eff": [50.0, 50.0], "n": [50, 50], "weighted_n": [50.0, 50.0],
            "reasons": [{}, {}], "flags": [(), ()], "suppress": [False, False]}
    import pandas as pd

    table = EstimateTable.from_frame(pd.DataFrame(rows), by=["g"], level=0.95,
                                     design={"weight": "w"}, settings={})
    cis = [r[3] for r in estimate_grid(table).rows if len(r) > 1]
    assert cis == ["0.3 to 0.7", "-0.1 to 0.3"]  # not "0.3–0.7" above "-0.1 to 0.3"


def test_compare_names_its_subpopulation_as_the_other_commands_do(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    args = [survey, "X", "--codebook", survey.parent / "cb.toml", "--where", "AGE >= 40"]
    code, out, err = _run(capsys, "compare", *args, "--by", "G")
    assert code == 0, err
    assert "subpopulation AGE >= 40 (full design kept)" in " ".join(out.split())
    code, out, err = _run(capsys, "compare", *args, "--by", "G", "--format", "json")
    assert json.loads(out)["settings"]["where"] == "AGE >= 40"


def test_a_long_group_name_stays_over_its_own_columns() -> None:
    from wstats.render._grid import Column, Grid, Span
    from wstats.render._panels import _span_line

    g = Grid("T", (Column("label", "", "l"), Column("all", "All"), Column("m", "Male")),
             (("a", "1.0", "2.0"),), ("data",), spans=(Span("Sex recorded at interview", 2, 3),))
    lines = _span_line(g, [0, 1, 2], {0: 10, 1: 10, 2: 10}).plain.split("\n")
    male = 10 + 2 + 10 + 2  # where the Male column starts
    # it used to reach left over the All column: "Sex recorded at interview" in one line
    assert all(line[:male].strip() == "" for line in lines)
    assert " ".join(line.strip() for line in lines) == "Sex recorded at interview"


def test_a_long_value_label_wraps_instead_of_splitting_the_table_at_80_columns(
    survey: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    cb = survey.parent / "cb.toml"
    cb.write_text(cb.read_text(encoding="utf-8").replace(
        'labels = { 1 = "Yes", 2 = "No" }',
        'labels = { 1 = "Yes", 2 = "Never drives or rides in a car at all" }'), encoding="utf-8")
    monkeypatch.setenv("COLUMNS", "80")
    code, out, err = _run(capsys, "estimate", survey, "Q", "--codebook", cb)
    assert code == 0, err
    lines = out.splitlines()
    assert max(len(line) for line in lines) <= 80
    # one header line with every column; it used to be two blocks, the second "Not valid" only
    headers = [line for line in lines if line.startswith("Level")]
    assert len(headers) == 1 and headers[0].split()[-2:] == ["Not", "valid"]


@pytest.mark.parametrize("command", ["estimate", "bounds"])
def test_an_empty_domain_reads_n_a_not_suppressed_for_unreliability(
    survey: Path, capsys: pytest.CaptureFixture[str], command: str
) -> None:
    code, out, err = _run(capsys, command, survey, "Q", "--codebook", survey.parent / "cb.toml",
                          "--where", "AGE > 200", "--reliability", "none")
    assert code == 0, err
    # there is nothing to hide: it said "[suppressed] ... does not meet the reliability
    # standard" even with --reliability none
    assert "[suppressed]" not in out and "n/a ‡" in out
    assert "rule empty: no records in the domain" in " ".join(out.split())


def test_a_histogram_of_whole_numbers_has_whole_bins_with_separators() -> None:
    import numpy as np

    from wstats.reports.look_parts import _round_edges

    # day counts 0..30 in at most 12 bins: width 5, not 2.5 (a bin '2.5 to 5' holds 3 and 4)
    assert _round_edges(0.0, 30.0, 12, whole=True).tolist() == [0, 5, 10, 15, 20, 25, 30]
    assert np.allclose(np.diff(_round_edges(0.0, 30.0, 12)), 2.5)  # measurements keep 2.5
    assert _round_edges(0.0, 3.0, 12, whole=True).tolist() == [0, 1, 2, 3]


def test_look_bins_of_large_values_carry_thousands_separators(tmp_path: Path) -> None:
    import numpy as np
    import pandas as pd

    import wstats

    frame = pd.DataFrame({"amount": np.arange(0.0, 20000.0, 7.0)})
    frame.to_csv(tmp_path / "a.csv", index=False)
    looked = wstats.look(tmp_path / "a.csv", ["amount"])
    labels = [b.text for b in looked.variables[0].bars]
    assert labels[-1] == "18,000 to 20,000"  # as the summary writes "max 19,999"


def test_a_three_level_trend_is_explained_without_a_quadratic_contrast(
    survey: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    code, out, err = _run(capsys, "compare", survey, "X", "--by", "H", "--trend", "--codebook",
                          survey.parent / "cb.toml")
    assert code == 0, err
    text = " ".join(out.split())
    assert "quadratic t" not in text  # three levels: a linear contrast only
    assert "linear t: orthogonal-polynomial trend contrast across the ordered levels." in text
