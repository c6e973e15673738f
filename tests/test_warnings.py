"""Warnings that matter fire once, as one ``wstats: warning:`` line, and are never fatal.

Thresholds are those of ``wstats/estimation/sanity.py`` and docs/warnings.md. Each case builds a
small file that crosses exactly one threshold clearly, runs ``wstats estimate`` in a child process
and checks: exit 0, the output written, and exactly one warning line about the condition even
though two variables and a by-variable give the library several chances to repeat it.
"""

from __future__ import annotations

import re
import subprocess
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from conftest import CODEBOOK_TOML

Run = Callable[..., subprocess.CompletedProcess[str]]
DESIGN = ["--weight", "WT", "--strata", "STRAT", "--psu", "PSU"]


def warning_lines(proc: subprocess.CompletedProcess[str], pattern: str) -> list[str]:
    """Check the run succeeded with only warning/progress lines; return warnings matching."""
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr
    lines = [line for line in proc.stderr.splitlines() if line.strip()]
    assert all(line.startswith(("wstats: warning: ", "wrote ")) for line in lines), proc.stderr
    return [line for line in lines
            if line.startswith("wstats: warning: ") and re.search(pattern, line, re.I)]


def _estimate(run_cli: Run, data: Path, tmp_path: Path, *extra: Any) -> Any:
    out = tmp_path / "out.csv"
    proc = run_cli("estimate", data, "SLEEP", "AGE", *extra, "-o", out)
    assert out.exists() or proc.returncode != 0
    return proc


def test_many_single_psu_strata(run_cli: Run, make_survey: Callable[..., Path],
                                tmp_path: Path) -> None:
    def singles(frame: Any) -> None:
        # 2 of 4 strata keep one PSU: 50% > SINGLE_PSU_SHARE = 25%.
        frame.loc[frame["STRAT"].isin([2.0, 4.0]), "PSU"] = 1.0

    data = make_survey("subset.csv", singles)
    proc = _estimate(run_cli, data, tmp_path, *DESIGN, "--singleton", "certainty",
                     "--by", "SMOKE")
    found = warning_lines(proc, r"single PSU")
    assert len(found) == 1, proc.stderr
    assert re.search(r"\b2 of 4 strata", found[0]), found[0]


def test_weight_sum_far_below_population(run_cli: Run, survey_files: dict[str, Path],
                                         tmp_path: Path) -> None:
    # The fixture weights sum to about 4,800; the codebook claims 1,000,000 (< 50%).
    codebook = tmp_path / "codebook.toml"
    codebook.write_text(CODEBOOK_TOML.replace("population = 4800", "population = 1000000"),
                        encoding="utf-8")
    proc = _estimate(run_cli, survey_files["sav"], tmp_path, "--codebook", codebook,
                     "--by", "SMOKE")
    found = warning_lines(proc, r"population")
    assert len(found) == 1, proc.stderr
    assert "1,000,000" in found[0] or "1000000" in found[0]


def _spike(code: float, ordinary: tuple[int, int]) -> Callable[[Any], None]:
    def edit(frame: Any) -> None:
        rng = np.random.default_rng(11)
        frame["SLEEP"] = rng.integers(ordinary[0], ordinary[1] + 1, len(frame)).astype(float)
        frame.loc[frame.index[::6], "SLEEP"] = code  # 8 of 48 rows: a spike at the top
        frame.loc[frame.index[1::12], "SLEEP"] = _companion(code)  # and 9, 99 or 999

    return edit


def _companion(code: float) -> float:
    return float(str(int(code)).replace("7", "9"))


@pytest.mark.parametrize(("code", "ordinary"), [(7.0, (1, 5)), (77.0, (1, 30)),
                                                (777.0, (1, 300))], ids=["7-9", "77-99",
                                                                         "777-999"])
def test_unexplained_special_codes(run_cli: Run, make_survey: Callable[..., Path],
                                   tmp_path: Path, code: float, ordinary: tuple[int, int]) -> None:
    data = make_survey("codes.csv", _spike(code, ordinary))
    proc = _estimate(run_cli, data, tmp_path, *DESIGN, "--by", "SMOKE")
    found = warning_lines(proc, rf"\b{int(code)}\b")
    assert len(found) == 1, proc.stderr
    assert "SLEEP" in found[0] and str(int(_companion(code))) in found[0], found[0]


def test_explained_codes_do_not_warn(run_cli: Run, make_survey: Callable[..., Path],
                                     tmp_path: Path) -> None:
    # The same 77/99 spike, explained by the codebook: no special-code warning.
    data = make_survey("codes.sav", _spike(77.0, (1, 30)))
    codebook = tmp_path / "codebook.toml"
    codebook.write_text(CODEBOOK_TOML.replace("range = [1, 24]", "range = [1, 30]"),
                        encoding="utf-8")
    proc = _estimate(run_cli, data, tmp_path, "--codebook", codebook)
    assert warning_lines(proc, r"\b77\b|\b99\b") == []


def test_extreme_weights(run_cli: Run, make_survey: Callable[..., Path],
                         tmp_path: Path) -> None:
    def extreme(frame: Any) -> None:
        # 44 weights of 1 and 4 of 200: Kish deff = 48 * 160044 / 844^2 = 10.78 > 3
        # (Kish 1965, Survey Sampling, section 11.7: deff_w = n sum w^2 / (sum w)^2).
        frame["WT"] = 1.0
        frame.loc[frame.index[::12], "WT"] = 200.0

    data = make_survey("extreme.csv", extreme)
    proc = _estimate(run_cli, data, tmp_path, *DESIGN, "--by", "SMOKE")
    found = warning_lines(proc, r"Kish|design effect")
    assert len(found) == 1, proc.stderr
    assert "WT" in found[0] and "10.78" in found[0], found[0]


def test_small_by_groups(run_cli: Run, survey_files: dict[str, Path], tmp_path: Path) -> None:
    # 48 rows split by SMOKE (two levels): both groups are under MIN_GROUP_SIZE = 30.
    proc = _estimate(run_cli, survey_files["sav"], tmp_path, *DESIGN, "--by", "SMOKE")
    found = warning_lines(proc, r"fewer than 30")
    assert len(found) == 1, proc.stderr
    assert re.search(r"\b2 by-group", found[0]), found[0]


def test_clean_run_has_no_warnings(run_cli: Run, survey_files: dict[str, Path],
                                   codebook_file: Path, tmp_path: Path) -> None:
    # Uniform weights (deff about 1.1), two PSUs or more per stratum, population matching the
    # weights, codes explained by the codebook, no by-groups: nothing to warn about.
    proc = _estimate(run_cli, survey_files["sav"], tmp_path, "--codebook", codebook_file)
    assert warning_lines(proc, r".") == []
