"""Real signals and real concurrent processes: a command that stops leaves nothing new behind.

Each case starts ``wstats`` in a child process whose ``os.link`` (the step that gives a new
output its name) or ``os.fsync`` (while the temporary file is written) is wrapped so that the
child announces, by creating a file, that it has reached that step, and then waits there. The
test then sends a real SIGTERM or SIGINT, or starts a second process, at exactly that point.
Nothing else in the child is changed: the signal handling, the cleanup and the exit code are
those of ``wstats.cli.main``.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from conftest import CODEBOOK_TOML, ROOT

pytestmark = pytest.mark.skipif(not hasattr(os, "fork") or sys.platform == "win32",
                                reason="POSIX signals")

DESIGN = ["--weight", "WT", "--strata", "STRAT", "--psu", "PSU"]
ANALYSIS = """\
title = "Signal analysis"
data = "survey.sav"
codebook = "codebook.toml"

[[estimates]]
name = "main"
variables = ["SLEEP", "SMOKE"]
output = ["out/est.json", "out/est.md", "out/est.csv"]

[[nonresponse]]
variables = ["SLEEP"]
output = "out/nr.csv"
"""
OUTPUTS = ["est.json", "est.md", "est.csv", "nr.csv"]

#: The child: wraps one os function so that its Nth call (on our output folder) announces
#: itself and pauses, then runs the command line as ``python -m wstats`` would.
CHILD = r"""
import os, sys, time
step, nth, pause = sys.argv[1], int(sys.argv[2]), float(sys.argv[3])
ready, go = sys.argv[4], sys.argv[5]
real = getattr(os, step)
calls = []

def wrapped(*args, **kwargs):
    if step == "link":
        result = real(*args, **kwargs)  # the name exists now: the moment under test
    calls.append(1)
    if len(calls) == nth:
        open(ready, "w").close()
        while go != "-" and not os.path.exists(go):
            time.sleep(0.01)
        time.sleep(pause)
    return result if step == "link" else real(*args, **kwargs)

setattr(os, step, wrapped)
from wstats.cli.main import main
sys.exit(main(sys.argv[6:]))
"""


@pytest.fixture
def project(tmp_path: Path, survey_files: dict[str, Path]) -> Path:
    """Return a folder with survey.sav, a codebook, an analysis file and an empty out/."""
    (tmp_path / "survey.sav").write_bytes(survey_files["sav"].read_bytes())
    (tmp_path / "codebook.toml").write_text(CODEBOOK_TOML, encoding="utf-8")
    (tmp_path / "analysis.toml").write_text(ANALYSIS, encoding="utf-8")
    (tmp_path / "out").mkdir()
    return tmp_path


def start(project: Path, argv: list[str], step: str = "link", nth: int = 1,
          pause: float = 0.0, go: str = "-", tag: str = "a") -> tuple[subprocess.Popen[str], Path]:
    """Start a child that pauses at the *nth* call of os.*step*; return it and its ready file."""
    ready = project / f"ready-{tag}"
    env = dict(os.environ, PYTHONPATH=str(ROOT), NO_COLOR="1")
    proc = subprocess.Popen(
        [sys.executable, "-c", CHILD, step, str(nth), str(pause), str(ready), go, *argv],
        cwd=project, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    return proc, ready


def wait_for(path: Path, proc: subprocess.Popen[str], seconds: float = 60.0) -> None:
    """Wait until *path* exists; fail with the child's output if it ends first."""
    deadline = time.monotonic() + seconds
    while not path.exists():
        if proc.poll() is not None:
            out, err = proc.communicate()
            pytest.fail(f"child ended (exit {proc.returncode}) before the pause:\n{err}")
        if time.monotonic() > deadline:
            proc.kill()
            pytest.fail("child never reached the pause")
        time.sleep(0.01)


def finish(proc: subprocess.Popen[str]) -> tuple[int, str]:
    """Return the child's exit code and stderr."""
    _, err = proc.communicate(timeout=120)
    return proc.returncode, err


def left_in(folder: Path) -> list[str]:
    """Return every name in *folder* (outputs and temporary files alike)."""
    return sorted(p.name for p in folder.iterdir())


@pytest.mark.parametrize(("sig", "code"), [(signal.SIGTERM, 143), (signal.SIGINT, 130)],
                         ids=["SIGTERM", "SIGINT"])
