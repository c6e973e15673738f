"""Every command's screen at 80 and 120 columns: golden files, and no line wider than the screen.

The commands run on the demo survey (a small sample, generated deterministically), with the
variables its own analysis file names, so the screens are those a new user sees first.
Regenerate deliberately with
``WSTATS_REGEN_GOLDEN=1 .venv/bin/python -m pytest tests/test_render_screens.py``.
"""

from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Any

import pytest
from rich.cells import cell_len

from demo import write_demo
from test_render import check_golden
from wstats.cli.main import main

WIDTHS = (80, 120)


def _toml(value: Any) -> str:
    """Return *value* as a TOML value (strings, lists and inline tables only)."""
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, list):
        return "[" + ", ".join(_toml(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{k} = {_toml(v)}" for k, v in value.items()) + " }"
    return str(value).lower() if isinstance(value, bool) else str(value)


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    """The demo files (3,000 rows, transport format) and the commands to run on them."""
    folder = tmp_path_factory.mktemp("screens")
    write_demo(folder, rows=3000, formats=("xpt",))
    plan = tomllib.loads((folder / "tbchs_analysis.toml").read_text(encoding="utf-8"))
    table = {k: v for k, v in plan["table"][0].items() if k != "output"}
    spec = folder / "table1.toml"
    spec.write_text(f'data = "{plan["data"]}"\ncodebook = "{plan["codebook"]}"\n'
                    + "".join(f"{k} = {_toml(v)}\n" for k, v in table.items()),
                    encoding="utf-8")
    data, cb = folder / plan["data"], folder / plan["codebook"]
    common = ["--codebook", cb, "--singleton", "collapse"]
    est, nr, bd = plan["estimates"][0], plan["nonresponse"][0], plan["bounds"][0]
    not_asked = ",".join(["skipped", *nr.get("not_asked", [])])
    commands = {
        "estimate": ["estimate", data, *est["variables"], "--by", *est["by"], *common],
        "nonresponse": ["nonresponse", data, *nr["variables"], "--not-asked", not_asked,
                        "--worst-first", *common],
        "nonresponse_shares": ["nonresponse", data, *nr["variables"][:4], "--by",
                               *table["columns"]["by"], "--shares", *common],
        "bounds": ["bounds", data, *bd["variables"], "--by", *table["columns"]["by"], *common],
        "table": ["table", spec],
        "codebook_check": ["codebook", "check", data, cb],
        "demo": ["demo", "tour", "--rows", "3000"],
    }
    return {"folder": folder, "commands": commands}


def _screen(demo: dict[str, Any], name: str, width: int, monkeypatch: pytest.MonkeyPatch,
            capsys: pytest.CaptureFixture[str]) -> str:
    """Run one command at a terminal width and return what it printed."""
    folder: Path = demo["folder"]
    monkeypatch.chdir(folder)
    monkeypatch.setenv("COLUMNS", str(width))
    argv = [str(a.relative_to(folder)) if isinstance(a, Path) else a
            for a in demo["commands"][name]]
    if name == "demo":
        argv.append("--overwrite")
    code = main(argv)
    out = capsys.readouterr().out
    assert code == 0, out
    return out


@pytest.mark.parametrize("width", WIDTHS)
@pytest.mark.parametrize("name", ["estimate", "nonresponse", "nonresponse_shares", "bounds",
                                  "table", "codebook_check", "demo"])
def test_screen_fits_and_matches_golden(demo: dict[str, Any], name: str, width: int,
                                        monkeypatch: pytest.MonkeyPatch,
                                        capsys: pytest.CaptureFixture[str]) -> None:
    text = _screen(demo, name, width, monkeypatch, capsys)
    wide = [line for line in text.splitlines() if cell_len(line) > width]
    assert not wide, f"{name} at {width} columns: {len(wide)} lines too wide: {wide[0]!r}"
    check_golden(f"screens/{name}_{width}.txt", text)


def test_demo_tour_is_short(demo: dict[str, Any], monkeypatch: pytest.MonkeyPatch,
                            capsys: pytest.CaptureFixture[str]) -> None:
    text = _screen(demo, "demo", 80, monkeypatch, capsys)
    assert len(text.splitlines()) <= 60
    assert "Item nonresponse" in text and "Estimates" in text and "Re-run it all" in text
