"""Renderers: golden files per format, flags in every format, well-formed and parseable output.

Golden files live in tests/golden/. After an intended change of layout, regenerate them with

    WSTATS_REGEN_GOLDEN=1 .venv/bin/python -m pytest tests/test_render.py tests/test_pubtable.py

and review the diff before committing. Without the variable the tests compare byte for byte.
"""

from __future__ import annotations

import csv
import html.parser
import importlib.util
import io
import json
import math
import os
import re
import shutil
import subprocess
from pathlib import Path
from typing import Any

import pytest
from rich.console import Console

from _imports import modules_loaded_by
from render_tables import PROVENANCE, estimate_table, nonresponse_table
from wstats.estimation.reliability import RULES
from wstats.render import (
    ESTIMATE_RENDERERS,
    FORMATS,
    NONRESPONSE_RENDERERS,
    TABLE_RENDERERS,
)

GOLDEN = Path(__file__).parent / "golden"
TEXT_FORMATS = ("markdown", "latex", "html", "csv", "json")


def draw(renderable: Any, width: int = 100) -> str:
    """Draw a rich renderable as plain text at a fixed width (no colour)."""
    buf = io.StringIO()
    Console(file=buf, width=width, color_system=None, force_terminal=False).print(renderable)
    return buf.getvalue()


def check_golden(name: str, text: str) -> None:
    """Compare *text* with tests/golden/<name>, or write it when regenerating."""
    path = GOLDEN / name
    if os.environ.get("WSTATS_REGEN_GOLDEN") == "1":
        path.parent.mkdir(exist_ok=True)
        path.write_text(text, encoding="utf-8")
    assert path.exists(), f"no golden file {path}; run with WSTATS_REGEN_GOLDEN=1 once"
    want = path.read_text(encoding="utf-8")
    if text == want:
        return
    # Full-precision numbers may differ in the last bits when the summation order of the
    # engine changes; everything else must match to the character.
    got_parts, want_parts = _NUMBER.split(text), _NUMBER.split(want)
    assert got_parts[::2] == want_parts[::2], f"{name}: text differs"
    for a, b in zip(got_parts[1::2], want_parts[1::2], strict=True):
        assert float(a) == pytest.approx(float(b), rel=1e-9, abs=1e-12), f"{name}: {a} != {b}"


_NUMBER = re.compile(r"(-?\d+\.\d{8,}(?:e[-+]?\d+)?)")


_SUFFIX = {"markdown": "md", "latex": "tex", "html": "html", "csv": "csv", "json": "json"}


@pytest.mark.parametrize("fmt", TEXT_FORMATS)
def test_estimate_golden(fmt: str) -> None:
    check_golden(f"estimate.{_SUFFIX[fmt]}",
                 ESTIMATE_RENDERERS[fmt](estimate_table(), provenance=PROVENANCE))


@pytest.mark.parametrize("fmt", TEXT_FORMATS)
def test_nonresponse_golden(fmt: str) -> None:
    check_golden(f"nonresponse.{_SUFFIX[fmt]}",
                 NONRESPONSE_RENDERERS[fmt](nonresponse_table(), provenance=PROVENANCE))


@pytest.mark.parametrize("width", [100, 60])
def test_estimate_terminal_golden(width: int) -> None:
    check_golden(f"estimate_terminal_{width}.txt",
                 draw(ESTIMATE_RENDERERS["terminal"](estimate_table()), width))


def test_registries_offer_the_same_formats() -> None:
    assert FORMATS[:6] == ("terminal", "markdown", "latex", "html", "csv", "json")
    has_xlsx = importlib.util.find_spec("openpyxl") is not None
    assert ("xlsx" in TABLE_RENDERERS) is has_xlsx
    assert set(ESTIMATE_RENDERERS) == set(NONRESPONSE_RENDERERS) == set(TABLE_RENDERERS)


# ------------------------------------------------------------------ flags and suppression

_MARK = {"latex": r"\ddag{}"}


@pytest.mark.parametrize("fmt", ["terminal", *TEXT_FORMATS])
def test_flags_and_suppression_visible_in_every_format(fmt: str) -> None:
    render = ESTIMATE_RENDERERS[fmt]
    out = render(estimate_table(), provenance=PROVENANCE)
    text = draw(out) if fmt == "terminal" else out
    if fmt in ("csv", "json"):
        # tidy formats: the rule ids per row, and the suppressed numbers removed
        assert "neff<30" in text and "kg-width>=0.30" in text and "df<8" in text
    else:
        assert _MARK.get(fmt, "‡") in text
        assert "suppressed" in text
    if fmt != "csv":
        # the rule's description from the reliability registry appears (JSON: "rules" key)
        assert RULES["df<8"][0].split(";")[0] in text.replace("\\", "")
    # the suppressed proportion (0.04, shown as 4.0%) never appears as a number
    assert "4.0%" not in text and "0.04," not in text and "0.04\n" not in text


