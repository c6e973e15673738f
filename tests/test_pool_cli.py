"""Several files on the command line: a quoted glob, several paths, --pool, --shared-psus.

The pooled demo (:func:`demo.periods.write_periods`) writes independent periods of the
fictional TBCHS survey whose stratum and cluster codes repeat from file to file.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from conftest import run_wstats
from demo.periods import write_periods


@pytest.fixture(scope="module")
def periods(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = tmp_path_factory.mktemp("periods")
    write_periods(folder, periods=3, rows=3000)
    return folder


def _json(*args: str, cwd: Path) -> dict:  # type: ignore[type-arg]
    done = run_wstats(*args, "--format", "json", cwd=cwd)
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout)  # type: ignore[no-any-return]


def test_a_quoted_glob_pools_the_periods_with_file_as_a_by_variable(periods: Path) -> None:
    out = _json("estimate", "period*.xpt", "sl_hours", "--by", "_file", "--codebook",
                "tbchs_codebook.toml", cwd=periods)
    rows = out["results"]
    assert [r["group"] and r["group"]["_file"] for r in rows] == [
        None, "period1", "period2", "period3"]
    pool = out["provenance"]["design"]["pool"]
    assert pool["rule"] == "equal"
    assert pool["factors"] == pytest.approx({"period1": 1 / 3, "period2": 1 / 3,
                                             "period3": 1 / 3})
    assert pool["strata"] == "distinct per file"
    assert [i["name"] for i in out["provenance"]["inputs"]][:3] == [
        "period1.xpt", "period2.xpt", "period3.xpt"]


def test_several_paths_before_the_variables(periods: Path) -> None:
    two = _json("estimate", "period1.xpt", "period3.xpt", "sl_hours", "--by", "_file",
                "--codebook", "tbchs_codebook.toml", "--pool", "rows", cwd=periods)
    assert [r["group"] and r["group"]["_file"] for r in two["results"]] == [
        None, "period1", "period3"]
    assert two["provenance"]["design"]["pool"]["rule"] == "rows"
    # design df of independent files add up (REFERENCES §16): the sum of each file's df
    one = [_json("estimate", f"period{k}.xpt", "sl_hours", "--codebook", "tbchs_codebook.toml",
                 cwd=periods)["results"][0]["df"] for k in (1, 3)]
    assert two["results"][0]["df"] == sum(one)


def test_shared_psus_and_factors_are_reported(periods: Path) -> None:
    out = _json("estimate", "period*.xpt", "hs_rate", "--codebook", "tbchs_codebook.toml",
                "--shared-psus", "--pool", "0.5,0.25,0.25", cwd=periods)
    pool = out["provenance"]["design"]["pool"]
    assert pool["strata"] == "shared across files"
    assert pool["factors"]["period1"] == 0.5


def test_pool_mistakes_are_one_line(periods: Path) -> None:
    done = run_wstats("estimate", "period*.xpt", "sl_hours", "--codebook",
                      "tbchs_codebook.toml", "--pool", "0.5,0.4", cwd=periods)
    assert done.returncode == 1
    assert done.stderr.strip() == ("wstats: error: pool factors 0.5, 0.4 sum to 0.9, not 1; "
                                   "rescale them (e.g. 0.5,0.25,0.25)")
    done = run_wstats("estimate", "cycle*.xpt", "sl_hours", cwd=periods)
    assert "'cycle*.xpt' matches no file" in done.stderr


def test_nonresponse_and_bounds_take_several_files(periods: Path) -> None:
    nr = _json("nonresponse", "period*.xpt", "sl_hours", "--by", "_file", "--codebook",
               "tbchs_codebook.toml", cwd=periods)
    assert len(nr["results"]) == 4
    done = run_wstats("bounds", "period1.xpt", "period2.xpt", "hs_rate", "--codebook",
                      "tbchs_codebook.toml", "--format", "csv", cwd=periods)
    assert done.returncode == 0, done.stderr


def _write(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


def test_an_analysis_file_pools_a_list_and_runs_on_dask(periods: Path, tmp_path: Path) -> None:
    pytest.importorskip("distributed")
    head = ('data = ["{0}/period1.xpt", "{0}/period2.xpt"]\ncodebook = "{0}/tbchs_codebook.toml"\n'
            .format(periods))
    job = ('[[estimates]]\nvariables = ["sl_hours", "hs_rate"]\nby = ["_file"]\n'
           'output = "{}.json"\n')
    memory = _write(tmp_path / "memory.toml", head + job.format("memory"))
    dask = _write(tmp_path / "dask.toml", head + 'engine = "dask"\n' + job.format("dask"))
    for path in (memory, dask):
        done = run_wstats("run", path.name, cwd=tmp_path)
        assert done.returncode == 0, done.stderr
    a = json.loads((tmp_path / "memory.json").read_text())
    b = json.loads((tmp_path / "dask.json").read_text())
    assert a["provenance"]["design"]["pool"]["files"] == [
        str(periods / "period1.xpt"), str(periods / "period2.xpt")]
    assert [i["name"] for i in a["provenance"]["inputs"]][:2] == ["period1.xpt", "period2.xpt"]
    for x, y in zip(a["results"], b["results"], strict=True):
        assert y["estimate"] == pytest.approx(x["estimate"], rel=1e-10)
        assert y["se"] == pytest.approx(x["se"], rel=1e-10)


def test_the_dask_engine_runs_estimates_and_nonresponse_only(periods: Path, tmp_path: Path) -> None:
    text = (f'data = "{periods}/period*.xpt"\nengine = "dask"\n[design]\nweight = "wt_final"\n'
            '[[bounds]]\nvariables = ["hs_rate"]\noutput = "b.json"\n')
    _write(tmp_path / "a.toml", text)
    done = run_wstats("run", "a.toml", cwd=tmp_path)
    assert done.returncode == 1
    assert ("engine 'dask' runs [[estimates]] and [[nonresponse]] entries only, not "
            "[[bounds]] #1") in done.stderr


def test_a_table_spec_pools_a_glob_with_periods_as_columns(periods: Path, tmp_path: Path
                                                           ) -> None:
    spec = _write(tmp_path / "t.toml", f'data = "{periods}/period*.xpt"\n'
                  f'codebook = "{periods}/tbchs_codebook.toml"\nrows = ["sl_hours"]\n'
                  '[columns]\nby = ["_file"]\n')
    done = run_wstats("table", spec.name, "--format", "csv", cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    header = next(line for line in done.stdout.splitlines() if not line.startswith("#"))
    assert "period1" in header and "period3" in header, header


def test_the_demo_writes_periods_to_pool(tmp_path: Path) -> None:
    done = run_wstats("demo", "d", "--rows", "3000", "--periods", "2", cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    assert (tmp_path / "d" / "period1.xpt").exists() and (tmp_path / "d" / "period2.xpt").exists()
    out = _json("estimate", "d/period*.xpt", "sl_hours", "--by", "_file", "--codebook",
                "d/tbchs_codebook.toml", cwd=tmp_path)
    assert len(out["results"]) == 3


def test_engine_options_are_checked(periods: Path) -> None:
    done = run_wstats("estimate", "period1.xpt", "sl_hours", "--scheduler", "tcp://1.2.3.4:1",
                      "--codebook", "tbchs_codebook.toml", cwd=periods)
    assert done.returncode == 2
    assert "--scheduler needs --engine dask" in done.stderr
    done = run_wstats("estimate", "period1.xpt", "sl_hours", "--engine", "dask", "--rows",
                      "0:100", "--codebook", "tbchs_codebook.toml", cwd=periods)
    assert done.returncode == 2
    assert "--rows reads a first look in memory" in done.stderr


def test_nonresponse_on_dask_from_the_command_line(periods: Path) -> None:
    pytest.importorskip("distributed")
    args = ["nonresponse", "period*.xpt", "sl_hours", "hs_rate", "--by", "_file",
            "--codebook", "tbchs_codebook.toml"]
    memory = _json(*args, cwd=periods)
    dask = _json(*args, "--engine", "dask", cwd=periods)
    assert len(memory["results"]) == len(dask["results"]) == 8
    for x, y in zip(memory["results"], dask["results"], strict=True):
        assert y["nonresponse_rate"] == pytest.approx(x["nonresponse_rate"], rel=1e-10)
        assert y["se"] == pytest.approx(x["se"], rel=1e-10)
        assert y["counts"] == x["counts"]
        for reason, share in x["weighted_shares"].items():
            assert y["weighted_shares"][reason] == pytest.approx(share, rel=1e-10, abs=1e-15)


def test_compare_periods_from_the_command_line(periods: Path) -> None:
    # REFERENCES §13, §16: independent periods, SE of a change = sqrt(v1 + v2); df d1 + d2,
    # the two periods compared (three identical designs here: 2/3 of the pooled df)
    out = _json("compare", "period*.xpt", "sl_hours", "--by", "_file", "--trend",
                "--codebook", "tbchs_codebook.toml", cwd=periods)
    est = _json("estimate", "period*.xpt", "sl_hours", "--by", "_file", "--codebook",
                "tbchs_codebook.toml", cwd=periods)["results"]
    se = {r["group"]["_file"]: r["se"] for r in est if r["group"]}
    first = out["differences"][0]
    assert (first["group_a"], first["group_b"]) == ("period1", "period2")
    assert first["se"] == pytest.approx((se["period1"] ** 2 + se["period2"] ** 2) ** 0.5,
                                        rel=1e-10)
    assert first["df"] == pytest.approx(est[0]["df"] * 2 / 3)
    assert [i["name"] for i in out["provenance"]["inputs"]][:3] == [
        "period1.xpt", "period2.xpt", "period3.xpt"]
    assert any(t["test"].startswith("trend") for t in out["tests"])


@pytest.mark.parametrize(("options", "said"), [
    ((), "3 files pooled (equal weights; totals per period)"),
    (("--pool", "rows"), "3 files pooled (weights by row count; totals per period)"),
    (("--pool", "0.5,0.25,0.25"), "(weights × 0.5, 0.25, 0.25; totals per period)"),
    (("--shared-psus",), "(equal weights, strata and PSUs shared; totals per period)"),
])
def test_the_design_line_says_how_the_files_were_pooled(
        periods: Path, options: tuple[str, ...], said: str) -> None:
    # "rows weights" / "factors weights" read badly, and shared PSUs went unmentioned
    done = run_wstats("estimate", "period*.xpt", "sl_hours", "--codebook",
                      "tbchs_codebook.toml", *options, cwd=periods)
    assert done.returncode == 0, done.stderr
    design = " ".join(done.stdout.split("(korn-graubard")[0].split())
    assert said in design


@pytest.mark.parametrize("command", ["estimate", "nonresponse"])
def test_a_chart_of_pooled_files_names_every_file_in_its_provenance(
        periods: Path, tmp_path: Path, command: str) -> None:
    pytest.importorskip("matplotlib")
    chart = tmp_path / "c.svg"
    done = run_wstats(command, "period*.xpt", "sl_hours", "--by", "_file", "--codebook",
                      "tbchs_codebook.toml", "--plot", chart, cwd=periods)
    assert done.returncode == 0, done.stderr  # it was a traceback (a list taken for a path)
    text = chart.read_text(encoding="utf-8")
    assert all(f"period{k}.xpt" in text for k in (1, 2, 3))


def test_satterthwaite_period_df_are_named_in_the_notes(periods: Path) -> None:
    done = run_wstats("compare", "period*.xpt", "sl_hours", "--by", "_file", "--codebook",
                      "tbchs_codebook.toml", "--period-df", "satterthwaite", cwd=periods)
    assert done.returncode == 0, done.stderr
    text = " ".join(done.stdout.split())
    # the notes said "on the design degrees of freedom" while t used Satterthwaite's df
    assert "t and two-sided p on Satterthwaite degrees of freedom from each period's" in text
    assert "on the design degrees of freedom" not in text


def test_a_where_that_selects_no_row_is_said_on_dask_as_in_memory(periods: Path) -> None:
    pytest.importorskip("distributed")
    args = ["estimate", "period*.xpt", "sl_hours", "--codebook", "tbchs_codebook.toml",
            "--where", "dm_age > 200"]
    said = ("wstats: warning: where 'dm_age > 200' selects no row of period1.xpt + period2.xpt + "
            "period3.xpt, so every estimate has n = 0 and no value; check the condition")
    for engine in ("memory", "dask"):  # the Dask engine used to say nothing
        done = run_wstats(*args, "--engine", engine, cwd=periods)
        assert done.returncode == 0, done.stderr
        assert said in " ".join(done.stderr.split()), engine
