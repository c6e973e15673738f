"""Nothing is lost or overwritten: inputs stay byte-identical, outputs appear only whole.

- Every command leaves the SHA-256 and modification time of every input file unchanged.
- An output appears only by rename from a temporary file in the same folder: an exception
  while rendering or writing leaves neither the output nor a temporary file behind.
- ``--overwrite`` replaces a file by rename: until the rename the old content is intact, and
  afterwards the path holds the complete new content under a new inode.
"""

from __future__ import annotations

import errno
import hashlib
import json
import os
import subprocess
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pytest

import wstats.render
from conftest import CODEBOOK_TOML, ROOT
from wstats.cli.main import main

Run = Callable[..., subprocess.CompletedProcess[str]]
DESIGN = ["--weight", "WT", "--strata", "STRAT", "--psu", "PSU"]

TABLE_SPEC = """\
title = "Fixture table"
data = "survey.sav"
codebook = "codebook.toml"
rows = ["SLEEP", "SMOKE"]
"""

ANALYSIS = """\
title = "Fixture analysis"
data = "survey.sav"
codebook = "codebook.toml"

[[estimates]]
name = "main"
variables = ["SLEEP", "SMOKE"]
output = ["out/est.json", "out/est.md"]

[[nonresponse]]
variables = ["SLEEP"]
output = "out/nr.csv"

[[table]]
rows = ["SLEEP", "SMOKE"]
output = "out/table.md"

[methods]
estimates = "main"
output = "out/methods.txt"
"""
ANALYSIS_OUTPUTS = ["est.json", "est.md", "nr.csv", "table.md", "methods.txt"]


def fingerprint(paths: list[Path]) -> dict[str, tuple[str, int, int]]:
    """Return path -> (SHA-256, mtime in ns, size) of each file."""
    out = {}
    for p in paths:
        st = p.stat()
        out[str(p)] = (hashlib.sha256(p.read_bytes()).hexdigest(), st.st_mtime_ns, st.st_size)
    return out


def leftovers(folder: Path) -> list[str]:
    """Return names in *folder* that look like temporary files of an atomic write."""
    return sorted(p.name for p in folder.iterdir()
                  if p.name.startswith(".") or p.name.endswith((".part", ".tmp")))


@pytest.fixture
def project(tmp_path: Path, survey_files: dict[str, Path]) -> Path:
    """Return a folder with survey.sav, survey.csv, a codebook, a table spec, an analysis."""
    for fmt in ("sav", "csv"):
        (tmp_path / f"survey.{fmt}").write_bytes(survey_files[fmt].read_bytes())
    (tmp_path / "codebook.toml").write_text(CODEBOOK_TOML, encoding="utf-8")
    (tmp_path / "table.toml").write_text(TABLE_SPEC, encoding="utf-8")
    (tmp_path / "analysis.toml").write_text(ANALYSIS, encoding="utf-8")
    (tmp_path / "out").mkdir()
    return tmp_path


INPUTS = ["survey.sav", "survey.csv", "codebook.toml", "table.toml", "analysis.toml"]

#: command -> (argv relative to the project folder, outputs it must write there)
COMMANDS: dict[str, tuple[list[str], list[str]]] = {
    "estimate": (["estimate", "survey.sav", "SLEEP", "SMOKE", "--codebook", "codebook.toml",
                  "--by", "SMOKE", "-o", "out/est.json"], ["out/est.json"]),
    "estimate-csv": (["estimate", "survey.csv", "SLEEP", *DESIGN, "--format", "csv"], []),
    "nonresponse": (["nonresponse", "survey.sav", "SLEEP", "--codebook", "codebook.toml",
                     "-o", "out/nr.md"], ["out/nr.md"]),
    "codebook-draft": (["codebook", "draft", "survey.sav", "-o", "out/draft.toml"],
                       ["out/draft.toml"]),
    "codebook-check": (["codebook", "check", "survey.sav", "codebook.toml"], []),
    "convert": (["convert", "survey.sav", "out/cache.parquet"], ["out/cache.parquet"]),
    "table": (["table", "table.toml", "-o", "out/table.md"], ["out/table.md"]),
    "run": (["run", "analysis.toml"], [f"out/{n}" for n in ANALYSIS_OUTPUTS]),
    "columns": (["columns", "survey.csv"], []),
}


