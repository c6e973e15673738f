"""Shared fixtures: tiny valid survey files in every format, a small codebook, a CLI runner.

The survey is invented for the tests (48 rows: 4 strata x 3 PSUs x 4 rows) and written with
pyreadstat and pandas, never with wstats itself, so a reader test compares wstats against
files another library produced.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[1]
# Tests must not fill the real digest cache in ~/.cache (test_io_prefetch turns it on).
os.environ.setdefault("WSTATS_NO_DIGEST_CACHE", "1")
#: Every format the fixtures write, by extension.
SURVEY_FORMATS = ("csv", "xpt", "sav", "dta", "parquet")
#: Seconds one command-line run may take before the test fails.
CLI_TIMEOUT = 120

CODEBOOK_TOML = """\
[survey]
name = "Fixture survey"
population = 4800

[design]
weight = "WT"
strata = "STRAT"
psu = "PSU"

[variables.SLEEP]
label = "Hours of sleep"
kind = "continuous"
range = [1, 24]
codes = { 77 = "dont_know", 99 = "refused" }

[variables.SMOKE]
label = "Smokes now"
kind = "categorical"
labels = { 1 = "Yes", 2 = "No" }

[derived.SLEEP_MIN]
label = "Minutes of sleep"
kind = "continuous"
expr = "SLEEP * 60"
"""

VARIABLE_LABELS = {"WT": "Final weight", "SLEEP": "Hours of sleep", "SMOKE": "Smokes now",
                   "AGE": "Age in years", "REGION": "Region"}
VALUE_LABELS = {"SMOKE": {1: "Yes", 2: "No"}}


def survey_frame(n_strata: int = 4, n_psu: int = 3, per_psu: int = 4, seed: int = 7) -> Any:
    """Return the fixture survey as a pandas DataFrame (design, weights, items, text)."""
    import pandas as pd

    rng = np.random.default_rng(seed)
    n = n_strata * n_psu * per_psu
    frame = pd.DataFrame({
        "STRAT": np.repeat(np.arange(1, n_strata + 1), n_psu * per_psu).astype(float),
        "PSU": np.tile(np.repeat(np.arange(1, n_psu + 1), per_psu), n_strata).astype(float),
        "FPC": np.full(n, 20.0),
        "WT": rng.uniform(50.0, 150.0, n).round(2),
        "SLEEP": rng.integers(4, 10, n).astype(float),
        "SMOKE": rng.integers(1, 3, n).astype(float),
        "AGE": rng.integers(18, 81, n).astype(float),
        "REGION": np.where(rng.random(n) < 0.5, "north", "south"),
    })
    frame.loc[[3, 17], "SLEEP"] = 77.0
    frame.loc[[5], "SLEEP"] = 99.0
    for r in range(1, 5):
        frame[f"RWT{r}"] = (frame["WT"] * np.where(frame["STRAT"] == r, 0.0, 4.0 / 3.0)).round(2)
    return frame


def write_survey(frame: Any, path: Path) -> Path:
    """Write *frame* in the format of *path*'s extension, with labels where the format has them."""
    import pyreadstat

    fmt = path.suffix.lstrip(".")
    labels = {k: v for k, v in VARIABLE_LABELS.items() if k in frame.columns}
    values = {k: v for k, v in VALUE_LABELS.items() if k in frame.columns}
    if fmt == "csv":
        frame.to_csv(path, index=False)
    elif fmt == "parquet":
        frame.to_parquet(path, index=False)
    elif fmt == "xpt":
        pyreadstat.write_xport(frame, str(path), column_labels=labels, table_name="FIXTURE",
                               file_format_version=5)  # the public-use layout: fast reader
    elif fmt == "sav":
        pyreadstat.write_sav(frame, str(path), column_labels=labels,
                             variable_value_labels=values)
    elif fmt == "dta":
        pyreadstat.write_dta(frame, str(path), column_labels=labels,
                             variable_value_labels=values)
    else:  # pragma: no cover - a typo in a test
        raise ValueError(f"no writer for {path}")
    return path


