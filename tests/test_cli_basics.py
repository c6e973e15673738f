"""The command line's own contract: help, version, registry, docs coverage, one-line errors."""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest

import wstats
import wstats.errors
from _imports import modules_loaded_by
from wstats.cli.commands import COMMANDS
from wstats.cli.main import build_parser, main

ROOT = Path(__file__).resolve().parents[1]


def test_version_matches_package(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as exc:
        main(["--version"])
    assert exc.value.code == 0
    assert capsys.readouterr().out.strip() == f"wstats {wstats.__version__}"


@pytest.mark.parametrize("name", sorted(COMMANDS))
def test_every_command_has_help_with_an_example(name: str) -> None:
    parser = build_parser()
    sub = parser._subparsers._group_actions[0].choices[name]  # type: ignore[union-attr]
    text = sub.format_help()
    assert "example:" in text
    assert f"wstats {name}" in text
    assert COMMANDS[name].example.startswith(f"wstats {name}")


@pytest.mark.parametrize("name", sorted(COMMANDS))
def test_every_command_is_documented(name: str) -> None:
    docs = (ROOT / "docs" / "cli.md").read_text(encoding="utf-8")
    assert re.search(rf"^## `wstats {name}", docs, flags=re.M), f"docs/cli.md lacks {name}"


def test_every_error_class_is_in_the_catalogue() -> None:
    catalogue = (ROOT / "docs" / "errors.md").read_text(encoding="utf-8")
    classes = [
        obj for obj in vars(wstats.errors).values()
        if isinstance(obj, type) and issubclass(obj, wstats.errors.WstatsError)
    ]
    assert len(classes) >= 10
    for cls in classes:
        heading = rf"^### `{cls.__name__}` \(exit {cls.exit_code}"
        assert re.search(heading, catalogue, flags=re.M), f"{cls.__name__} not documented"


def test_public_names_are_exactly_the_documented_list() -> None:
    # The one public door: a new public name must be added here on purpose.
    expected = {
        "AnalysisError", "Codebook", "CodebookError", "ColumnError", "Comparison", "Dataset",
        "DecodedColumn", "Design", "DesignError", "EstimateTable", "EstimationError",
        "ExpressionError", "NonresponseTable", "OutputError", "ReadError", "Reasons",
        "ReliabilityStandard", "SingletonStratumError", "UsageError", "WeightError",
        "WstatsError", "__version__", "bounds", "build_table", "check_codebook", "compare",
        "convert", "decode", "describe_columns", "draft_codebook", "estimate", "load_codebook",
        "load_table_spec", "look", "methods_paragraph", "nonresponse", "read", "read_raw",
        "run_analysis",
    }
    assert set(wstats.__all__) == expected
    assert wstats.__all__ == sorted(wstats.__all__)
    for name in wstats.__all__:
        assert getattr(wstats, name) is not None


def test_usage_error_is_one_line_exit_2() -> None:
    proc = subprocess.run([sys.executable, "-m", "wstats", "estimate"],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    assert proc.stdout == ""
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("wstats: error:")
    assert "Traceback" not in proc.stderr


def test_bad_rows_option_names_the_option(tmp_path: Path) -> None:
    proc = subprocess.run(
        [sys.executable, "-m", "wstats", "estimate", str(tmp_path / "x.csv"), "A",
         "--weight", "W", "--rows", "10"], capture_output=True, text=True)
    assert proc.returncode == 2
    assert "--rows '10'" in proc.stderr


def test_help_imports_nothing_heavy() -> None:
    # Start-up cost: --help must not import pandas, scipy, statsmodels, pyreadstat or pyarrow.
    code = ("from wstats.cli.main import main\ntry:\n    main(['--help'])\n"
            "except SystemExit:\n    pass")
    heavy = ("pandas", "scipy", "statsmodels", "pyreadstat", "pyarrow", "numpy")
    assert modules_loaded_by(code, *heavy) == []


def test_estimate_holds_only_named_columns_not_derived_inputs(
        survey_files: dict[str, Path], codebook_file: Path,
        monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    # common practice, no source: a derived variable's inputs are read to make it and then
    # let go; the estimation sees the variables, the condition's and the design's columns only
    import wstats.estimation.estimate

    seen: dict[str, list[str]] = {}
    real = wstats.estimation.estimate.estimate

    def spy(data: Any, *args: Any, **kwargs: Any) -> Any:
        seen["columns"] = list(data.columns)
        return real(data, *args, **kwargs)

    monkeypatch.setattr(wstats.estimation.estimate, "estimate", spy)
    code = main(["--quiet", "estimate", str(survey_files["csv"]), "SLEEP_MIN",
                 "--codebook", str(codebook_file), "--where", "AGE > 30", "--format", "json"])
    assert code == 0
    assert seen["columns"] == ["SLEEP_MIN", "AGE", "WT", "STRAT", "PSU"]  # not SLEEP
    assert '"SLEEP_MIN"' in capsys.readouterr().out


def test_worker_threads_share_one_malloc_arena_on_glibc(monkeypatch: pytest.MonkeyPatch) -> None:
    # glibc's mallopt(M_ARENA_MAX = -8, 1) returns 1 when taken (malloc.h, from memory)
    import ctypes
    import platform

    from wstats.cli import main as cli

    if platform.libc_ver()[0] == "glibc":
        assert cli._one_malloc_arena() is True

    def no_libc(name: str) -> None:
        raise OSError(name)

    monkeypatch.setattr(ctypes, "CDLL", no_libc)
    assert cli._one_malloc_arena() is False  # another C library: left alone, no error


def test_the_command_line_runs_openblas_on_one_thread_unless_told_otherwise() -> None:
    # OPENBLAS_NUM_THREADS is read when numpy loads OpenBLAS (OpenBLAS README, "Setting the
    # number of threads using environment variables", from memory); numpy.show_runtime would
    # need threadpoolctl, so the variable the library reads is checked in a fresh process.
    code = ("import os, sys\nfrom wstats.cli.main import main\ntry:\n    main(['--version'])\n"
            "except SystemExit:\n    pass\n"
            "print(os.environ['OPENBLAS_NUM_THREADS'], 'numpy' in sys.modules)")
    for preset, want in ((None, "1 False"), ("2", "2 False")):
        env = {k: v for k, v in os.environ.items() if k != "OPENBLAS_NUM_THREADS"}
        if preset:
            env["OPENBLAS_NUM_THREADS"] = preset
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                             env=env, check=True).stdout.split()
        assert " ".join(out[-2:]) == want  # after the version line
