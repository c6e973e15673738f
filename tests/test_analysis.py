"""Analysis files: one read, every output, byte-identical re-runs, all-or-nothing errors."""

from __future__ import annotations

import json
import re
import textwrap
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import wstats.decoding.load
import wstats.readers.output
from wstats.cli.analysis import run_analysis
from wstats.cli.analysis_file import load_analysis
from wstats.decoding.load import read
from wstats.design.declared import Design
from wstats.errors import AnalysisError, ExpressionError, OutputError
from wstats.estimation.estimate import estimate
from wstats.reports.nonresponse import nonresponse

CODEBOOK = """\
[design]
weight = "W"
strata = "S"
psu = "P"

[variables.Y]
kind = "categorical"
codes = { 7 = "dont_know", 9 = "refused" }
labels = { 1 = "Yes", 2 = "No" }

[variables.G]
kind = "categorical"
labels = { 1 = "North", 2 = "East", 3 = "West" }

[variables.X]
kind = "count"
codes = { 77 = "dont_know", 99 = "refused" }
"""

FULL = """\
data = "s.csv"
codebook = "cb.toml"

[defaults]
level = 0.9

[[estimates]]
name = "main"
variables = ["Y", "X"]
by = ["G"]
output = ["est.json", "est.md"]

[[nonresponse]]
variables = ["Y", "X"]
by = ["G"]
sort_worst = true
output = ["nr.md", "nr.json", "nr.csv"]

[[bounds]]
variables = ["Y"]
output = ["b.json", "b.csv"]

[[table]]
title = "Table 1"
rows = ["Y", "X"]
columns = { by = ["G"] }
output = ["t.md", "t.tex", "t.html", "t.csv"]

[methods]
output = ["m.txt", "m.md", "m.tex"]

[[plot]]
kind = "domains"
output = "d.svg"

[[plot]]
kind = "reasons"
output = "r.png"
"""
OUTPUTS = ["est.json", "est.md", "nr.md", "nr.json", "nr.csv", "b.json", "b.csv", "t.md",
           "t.tex", "t.html", "t.csv", "m.txt", "m.md", "m.tex", "d.svg", "r.png"]