@pytest.mark.parametrize("name", sorted(COMMANDS))
def test_inputs_unchanged(run_cli: Run, project: Path, name: str) -> None:
    argv, outputs = COMMANDS[name]
    inputs = [project / n for n in INPUTS]
    before = fingerprint(inputs)
    proc = run_cli(*argv, cwd=project)
    assert proc.returncode == 0, proc.stderr  # a failed run would prove nothing
    assert fingerprint(inputs) == before
    for out in outputs:
        assert (project / out).is_file() and (project / out).stat().st_size > 0, out
    assert leftovers(project) == [] and leftovers(project / "out") == []


def test_inputs_unchanged_on_failure(run_cli: Run, project: Path) -> None:
    # A run that fails half-way (a variable is missing) must not touch inputs either.
    inputs = [project / n for n in INPUTS]
    before = fingerprint(inputs)
    proc = run_cli("estimate", "survey.sav", "NO_SUCH", "--codebook", "codebook.toml",
                   "-o", "out/est.csv", cwd=project)
    assert proc.returncode == 1
    assert fingerprint(inputs) == before
    assert list((project / "out").iterdir()) == []


def _demo_sources() -> list[Path]:
    return sorted(p for p in (ROOT / "demo").iterdir() if p.suffix in (".py", ".toml"))


