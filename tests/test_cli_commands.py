"""Commands end to end on a small file: what they print equals what the library returns."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from wstats.cli.main import main
from wstats.decoding.columns import Dataset
from wstats.design.declared import Design
from wstats.estimation.estimate import estimate
from wstats.reports.bounds import bounds

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture()
def survey(tmp_path: Path) -> Path:
    """A small coded survey: 4 strata x 3 PSUs, a yes/no item with 7/9 codes."""
    rng = np.random.default_rng(7)
    n = 240
    frame = pd.DataFrame({
        "ST": np.repeat(np.arange(4.0), 60), "CL": np.tile(np.repeat(np.arange(3.0), 20), 4),
        "W": rng.uniform(1, 5, n), "Q": rng.choice([1.0, 2.0, 7.0, 9.0], n, p=[.5, .4, .06, .04]),
        "G": rng.choice([1.0, 2.0], n),
    })
    path = tmp_path / "s.csv"
    frame.to_csv(path, index=False)
    (tmp_path / "cb.toml").write_text(
        '[design]\nweight = "W"\nstrata = "ST"\npsu = "CL"\n'
        '[variables.Q]\nkind = "categorical"\ncodes = { 7 = "dont_know", 9 = "refused" }\n'
        'labels = { 1 = "Yes", 2 = "No" }\n', encoding="utf-8")
    return path


def _data(path: Path) -> Dataset:
    from wstats.decoding.load import read

    return read(path, ["Q", "G", "W", "ST", "CL"], path.parent / "cb.toml")


def test_estimate_json_equals_library(survey: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["estimate", str(survey), "Q", "--codebook", str(survey.parent / "cb.toml"),
                 "--format", "json"]) == 0
    out = json.loads(capsys.readouterr().out)
    lib = estimate(_data(survey), Design("W", strata="ST", psu="CL"), ["Q"]).frame
    got = [(r["level"], r["estimate"], r["se"]) for r in out["results"]]
    want = list(zip(lib["level"], lib["estimate"], lib["se"], strict=True))
    assert got == want
    assert out["provenance"]["inputs"][0]["name"] == "s.csv"


def test_bounds_csv_equals_library(survey: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["bounds", str(survey), "Q", "--codebook", str(survey.parent / "cb.toml"),
                 "--format", "csv"]) == 0
    text = capsys.readouterr().out
    rows = list(csv.DictReader(io.StringIO("".join(
        ln for ln in text.splitlines(keepends=True) if not ln.startswith("#")))))
    lib = bounds(_data(survey), Design("W", strata="ST", psu="CL"), ["Q"])
    assert [r["level"] for r in rows] == ["Yes", "No"]
    assert [float(r["lower"]) for r in rows] == lib["lower"].tolist()
    assert [float(r["upper"]) for r in rows] == lib["upper"].tolist()
    # Manski-style bounds contain the valid-case estimate (REFERENCES s.11; Manski 1989, from
    # memory): lower <= estimate <= upper.
    assert (lib["lower"] <= lib["estimate"]).all() and (lib["estimate"] <= lib["upper"]).all()


def test_nonresponse_not_asked_option(survey: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["nonresponse", str(survey), "Q", "--codebook", str(survey.parent / "cb.toml"),
                 "--not-asked", "skipped,refused", "--format", "json"]) == 0
    rec = json.loads(capsys.readouterr().out)["results"][0]
    # refused rows are outside the universe now: asked = all rows minus refusals
    assert rec["asked"] == 240 - rec["counts"]["refused"]