def _write_data(folder: Path) -> None:
    """Write a small stratified survey (CSV) and its codebook into *folder*."""
    rng = np.random.default_rng(1)
    n = 200
    pd.DataFrame({
        "W": rng.uniform(1, 4, n).round(3),
        "S": np.repeat([1, 2, 3, 4], n // 4),
        "P": np.tile(np.repeat([1, 2, 3, 4, 5], n // 20), 4),
        "G": rng.integers(1, 4, n),
        "Y": rng.choice([1, 2, 1, 2, 7, 9, np.nan], n),
        "X": np.where(rng.random(n) < 0.1, 77, rng.integers(1, 20, n)),
        "UNUSED": rng.normal(size=n),
    }).to_csv(folder / "s.csv", index=False)
    (folder / "cb.toml").write_text(CODEBOOK)


@pytest.fixture
def folder(tmp_path: Path) -> Path:
    _write_data(tmp_path)
    return tmp_path


def _analysis(folder: Path, text: str, name: str = "a.toml") -> Path:
    path = folder / name
    path.write_text(textwrap.dedent(text))
    return path


def _masked(data: bytes) -> bytes:
    """Return *data* with the provenance time stamp blanked (the one part allowed to change)."""
    return re.sub(rb"created_utc[^\n]*", b"created_utc", data)


def test_run_writes_everything_and_reruns_byte_for_byte(folder: Path,
                                                        monkeypatch: pytest.MonkeyPatch) -> None:
    _analysis(folder, FULL)
    monkeypatch.chdir(folder.parent)  # paths are relative to the analysis file, not the cwd
    path = Path(folder.name) / "a.toml"
    written = run_analysis(path)
    assert all(p.parent == Path(folder.name) for p in written)
    assert [p.name for p in written] == OUTPUTS
    first = {p.name: p.read_bytes() for p in written}
    assert b"created_utc" in first["est.json"]
    again = run_analysis(path, overwrite=True)
    for p in again:
        assert _masked(p.read_bytes()) == _masked(first[p.name]), p.name


def test_outputs_hold_what_the_library_computes(folder: Path) -> None:
    run_analysis(_analysis(folder, FULL))
    data = read(folder / "s.csv", ["Y", "X", "G", "W", "S", "P"], folder / "cb.toml")
    design = Design("W", strata="S", psu="P")
    est = estimate(data, design, ["Y", "X"], by=["G"], level=0.9)
    got = json.loads((folder / "est.json").read_text())["results"]
    shown = ~est.frame["suppress"].to_numpy()  # suppressed estimates are written as null
    assert [r["estimate"] is None for r in got] == list(~shown)
    assert [r["estimate"] for r in got if r["estimate"] is not None] == pytest.approx(
        list(est.frame["estimate"][shown]))
    nr = nonresponse(data, design, ["Y", "X"], by=["G"], sort_worst=True)
    nr_json = json.loads((folder / "nr.json").read_text())["results"]
    assert [r["nonresponse_rate"] for r in nr_json] == pytest.approx(
        list(nr.frame["nonresponse_rate"]))
    assert nr_json[0]["variable"] == "Y"  # Y has the higher rate, so comes first
    bounds = json.loads((folder / "b.json").read_text())
    assert bounds["settings"]["reasons"] == ["dont_know", "refused"]
    assert all(r["lower"] <= r["estimate"] <= r["upper"] for r in bounds["results"])
    assert "weighted by W" in (folder / "m.txt").read_text()
    assert (folder / "m.tex").read_text().endswith("\n")


@pytest.fixture
def read_calls(monkeypatch: pytest.MonkeyPatch) -> list[list[str]]:
    """Record the columns asked of every ``wstats.decoding.load.read`` call (it still reads)."""
    calls: list[list[str]] = []
    real = wstats.decoding.load.read

    def spy(path, columns=None, **kw):  # type: ignore[no-untyped-def]
        calls.append(list(columns))
        return real(path, columns, **kw)

    monkeypatch.setattr(wstats.decoding.load, "read", spy)
    return calls


def test_data_is_read_once_with_only_the_needed_columns(folder: Path,
                                                        read_calls: list[list[str]]) -> None:
    text = FULL.split("[[table]]")[0] + "[[plot]]\nkind = \"reasons\"\noutput = \"r.svg\"\n"
    run_analysis(_analysis(folder, text))
    assert len(read_calls) == 1
    assert sorted(read_calls[0]) == ["G", "P", "S", "W", "X", "Y"]


@pytest.mark.parametrize(("text", "message"), [
    ('[[estimates]]\nvariables = ["YY"]\noutput = "e.json"\n',
     r"\[\[estimates\]\] #1 variables: variable 'YY' is neither a column of s\.csv.*did you "
     r"mean 'Y'\?"),
    ('[[nonresponse]]\nvariables = ["Y"]\nwhere = "GG == 1"\noutput = "n.json"\n',
     r"\[\[nonresponse\]\] #1 where: variable 'GG'.*did you mean 'G'"),
    ('[[estimates]]\nvariables = ["Y"]\noutput = "e.json"\nformat = "pdf"\n',
     r"\[\[estimates\]\] #1 format: 'pdf' is not one of .*markdown.*json"),
    ('[[estimates]]\nvariables = ["Y"]\noutput = "e.xyz"\n',
     r"output\[0\]: cannot tell the format of 'e\.xyz'"),
    ('[[estimates]]\nvariables = ["Y"]\nstatistic = "mean"\noutput = "e.json"\n',
     r"\[\[estimates\]\] #1 statistic: unknown key; allowed: .*did you mean 'statistics'"),
    ('[[estimates]]\nvariables = ["Y"]\noutput = ["e.json", "e.json"]\n',
     r"output\[1\]: output .*e\.json is also written by \[\[estimates\]\] #1 output\[0\]"),
    ('[[methods]]\noutput = "m.txt"\n', r"methods: must be a table"),
    ('[methods]\nestimates = "nope"\noutput = "m.txt"\n',
     r"\[methods\] estimates: no \[\[estimates\]\] entry named 'nope'; add a"),
    ('[[estimates]]\nname = "main"\nvariables = ["Y"]\noutput = "e.json"\n[[plot]]\n'
     'kind = "domains"\nfrom = "mian"\noutput = "p.svg"\n',
     r"\[\[plot\]\] #1 from: no \[\[estimates\]\] entry named 'mian'; entries: main; did "
     r"you mean 'main'\?"),
    ('[[plot]]\nkind = "bars"\noutput = "p.svg"\n',
     r"\[\[plot\]\] #1 kind: 'bars' is not one of domains, reasons"),
    ('[[bounds]]\nvariables = ["Y"]\noutput = "b.tex"\n', r"cannot tell the format of 'b\.tex'"),
    ('[[estimates]]\nvariables = ["Y"]\nlevel = 95\noutput = "e.json"\n',
     r"level: must be a number between 0 and 1"),
    ('', r"asks for no output"),
    ('[[bounds]]\nname = "b"\nvariables = ["Y"]\noutput = "b.csv"\n'
     '[[bounds]]\nname = "b"\nvariables = ["Y"]\noutput = "c.csv"\n',
     r"\[\[bounds\]\] #2 name: 'b' names two \[\[bounds\]\] entries"),
])
def test_bad_analysis_files_name_the_key(folder: Path, text: str, message: str) -> None:
    path = _analysis(folder, 'data = "s.csv"\ncodebook = "cb.toml"\n' + text)
    before = sorted(p.name for p in folder.iterdir())
    with pytest.raises((AnalysisError, ExpressionError), match=message) as info:
        run_analysis(path)
    assert str(path) in str(info.value) and "\n" not in str(info.value)
    assert sorted(p.name for p in folder.iterdir()) == before  # nothing written


def test_file_level_errors(folder: Path) -> None:
    with pytest.raises(AnalysisError, match=r"not valid TOML"):
        run_analysis(_analysis(folder, "data = [\n"))
    with pytest.raises(AnalysisError, match=r"data: file .*nope\.csv does not exist; paths are "
                       r"relative to the analysis file's folder"):
        run_analysis(_analysis(folder, 'data = "nope.csv"\n[[estimates]]\nvariables = ["Y"]\n'
                               'output = "e.json"\n'))
    with pytest.raises(AnalysisError, match=r"design\.weight: no weight column given"):
        run_analysis(_analysis(folder, 'data = "s.csv"\n[[estimates]]\nvariables = ["Y"]\n'
                               'output = "e.json"\n'))
    with pytest.raises(AnalysisError, match=r"design\.wieght: unknown design key.*did you mean "
                       r"'weight'"):
        run_analysis(_analysis(folder, 'data = "s.csv"\n[design]\nwieght = "W"\n'
                               '[[estimates]]\nvariables = ["Y"]\noutput = "e.json"\n'))
    with pytest.raises(AnalysisError, match=r"cannot be read"):
        load_analysis(folder / "missing.toml")


def test_an_existing_output_stops_the_run_before_anything_is_written(folder: Path) -> None:
    path = _analysis(folder, FULL)
    (folder / "t.tex").write_text("mine")
    with pytest.raises(OutputError, match=r"output '.*t\.tex' exists; pass --overwrite"):
        run_analysis(path)
    assert (folder / "t.tex").read_text() == "mine"
    assert not any((folder / name).exists() for name in OUTPUTS if name != "t.tex")


@pytest.mark.parametrize("victim", ["s.csv", "cb.toml", "a.toml"])
def test_an_output_onto_an_input_is_refused_even_with_overwrite(folder: Path,
                                                                victim: str) -> None:
    path = _analysis(folder, FULL.replace('output = ["est.json", "est.md"]',
                                          f'output = ["est.json", "{victim}"]\n'
                                          'format = ["json", "markdown"]'))
    before = {n: (folder / n).read_bytes() for n in ("s.csv", "cb.toml", "a.toml")}
    with pytest.raises(OutputError, match=rf"output .*{victim} is an input of the analysis"):
        run_analysis(path, overwrite=True)
    assert {n: (folder / n).read_bytes() for n in before} == before
    assert not any((folder / name).exists() for name in OUTPUTS)


def test_a_missing_output_folder_is_refused_up_front(folder: Path) -> None:
    path = _analysis(folder, FULL.replace('output = "d.svg"', 'output = "plots/d.svg"'))
    with pytest.raises(OutputError, match=r"folder '.*plots' for output 'd\.svg' does not exist"):
        run_analysis(path)
    assert not any((folder / name).exists() for name in OUTPUTS)


def test_a_failure_while_writing_removes_what_the_run_created(
        folder: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    real = wstats.readers.output.atomic_write
    count = {"n": 0}

    def failing(path, data, overwrite=False):  # type: ignore[no-untyped-def]
        count["n"] += 1
        if count["n"] == 4:
            raise OutputError(f"no space left on the device while writing '{path}'")
        real(path, data, overwrite)

    monkeypatch.setattr(wstats.readers.output, "atomic_write", failing)
    with pytest.raises(OutputError, match="no space left"):
        run_analysis(_analysis(folder, FULL))
    assert count["n"] == 4
    assert not any((folder / name).exists() for name in OUTPUTS)


def test_optional_chart_is_skipped_without_matplotlib(folder: Path,
                                                      monkeypatch: pytest.MonkeyPatch) -> None:
    import importlib.util

    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec",
                        lambda name, *a: None if name == "matplotlib" else real(name, *a))
    base = 'data = "s.csv"\ncodebook = "cb.toml"\n[[estimates]]\nvariables = ["X"]\n' \
           'output = "e.json"\n[[plot]]\nkind = "domains"\noutput = "d.svg"\n'
    with pytest.raises(AnalysisError, match=r"\[\[plot\]\] #1: charts need matplotlib.*"
                       r"pip install 'wstats\[plot\]'"):
        run_analysis(_analysis(folder, base))
    written = run_analysis(_analysis(folder, base + "required = false\n", "b.toml"))
    assert [p.name for p in written] == ["e.json"]


def test_table_spec_file_and_its_own_outputs(folder: Path) -> None:
    (folder / "spec.toml").write_text(textwrap.dedent("""\
        title = "From a spec file"
        data = "s.csv"
        codebook = "cb.toml"
        rows = ["Y"]
        [output]
        files = ["spec.md"]
        """))
    text = 'data = "s.csv"\ncodebook = "cb.toml"\n[[table]]\nspec = "spec.toml"\n'
    assert [p.name for p in run_analysis(_analysis(folder, text))] == ["spec.md"]
    assert "From a spec file" in (folder / "spec.md").read_text()
    with pytest.raises(AnalysisError, match=r"\[\[table\]\] #1 rows: give either spec"):
        run_analysis(_analysis(folder, text + 'rows = ["Y"]\n', "b.toml"))


def test_the_demo_analysis_file_runs(tmp_path: Path) -> None:
    from demo.write import write_demo

    paths = write_demo(tmp_path, rows=1200, formats=("xpt",))
    written = run_analysis(paths["analysis"])
    names = [p.name for p in written]
    for name in ("tbchs_estimates.json", "tbchs_estimates.md", "tbchs_nonresponse.md",
                 "tbchs_table1.md", "tbchs_table1.tex", "tbchs_table1.html",
                 "tbchs_table1.csv", "tbchs_methods.txt", "tbchs_domains.svg",
                 "tbchs_reasons.svg"):
        assert name in names
    results = json.loads((tmp_path / "tbchs_estimates.json").read_text())["results"]
    assert {r["variable"] for r in results} == {"hs_rate", "ac_cover", "sl_hours", "hs_mood",
                                                "fd_fruit", "bd_bmi"}


def test_replicate_glob_is_matched_against_the_file(folder: Path,
                                                    read_calls: list[list[str]]) -> None:
    # Stratum-deletion jackknife replicates built here (Wolter 2007, ch. 4, from memory):
    # the glob must read exactly RW1..RW4; a glob matching nothing names itself.
    frame = pd.read_csv(folder / "s.csv")
    for r in range(1, 5):
        frame[f"RW{r}"] = frame["W"] * np.where(frame["S"] == r, 0.0, 4 / 3)
    frame.to_csv(folder / "s.csv", index=False)
    body = ('data = "s.csv"\n[design]\nweight = "W"\nreplicates = "{}"\n'
            'replicate_method = "jackknife"\n[[estimates]]\nvariables = ["X"]\noutput = "{}"\n')
    run_analysis(_analysis(folder, body.format("RW*", "e.json"), "r.toml"))
    assert sorted(c for c in read_calls[0] if c.startswith("RW")) == ["RW1", "RW2", "RW3",
                                                                       "RW4"]
    with pytest.raises(wstats.errors.DesignError, match=r"replicate glob 'QQ\*' matches no"):
        run_analysis(_analysis(folder, body.format("QQ*", "f.json"), "q.toml"))