@pytest.mark.parametrize("nth", [1, 2, 4], ids=["after-first", "after-second", "after-last"])
def test_signal_right_after_an_output_is_named(project: Path, sig: int, code: int,
                                               nth: int) -> None:
    # The signal arrives while the nth output's name has just appeared: it was recorded
    # before, so the run removes it and every other output it made.
    proc, ready = start(project, ["run", "analysis.toml"], nth=nth, pause=0.5)
    wait_for(ready, proc)
    proc.send_signal(sig)
    rc, err = finish(proc)
    assert rc == code, err
    assert "Traceback" not in err and "interrupted" in err
    assert left_in(project / "out") == []


@pytest.mark.parametrize("nth", [1, 3])
def test_sigterm_while_a_temporary_file_is_written(project: Path, nth: int) -> None:
    # Paused inside fsync of the nth temporary file: its .part file exists, earlier outputs
    # are complete. SIGTERM interrupts the wait; the .part and the outputs go.
    proc, ready = start(project, ["run", "analysis.toml"], step="fsync", nth=nth, pause=30)
    wait_for(ready, proc)
    assert any(n.endswith(".part") for n in left_in(project / "out"))
    proc.send_signal(signal.SIGTERM)
    rc, err = finish(proc)
    assert rc == 143, err
    assert "Traceback" not in err
    assert left_in(project / "out") == []


def test_sigterm_for_a_single_output_command(project: Path) -> None:
    proc, ready = start(project, ["estimate", "survey.sav", "SLEEP", "--codebook",
                                  "codebook.toml", "-o", "out/est.csv"], pause=0.5)
    wait_for(ready, proc)
    proc.send_signal(signal.SIGTERM)
    rc, err = finish(proc)
    assert rc == 143, err
    assert left_in(project / "out") == []


def _estimate(level: str, out: str, *extra: str) -> list[str]:
    return ["estimate", "survey.sav", "SLEEP", "--codebook", "codebook.toml", "--level", level,
            "--format", "json", "-o", out, *extra]


def _level_of(path: Path) -> str:
    """Return the --level of the command that wrote a JSON output (from its provenance)."""
    command = json.loads(path.read_text(encoding="utf-8"))["provenance"]["command"].split()
    return str(command[command.index("--level") + 1])


def test_two_runs_race_for_one_output(project: Path) -> None:
    # Both children hold a finished temporary file and wait at the naming step; released
    # together, exactly one may give it the name, the other must fail without replacing it.
    go = project / "go"
    first, ready_a = start(project, _estimate("0.9", "out/est.json"), step="fsync", go=str(go))
    second, ready_b = start(project, _estimate("0.8", "out/est.json"), step="fsync",
                            go=str(go), tag="b")
    wait_for(ready_a, first)
    wait_for(ready_b, second)
    go.touch()
    (rc_a, err_a), (rc_b, err_b) = finish(first), finish(second)
    assert sorted([rc_a, rc_b]) == [0, 3], (err_a, err_b)
    loser = err_b if rc_a == 0 else err_a
    assert "exists" in loser and "--overwrite" in loser and "Traceback" not in loser
    assert _level_of(project / "out" / "est.json") == ("0.9" if rc_a == 0 else "0.8")
    assert left_in(project / "out") == ["est.json"]


def test_two_analysis_runs_race(project: Path) -> None:
    go = project / "go"
    runs = [start(project, ["run", "analysis.toml"], step="fsync", go=str(go), tag=t)
            for t in "ab"]
    for proc, ready in runs:
        wait_for(ready, proc)
    go.touch()
    codes = [finish(proc)[0] for proc, _ in runs]
    assert sorted(codes) == [0, 3]
    # The winner's outputs are all there: the loser removed nothing that was not its own.
    assert left_in(project / "out") == sorted(OUTPUTS)


def test_cleanup_spares_a_file_another_run_replaced(project: Path) -> None:
    # Run A names out/est.json and pauses while writing its second output; run B replaces
    # est.json (--overwrite), so the name now holds B's inode. A is then stopped: it must
    # not delete B's file.
    a, ready = start(project, ["run", "analysis.toml"], step="fsync", nth=2, pause=60)
    wait_for(ready, a)
    b = subprocess.run([sys.executable, "-m", "wstats", *_estimate("0.8", "out/est.json",
                                                                    "--overwrite")],
                       cwd=project, env=dict(os.environ, PYTHONPATH=str(ROOT)),
                       capture_output=True, text=True, timeout=120)
    assert b.returncode == 0, b.stderr
    a.send_signal(signal.SIGTERM)
    rc, err = finish(a)
    assert rc == 143, err
    assert left_in(project / "out") == ["est.json"]
    assert _level_of(project / "out" / "est.json") == "0.8"
