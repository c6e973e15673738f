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


def _console_examples() -> list[tuple[str, list[str]]]:
    """Return each ``$ wstats ...`` example of the README with the output lines shown."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    out = []
    for block in re.findall(r"```console\n(.*?)\n```", text, flags=re.S):
        command, *shown = block.splitlines()
        out.append((command.removeprefix("$ "), shown))
    return out


def test_the_readme_examples_show_what_the_commands_print(tmp_path: Path) -> None:
    """Titles, design line and column headers of every example match today's output.

    The numbers come from the full-size demo; a 3,000-row demo keeps the layout (the
    example outputs were written by hand once and went stale when the screens changed).
    """
    import shlex

    from conftest import run_wstats
    from demo import write_demo

    write_demo(tmp_path, rows=3000, formats=("xpt",))
    examples = _console_examples()
    assert len(examples) >= 4
    for command, shown in examples:
        done = run_wstats(*shlex.split(command)[1:], cwd=tmp_path)
        assert done.returncode == 0, (command, done.stderr)
        printed = done.stdout.splitlines()
        assert printed[0] == shown[0], command
        rule = next(i for i, line in enumerate(shown) if line.startswith("──"))
        assert shown[rule - 1].split() in [line.split() for line in printed], command
        if shown[1].startswith("Design:"):
            assert printed[1].split(";")[0] == shown[1].split(";")[0], command