def test_demo_leaves_its_sources_alone(run_cli: Run, tmp_path: Path) -> None:
    before = fingerprint(_demo_sources())
    proc = run_cli("demo", tmp_path / "demo_out", "--rows", "400", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert fingerprint(_demo_sources()) == before
    assert any((tmp_path / "demo_out").iterdir())
    assert leftovers(tmp_path / "demo_out") == []


def test_demo_refuses_a_folder_with_files(run_cli: Run, tmp_path: Path) -> None:
    folder = tmp_path / "busy"
    folder.mkdir()
    keep = folder / "thesis.txt"
    keep.write_text("three years of work\n", encoding="utf-8")
    before = fingerprint([keep])
    proc = run_cli("demo", folder, "--rows", "400", cwd=tmp_path)
    assert proc.returncode == 3, proc.stderr
    assert proc.stderr.startswith("wstats: error: ") and "--overwrite" in proc.stderr
    assert fingerprint([keep]) == before
    assert sorted(p.name for p in folder.iterdir()) == ["thesis.txt"]


# ---------------------------------------------------------------- outputs only by rename

@pytest.fixture
def in_project(project: Path, monkeypatch: pytest.MonkeyPatch) -> Iterator[Path]:
    """Run in-process CLI calls from inside the project folder."""
    monkeypatch.chdir(project)
    yield project


def _boom(*_: Any, **__: Any) -> Any:
    raise RuntimeError("renderer failed half-way")


@pytest.mark.parametrize("fmt", ["csv", "json", "markdown"])
def test_exception_while_rendering_leaves_nothing(in_project: Path,
                                                  monkeypatch: pytest.MonkeyPatch,
                                                  fmt: str) -> None:
    monkeypatch.setitem(wstats.render.ESTIMATE_RENDERERS, fmt, _boom)
    with pytest.raises(RuntimeError, match="half-way"):
        main(["estimate", "survey.sav", "SLEEP", "--codebook", "codebook.toml",
              "--format", fmt, "-o", "out/est.txt"])
    assert list((in_project / "out").iterdir()) == []


def _failing(error: BaseException) -> Callable[..., Any]:
    def fail(*_: Any, **__: Any) -> Any:
        raise error

    return fail


@pytest.mark.parametrize(
    ("target", "error", "code"),
    [("fsync", OSError(errno.ENOSPC, "No space left on device"), 3),
     ("replace", OSError(errno.EIO, "Input/output error"), 3),
     ("replace", KeyboardInterrupt(), 130)],
    ids=["disk-full-before-rename", "io-error-at-rename", "interrupted-at-rename"],
)
@pytest.mark.parametrize(
    "argv",
    [["estimate", "survey.sav", "SLEEP", "--codebook", "codebook.toml", "-o", "out/x.csv"],
     ["nonresponse", "survey.sav", "SLEEP", "--codebook", "codebook.toml", "-o", "out/x.json"],
     ["codebook", "draft", "survey.sav", "-o", "out/x.toml"],
     ["convert", "survey.sav", "out/x.parquet"],
     ["table", "table.toml", "-o", "out/x.md"]],
    ids=["estimate", "nonresponse", "draft", "convert", "table"],
)
def test_failed_write_leaves_nothing(in_project: Path, monkeypatch: pytest.MonkeyPatch,
                                     capsys: pytest.CaptureFixture[str], argv: list[str],
                                     target: str, error: BaseException, code: int) -> None:
    calls: list[str] = []
    real = getattr(os, target)

    def patched(*args: Any, **kwargs: Any) -> Any:
        # Only our own temporary file is stopped; anything else the libraries do passes.
        if str(in_project / "out") in str(args[0]) or isinstance(args[0], int):
            calls.append(target)
            raise error
        return real(*args, **kwargs)

    monkeypatch.setattr(os, target, patched)
    assert main(argv) == code
    assert calls, f"os.{target} was never called: the output was not written via a temp file"
    assert list((in_project / "out").iterdir()) == []
    err = capsys.readouterr().err
    assert "Traceback" not in err
    if code == 3:
        assert err.count("wstats: error:") == 1 and "x." in err


def test_failed_run_removes_what_it_wrote(in_project: Path,
                                          monkeypatch: pytest.MonkeyPatch) -> None:
    real = os.replace
    done: list[str] = []

    def third_fails(src: Any, dst: Any, *args: Any, **kwargs: Any) -> Any:
        if len(done) == 2:
            raise OSError(errno.ENOSPC, "No space left on device")
        done.append(str(dst))
        return real(src, dst, *args, **kwargs)

    monkeypatch.setattr(os, "replace", third_fails)
    assert main(["run", "analysis.toml"]) == 3
    assert len(done) == 2  # two outputs were complete before the failure ...
    assert list((in_project / "out").iterdir()) == []  # ... and were removed again


# ---------------------------------------------------------------- --overwrite

def _estimate_argv(out: str) -> list[str]:
    return ["estimate", "survey.sav", "SLEEP", "SMOKE", "--codebook", "codebook.toml",
            "--format", "json", "-o", out, "--overwrite"]


def test_overwrite_replaces_by_rename(in_project: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    out = in_project / "out" / "est.json"
    out.write_text("OLD CONTENT\n", encoding="utf-8")
    old_inode = out.stat().st_ino
    real = os.replace
    seen: list[tuple[str, str]] = []

    def watch(src: Any, dst: Any, *args: Any, **kwargs: Any) -> Any:
        if Path(dst).resolve() == out:
            # Just before the rename: the target is untouched, the new file is complete.
            seen.append((out.read_text(encoding="utf-8"), Path(src).read_text(encoding="utf-8")))
            assert Path(src).resolve().parent == out.parent  # same folder, so the rename is atomic
        return real(src, dst, *args, **kwargs)

    monkeypatch.setattr(os, "replace", watch)
    assert main(_estimate_argv("out/est.json")) == 0
    assert len(seen) == 1
    old_at_rename, new_at_rename = seen[0]
    assert old_at_rename == "OLD CONTENT\n"
    final = out.read_text(encoding="utf-8")
    assert final == new_at_rename
    assert out.stat().st_ino != old_inode
    document = json.loads(final)  # complete: parses as a whole document
    assert document["results"], "no result rows"
    assert leftovers(out.parent) == []


def test_overwrite_in_a_child_process(run_cli: Run, project: Path) -> None:
    out = project / "out" / "est.json"
    out.write_text("OLD CONTENT\n", encoding="utf-8")
    old_inode = out.stat().st_ino
    proc = run_cli(*_estimate_argv("out/est.json"), cwd=project)
    assert proc.returncode == 0, proc.stderr
    assert out.stat().st_ino != old_inode
    assert json.loads(out.read_text(encoding="utf-8"))["results"]
    assert leftovers(out.parent) == []


def test_overwrite_refuses_a_hard_link_to_an_input(run_cli: Run, project: Path) -> None:
    # out/est.json is a second name of the data file: it is an input, even under --overwrite.
    data = project / "survey.csv"
    before = fingerprint([data])
    os.link(data, project / "out" / "est.json")
    proc = run_cli("estimate", "survey.csv", "SLEEP", *DESIGN, "--format", "json", "-o",
                   "out/est.json", "--overwrite", cwd=project)
    assert proc.returncode == 3, proc.stderr
    assert "is an input of this command" in proc.stderr
    assert fingerprint([data]) == before


@pytest.mark.parametrize("victim", ["survey.csv", "codebook.toml"])
def test_output_onto_an_input_is_refused(run_cli: Run, project: Path, victim: str) -> None:
    before = fingerprint([project / n for n in INPUTS])
    proc = run_cli("estimate", "survey.csv", "SLEEP", *DESIGN, "--codebook", "codebook.toml",
                   "--format", "csv", "-o", victim, "--overwrite", cwd=project)
    assert proc.returncode == 3, proc.stderr
    assert proc.stderr.startswith("wstats: error: ") and victim in proc.stderr
    assert fingerprint([project / n for n in INPUTS]) == before
