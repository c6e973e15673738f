"""Charts: dot-and-interval across domains, stacked reasons; deterministic bytes; no matplotlib."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

from wstats.decoding.columns import Dataset, DecodedColumn
from wstats.decoding.reasons import DONT_KNOW, REFUSED, SKIPPED, VALID, Reasons
from wstats.design.declared import Design
from wstats.errors import OutputError, UsageError
from wstats.estimation.estimate import estimate
from wstats.estimation.results import EstimateTable
from wstats.reports.nonresponse import nonresponse
from wstats.reports.plots import (
    plot_domains,
    plot_format,
    plot_reasons,
    render_domains,
    render_reasons,
)


@pytest.fixture(scope="module")
def data() -> Dataset:
    rng = np.random.default_rng(3)
    n = 120
    vocab = Reasons(["not_measured"])
    reasons = rng.choice([VALID, VALID, VALID, SKIPPED, DONT_KNOW, REFUSED, 6], size=n)
    reasons = reasons.astype(np.int8)
    y = np.where(reasons == VALID, rng.integers(1, 3, n).astype(float), np.nan)
    cols = {
        "Y": DecodedColumn("Y", y, reasons, vocab, kind="categorical",
                           value_labels={1.0: "Yes", 2.0: "No"}),
        "X": DecodedColumn("X", rng.normal(10, 2, n), np.zeros(n, np.int8), vocab),
        "G": DecodedColumn("G", rng.integers(1, 4, n).astype(float), np.zeros(n, np.int8),
                           vocab, kind="categorical", value_labels={1.0: "North", 2.0: "East",
                                                                    3.0: "West"}),
        "W": DecodedColumn("W", rng.uniform(1, 3, n), np.zeros(n, np.int8), vocab),
    }
    return Dataset(cols, vocab, n)


def test_domains_svg_is_deterministic_and_labels_every_domain(data: Dataset) -> None:
    table = estimate(data, Design("W"), ["X", "Y"], by=["G"])
    svg = render_domains(table, "svg")
    assert svg == render_domains(table, "svg")
    text = svg.decode()
    assert text.startswith("<?xml") and "<svg" in text
    # matplotlib writes each text element's string as an SVG comment.
    for label in ("G=North", "G=East", "G=West", "all", "X — mean", "Y — proportion: Yes"):
        assert f"<!-- {label} -->" in text
    assert "<dc:date>" not in text  # metadata date left out so the bytes reproduce


def test_reasons_png_and_svg(data: Dataset) -> None:
    table = nonresponse(data, Design("W"), ["Y"], by=["G"])
    png = render_reasons(table, "png")
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    assert png == render_reasons(table, "png")
    text = render_reasons(table, "svg").decode()
    for label in ("valid", "skipped", "dont_know", "refused", "not_measured", "Y | G=East"):
        assert f"<!-- {label} -->" in text
    assert "<!-- invalid -->" not in text  # reasons that never occur are left out


def test_plot_writes_by_extension_and_refuses_to_overwrite(data: Dataset, tmp_path: Path
                                                           ) -> None:
    table = estimate(data, Design("W"), ["X"])
    out = plot_domains(table, tmp_path / "x.svg")
    assert out.read_bytes() == render_domains(table, "svg")
    with pytest.raises(OutputError, match="exists"):
        plot_domains(table, tmp_path / "x.svg")
    plot_domains(table, tmp_path / "x.svg", overwrite=True)
    nr = nonresponse(data, Design("W"), ["Y"])
    assert plot_reasons(nr, tmp_path / "r.png").read_bytes()[:4] == b"\x89PNG"
    with pytest.raises(UsageError, match=r"must end in one of \.png, \.svg \(got '\.pdf'\)"):
        plot_domains(table, tmp_path / "x.pdf")
    assert plot_format("A.SVG") == "svg"


def test_missing_matplotlib_names_the_extra(data: Dataset, monkeypatch: pytest.MonkeyPatch
                                            ) -> None:
    table = estimate(data, Design("W"), ["X"])
    for mod in [m for m in sys.modules if m == "matplotlib" or m.startswith("matplotlib.")]:
        monkeypatch.delitem(sys.modules, mod)
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    with pytest.raises(UsageError, match=r"pip install 'wstats\[plot\]'"):
        render_domains(table, "png")


def test_empty_tables_are_refused(data: Dataset) -> None:
    table = estimate(data, Design("W"), ["X"])
    empty = EstimateTable.from_frame(table.frame.iloc[:0], table.by, table.level, table.design,
                                     table.settings)
    with pytest.raises(UsageError, match="no rows"):
        render_domains(empty, "svg")