def test_terminal_marks_suppressed_cell_in_words() -> None:
    text = draw(ESTIMATE_RENDERERS["terminal"](estimate_table()), 100)
    line = next(x for x in text.splitlines() if x.startswith("Male") and "Yes" in x)
    assert "[suppressed] ‡§" in line
    assert "‡ Flagged by reliability rule neff<30: effective sample size below 30" in text


def test_terminal_reason_breakdown_and_right_aligned_numbers() -> None:
    text = draw(ESTIMATE_RENDERERS["terminal"](estimate_table()), 100)
    assert "skip 45 · dk 41 · ref 12" in text
    lines = [x for x in text.splitlines() if x.startswith(("All ", "Male ", "Female "))][:3]
    ends = {x.index("7.01") + 4 if "7.01" in x else x.index(n) + len(n)
            for x, n in zip(lines, ["7.01", "6.88", "7.15"], strict=True)}
    assert len(ends) == 1  # the three means end in the same column


@pytest.mark.parametrize("width", [40, 60, 80])
def test_narrow_terminal_keeps_numbers_whole(width: int) -> None:
    text = draw(ESTIMATE_RENDERERS["terminal"](estimate_table()), width)
    for number in ["7.01", "0.053", "6.90–7.12", "31.2%", "916,927,110", "58,169,381"]:
        assert number in text
    assert "…" not in text


# ------------------------------------------------------------------ parse the outputs back

class _Checker(html.parser.HTMLParser):
    """Tracks open tags; fails on a closing tag that does not match."""

    VOID = {"meta", "br", "hr", "img", "input", "link"}

    def __init__(self) -> None:
        super().__init__()
        self.stack: list[str] = []
        self.errors: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag: str) -> None:
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1:] or 'nothing'}")
        else:
            self.stack.pop()


@pytest.mark.parametrize("registry,table", [(ESTIMATE_RENDERERS, estimate_table),
                                            (NONRESPONSE_RENDERERS, nonresponse_table)])
def test_html_is_well_formed(registry: dict[str, Any], table: Any) -> None:
    checker = _Checker()
    checker.feed(registry["html"](table(), provenance=PROVENANCE))
    checker.close()
    assert checker.errors == [] and checker.stack == []


def _csv_rows(text: str) -> list[dict[str, str]]:
    body = [line for line in text.splitlines() if not line.startswith("#")]
    return list(csv.DictReader(io.StringIO("\n".join(body))))


def test_csv_reads_back_to_the_same_numbers() -> None:
    table = estimate_table()
    rows = _csv_rows(ESTIMATE_RENDERERS["csv"](table, provenance=PROVENANCE))
    assert len(rows) == len(table.frame)
    for row, rec in zip(rows, table.frame.to_dict(orient="records"), strict=True):
        for key in ("estimate", "se", "ci_low", "ci_high", "cv", "n_eff", "weighted_n"):
            if rec["suppress"] and key in ("estimate", "se", "ci_low", "ci_high", "cv"):
                assert row[key] == ""
            else:
                assert float(row[key]) == rec[key]  # exact: repr round-trips
        assert int(row["n"]) == rec["n"]
        assert row["flags"].split(";") == (list(rec["flags"]) or [""])
        assert row["excluded_dont_know"] == str(rec["reasons"].get("dont_know", 0))


def test_csv_provenance_header_lines() -> None:
    text = ESTIMATE_RENDERERS["csv"](estimate_table(), provenance=PROVENANCE)
    head = [x for x in text.splitlines() if x.startswith("#")]
    assert head[0] == "# wstats provenance"
    assert '# inputs: [{"bytes": 1234, "name": "demo.csv", "sha256": "' + "f" * 64 + '"}]' in head


