"""Golden files for every output format, made by the demo analysis on a small demo sample.

The demo survey is generated deterministically, so its estimates, tables and texts are fixed;
a change in any of them shows up here as a diff to review. Regenerate deliberately with
``WSTATS_REGEN_GOLDEN=1 .venv/bin/python -m pytest tests/test_demo_golden.py``.
Provenance lines that vary by machine or run (time, file hashes, library versions) are masked.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from demo import write_demo
from test_render import check_golden
from wstats.cli.analysis import run_analysis

_VOLATILE = re.compile(r"created_utc|sha256|environment|\"numpy\"|\"pandas\"|\"python\"|"
                       r"version|\"bytes\"|bytes:")


@pytest.fixture(scope="module")
def outputs(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    folder = tmp_path_factory.mktemp("demo")
    write_demo(folder, rows=3000, formats=("xpt",))
    return {p.name: p for p in run_analysis(folder / "tbchs_analysis.toml")}


NAMES = ["tbchs_estimates.json", "tbchs_estimates.md", "tbchs_nonresponse.md",
         "tbchs_nonresponse.json", "tbchs_bounds.csv", "tbchs_table1.md", "tbchs_table1.tex",
         "tbchs_table1.html", "tbchs_table1.csv", "tbchs_methods.txt", "tbchs_methods.md"]


@pytest.mark.parametrize("name", NAMES)
def test_demo_output_matches_golden(outputs: dict[str, Path], name: str) -> None:
    text = outputs[name].read_text(encoding="utf-8")
    kept = "".join(ln for ln in text.splitlines(keepends=True) if not _VOLATILE.search(ln))
    check_golden(f"demo/{name}", kept)


def test_every_text_output_has_a_golden(outputs: dict[str, Path]) -> None:
    text_outputs = {n for n in outputs if not n.endswith((".svg", ".png"))}
    assert text_outputs == set(NAMES)
