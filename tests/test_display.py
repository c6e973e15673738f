"""Results that display themselves: ``repr`` is the terminal table (with the design line),
``_repr_html_`` the ``--format html`` renderer. Common practice (IPython's display
protocol), no source."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

import wstats
import wstats.readers.display
from conftest import survey_frame, write_survey
from wstats.render import (
    BOUNDS_RENDERERS,
    ESTIMATE_RENDERERS,
    NONRESPONSE_RENDERERS,
    plain_text,
)
from wstats.render._show import show_text


@pytest.fixture(scope="module")
def results(tmp_path_factory: pytest.TempPathFactory) -> dict[str, object]:
    path = write_survey(survey_frame(), tmp_path_factory.mktemp("show") / "s.csv")
    book = path.parent / "book.toml"
    book.write_text('[variables.SLEEP]\ncodes = { 77 = "dont_know", 99 = "refused" }\n'
                    '[variables.SMOKE]\nkind = "categorical"\nlabels = { 1 = "Yes", 2 = "No" }\n',
                    encoding="utf-8")
    data = wstats.read(path, ["SLEEP", "SMOKE", "WT", "STRAT", "PSU"], codebook=book)
    design = wstats.Design("WT", strata="STRAT", psu="PSU")
    return {"estimate": wstats.estimate(data, design, ["SLEEP", "SMOKE"]),
            "compare": wstats.compare(data, design, ["SLEEP"], by="SMOKE"),
            "nonresponse": wstats.nonresponse(data, design, ["SLEEP"]),
            "bounds": wstats.bounds(data, design, "SMOKE")}


def test_estimate_repr_is_the_terminal_table_with_the_design_line(results: dict) -> None:
    table = results["estimate"]
    text = repr(table)
    assert text == show_text(table)
    assert show_text(table, width=100) == plain_text(ESTIMATE_RENDERERS["terminal"](table),
                                                     None, 100).rstrip("\n")
    assert "Design: weight WT" in text and "SLEEP" in text and "array(" not in text
    page = ESTIMATE_RENDERERS["html"](table)
    shown = table._repr_html_()
    # a notebook cell gets the page's table in a div, its style scoped to that div (common
    # practice, no source: a style left global would restyle every table of the notebook)
    assert "<html" not in shown and "<!DOCTYPE" not in shown and "<table>" in shown
    table_part = page[page.index("<table>"):page.index("</table>") + len("</table>")]
    assert table_part in shown
    style = shown[shown.index("<style>") + 7:shown.index("</style>")]
    selectors = [sel for rule in style.split("}") if rule for sel in rule.split("{")[0].split(",")]
    assert selectors and all(sel.startswith(".wstats-result ") for sel in selectors)


def test_nonresponse_repr_and_html(results: dict) -> None:
    table = results["nonresponse"]
    assert repr(table) == show_text(table)
    assert "Design: weight WT" in repr(table) and "nonresponse" in repr(table)
    page = NONRESPONSE_RENDERERS["html"](table)
    assert page[page.index("<table>"):page.index("</table>")] in table._repr_html_()
    assert '<div class="wstats-result">' in table._repr_html_()


def test_bounds_frame_shows_the_bounds_table_and_stays_a_frame(results: dict) -> None:
    frame = results["bounds"]
    assert isinstance(frame, pd.DataFrame)
    assert repr(frame) == show_text(frame)
    assert "Yes" in repr(frame) and frame.attrs["design"]["weight"] == "WT"
    assert "html" not in BOUNDS_RENDERERS
    assert frame._repr_html_().startswith("<pre>")
    part = frame.head(1)  # a slice is a plain frame again, with pandas' own repr
    assert type(part) is pd.DataFrame and "estimate" in repr(part)
    assert part["estimate"].iloc[0] == frame["estimate"].iloc[0]


def test_comparison_shows_itself(results: dict) -> None:
    comparison = results["compare"]
    assert repr(comparison) == show_text(comparison) and "SLEEP" in repr(comparison)
    assert comparison._repr_html_().startswith("<pre>")  # no html format: the text


def test_without_the_render_layer_a_result_shows_a_summary(
        results: dict, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(wstats.readers.display, "_HOOKS", {})
    assert repr(results["estimate"]).startswith("EstimateTable(")
    assert repr(results["nonresponse"]).startswith("NonresponseTable(")
    assert results["estimate"]._repr_html_() is None


def test_first_look_results_show_themselves(tmp_path: Path) -> None:
    path = write_survey(survey_frame(), tmp_path / "s.sav")
    view = wstats.describe_columns(path, search=["sleep"])
    # it used to print as FileOverview(path=..., columns=(ColumnFacts(...),))
    assert repr(view) == show_text(view) and "SLEEP" in repr(view)
    assert "SLEEP" in (view._repr_html_() or "")
    looked = wstats.look(path, ["SMOKE"])
    assert repr(looked) == show_text(looked) and "Yes" in repr(looked)
    assert "Yes" in (looked._repr_html_() or "")