def run_wstats(*args: Any, cwd: Path | None = None, timeout: float = CLI_TIMEOUT,
               fresh: bool = False) -> subprocess.CompletedProcess[str]:
    """Run ``python -m wstats ARGS`` in a child process and return what happened.

    By default the child is forked from a warm server that has already imported numpy,
    pandas, pyarrow and pyreadstat (but no wstats module), which saves about a second per
    run; ``fresh=True`` (or the environment variable ``WSTATS_CLI_FRESH=1``) starts a new
    interpreter every time. Either way the child runs ``wstats/__main__.py`` as
    ``python -m wstats`` does, with its own exit code, stdout and stderr.
    """
    argv = [str(a) for a in args]
    if fresh or os.environ.get("WSTATS_CLI_FRESH") == "1" or not hasattr(os, "fork"):
        return subprocess.run(
            [sys.executable, "-m", "wstats", *argv], cwd=cwd, env=_child_env(),
            capture_output=True, text=True, timeout=timeout, stdin=subprocess.DEVNULL,
        )
    return _server().run(argv, cwd or Path.cwd(), timeout)


def _child_env() -> dict[str, str]:
    """Return the environment of a CLI child: the repo importable, no colour, fixed width."""
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(filter(None, [str(ROOT), env.get("PYTHONPATH")]))
    env.update({"NO_COLOR": "1", "COLUMNS": "120", "PYTHONIOENCODING": "utf-8"})
    env.pop("PYTHONWARNINGS", None)
    return env


# The warm server: reads one JSON request per line, forks a child per request that runs
# wstats/__main__.py with fds 0/1/2 redirected, waits (killing it after the timeout) and
# answers with one JSON line. Nothing of wstats is imported before the fork.
_SERVER = r"""
import json, os, runpy, signal, sys, tempfile, traceback
import numpy, pandas, pyarrow, pyarrow.parquet, pyreadstat  # the slow imports, done once
out = sys.stdout
sys.stdout = sys.stderr
for line in sys.stdin:
    req = json.loads(line)
    fd_out, out_name = tempfile.mkstemp()
    fd_err, err_name = tempfile.mkstemp()
    pid = os.fork()
    if pid == 0:
        os.dup2(os.open(os.devnull, os.O_RDONLY), 0)
        os.dup2(fd_out, 1)
        os.dup2(fd_err, 2)
        sys.stdin = open(0, closefd=False)
        sys.stdout = open(1, "w", encoding="utf-8", closefd=False)
        sys.stderr = open(2, "w", encoding="utf-8", closefd=False)
        code = 1
        try:
            os.chdir(req["cwd"])
            sys.argv = ["wstats", *req["argv"]]
            runpy.run_module("wstats", run_name="__main__", alter_sys=True)
            code = 0
        except SystemExit as exc:
            code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
            if exc.code is not None and not isinstance(exc.code, int):
                print(exc.code, file=sys.stderr)
        except BaseException:
            traceback.print_exc()
        finally:
            sys.stdout.flush()
            sys.stderr.flush()
            os._exit(code)
    def stop(*_):
        os.kill(pid, signal.SIGKILL)
    signal.signal(signal.SIGALRM, stop)
    signal.alarm(int(req["timeout"]))
    _, status = os.waitpid(pid, 0)
    signal.alarm(0)
    os.close(fd_out)
    os.close(fd_err)
    texts = []
    for name in (out_name, err_name):
        with open(name, encoding="utf-8", errors="replace") as fh:
            texts.append(fh.read())
        os.unlink(name)
    code = os.waitstatus_to_exitcode(status)
    out.write(json.dumps({"code": code, "stdout": texts[0], "stderr": texts[1]}) + "\n")
    out.flush()
"""


