"""The README's contract: a job paragraph, then exactly two set-up commands; CI runs the second."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _commands() -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    setup = text.split("## Set up", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```sh\n(.*?)\n```", setup, flags=re.S)


def test_readme_has_exactly_two_setup_commands() -> None:
    cmds = _commands()
    assert len(cmds) == 2
    assert cmds[0].endswith("wstats demo")
    assert "pytest" in cmds[1] and "'.[test]'" in cmds[1]


def test_ci_runs_the_readme_test_command_verbatim() -> None:
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert _commands()[1] in ci.splitlines()


def test_readme_opens_with_the_job() -> None:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    first = text.split("\n\n")[1]
    assert "survey" in first and "wstats" in first