def test_json_keys_and_nulls() -> None:
    doc = json.loads(ESTIMATE_RENDERERS["json"](estimate_table(), provenance=PROVENANCE))
    assert set(doc) == {"provenance", "results", "rules"}
    assert doc["provenance"]["inputs"][0]["name"] == "demo.csv"
    first = doc["results"][0]
    for key in ("group", "variable", "statistic", "level", "estimate", "se", "ci_low",
                "ci_high", "df", "cv", "deff", "deff_weight", "n_eff", "n", "weighted_n",
                "reasons", "flags", "suppress"):
        assert key in first
    suppressed = [r for r in doc["results"] if r["suppress"]]
    assert len(suppressed) == 1 and suppressed[0]["estimate"] is None
    assert suppressed[0]["group"] == {"dm_sex": "Male"}
    assert doc["rules"]["df<8"] == {"description": RULES["df<8"][0],
                                    "source": RULES["df<8"][1]}


def test_nonresponse_json_follows_the_contract() -> None:
    doc = json.loads(NONRESPONSE_RENDERERS["json"](nonresponse_table(), provenance=PROVENANCE))
    rec = doc["results"][1]
    assert set(rec) >= {"variable", "group", "asked", "counts", "weighted_shares",
                        "nonresponse_rate", "se", "ci_low", "ci_high"}
    assert rec["counts"]["dont_know"] == 20 and rec["group"] == {"dm_sex": "Male"}


def test_latex_escapes_specials() -> None:
    text = ESTIMATE_RENDERERS["latex"](estimate_table(), provenance=PROVENANCE)
    body = [x for x in text.splitlines() if not x.startswith("%")]
    assert all("_" not in x.replace(r"\_", "") for x in body)
    assert r"31.2\%" in text and r"\toprule" in text and r"\bottomrule" in text


@pytest.mark.skipif(not (shutil.which("pdflatex") or shutil.which("lualatex")),
                    reason="no LaTeX engine installed")
def test_latex_compiles(tmp_path: Path) -> None:
    engine = shutil.which("pdflatex") or shutil.which("lualatex")
    assert engine is not None
    body = ESTIMATE_RENDERERS["latex"](estimate_table(), provenance=PROVENANCE)
    doc = ("\\documentclass{article}\n\\usepackage[T1]{fontenc}\n\\usepackage{booktabs}\n"
           f"\\begin{{document}}\n{body}\\end{{document}}\n")
    (tmp_path / "t.tex").write_text(doc, encoding="utf-8")
    run = subprocess.run([engine, "-interaction=nonstopmode", "-halt-on-error", "t.tex"],
                         cwd=tmp_path, capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stdout[-2000:]


@pytest.mark.skipif(importlib.util.find_spec("openpyxl") is None, reason="openpyxl absent")
def test_xlsx_estimate_workbook_reads_back() -> None:
    from openpyxl import load_workbook

    data = ESTIMATE_RENDERERS["xlsx"](estimate_table(), provenance=PROVENANCE)
    wb = load_workbook(io.BytesIO(data))
    assert wb.sheetnames == ["Table", "Estimates", "Notes", "Provenance"]
    est = list(wb["Estimates"].iter_rows(values_only=True))
    col = est[0].index("estimate")
    assert est[1][col] == pytest.approx(7.0125, abs=0)
    assert est[5][col] is None  # the suppressed row
    prov = {r[0]: r[1] for r in wb["Provenance"].iter_rows(values_only=True)}
    assert prov["version"] == '"test"'
    notes = [r[0] for r in wb["Notes"].iter_rows(values_only=True)]
    assert any(str(n).startswith("‡ Flagged by reliability rule neff<30") for n in notes)


def test_missing_provenance_falls_back_to_a_minimal_record() -> None:
    doc = json.loads(ESTIMATE_RENDERERS["json"](estimate_table()))
    assert doc["provenance"]["tool"] == "wstats"
    assert doc["provenance"]["design"]["weight"] == "wt_final"
    assert doc["provenance"]["created_utc"] is None
    assert not math.isnan(doc["results"][0]["estimate"])


def test_every_registered_renderer_resolves_and_json_imports_no_other() -> None:
    # common practice, no source: the registries import a renderer's module on first use;
    # every entry names a function that exists, and writing JSON loads no terminal/html code
    from wstats.render import BOUNDS_RENDERERS

    for registry in (ESTIMATE_RENDERERS, NONRESPONSE_RENDERERS, TABLE_RENDERERS,
                     BOUNDS_RENDERERS):
        for fmt in registry:
            assert callable(registry[fmt]), fmt
    assert tuple(FORMATS[:6]) == ("terminal", "markdown", "latex", "html", "csv", "json")
    loaded = modules_loaded_by("from wstats.render import ESTIMATE_RENDERERS\n"
                               "ESTIMATE_RENDERERS['json']", "wstats.render", "rich")
    assert loaded == ["wstats.render", "wstats.render._csv", "wstats.render._grid",
                      "wstats.render._json"]