class _WarmServer:
    """One long-lived interpreter that forks a fresh child for every CLI run."""

    def __init__(self) -> None:
        self.proc = subprocess.Popen(
            [sys.executable, "-c", _SERVER], stdin=subprocess.PIPE, stdout=subprocess.PIPE,
            text=True, env=_child_env(), cwd=ROOT,
        )

    def run(self, argv: list[str], cwd: Path, timeout: float) -> subprocess.CompletedProcess[str]:
        """Run one command line; raise TimeoutExpired like subprocess.run would."""
        assert self.proc.stdin is not None and self.proc.stdout is not None
        request = {"argv": argv, "cwd": str(cwd), "timeout": max(1, int(timeout))}
        self.proc.stdin.write(json.dumps(request) + "\n")
        self.proc.stdin.flush()
        answer = json.loads(self.proc.stdout.readline())
        if answer["code"] == -signal.SIGKILL:
            raise subprocess.TimeoutExpired(["wstats", *argv], timeout)
        return subprocess.CompletedProcess(["wstats", *argv], answer["code"], answer["stdout"],
                                           answer["stderr"])

    def close(self) -> None:
        """Stop the server."""
        if self.proc.stdin is not None:
            self.proc.stdin.close()
        self.proc.wait(timeout=30)
        if self.proc.stdout is not None:
            self.proc.stdout.close()


_WARM: list[_WarmServer] = []


def _server() -> _WarmServer:
    """Return the session's warm server, starting it on first use."""
    if not _WARM or _WARM[0].proc.poll() is not None:
        for old in _WARM:
            old.close()
        _WARM[:] = [_WarmServer()]
    return _WARM[0]


@pytest.fixture(scope="session", autouse=True)
def _stop_warm_server() -> Iterator[None]:
    """Stop the warm CLI server at the end of the session."""
    yield
    for server in _WARM:
        server.close()


def permissions_enforced(path: Path) -> bool:
    """Tell whether the OS refuses us a file with no permissions (not so for root)."""
    if hasattr(os, "geteuid") and os.geteuid() == 0:
        return False
    return not os.access(path, os.R_OK)


@pytest.fixture
def run_cli(tmp_path: Path) -> Callable[..., subprocess.CompletedProcess[str]]:
    """Return ``run_cli(*args) -> CompletedProcess`` running the CLI in *tmp_path*."""

    def run(*args: Any, **kwargs: Any) -> subprocess.CompletedProcess[str]:
        kwargs.setdefault("cwd", tmp_path)
        return run_wstats(*args, **kwargs)

    return run


@pytest.fixture(scope="session")
def survey_files(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    """Return extension -> path of the fixture survey in every format (shared; do not edit)."""
    folder = tmp_path_factory.mktemp("survey")
    frame = survey_frame()
    return {fmt: write_survey(frame, folder / f"survey.{fmt}") for fmt in SURVEY_FORMATS}


@pytest.fixture
def survey_copy(tmp_path: Path, survey_files: dict[str, Path]) -> Callable[[str], Path]:
    """Return ``copy(fmt) -> Path``: a private copy of the fixture survey in *tmp_path*."""

    def copy(fmt: str) -> Path:
        target = tmp_path / f"survey.{fmt}"
        target.write_bytes(survey_files[fmt].read_bytes())
        return target

    return copy


@pytest.fixture
def codebook_file(tmp_path: Path) -> Path:
    """Return the path of the fixture codebook, written in *tmp_path*."""
    path = tmp_path / "codebook.toml"
    path.write_text(CODEBOOK_TOML, encoding="utf-8")
    return path


@pytest.fixture
def make_survey(tmp_path: Path) -> Iterator[Callable[..., Path]]:
    """Return ``make(name, edit=None, **frame_args) -> Path``: a survey changed by *edit*."""

    def make(name: str, edit: Callable[[Any], Any] | None = None, **frame_args: Any) -> Path:
        frame = survey_frame(**frame_args)
        if edit is not None:
            changed = edit(frame)
            frame = frame if changed is None else changed
        return write_survey(frame, tmp_path / name)

    yield make
