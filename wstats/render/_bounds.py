"""Sensitivity bounds (a pandas frame from ``wstats.reports.bounds.bounds``) in every format."""

from __future__ import annotations

import csv
import io
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

from wstats.render._csv import value_text
from wstats.render._grid import provenance_lines

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["bounds_csv", "bounds_json", "bounds_markdown", "bounds_terminal"]

_HEADINGS = ("Variable", "Level", "Estimate", "95% CI", "Lower", "Upper", "Unknown")


def _pct(x: float) -> str:
    """Return a proportion as a percent with one decimal."""
    return f"{100 * x:.1f}%" if x == x else "–"


def _headings(frame: pd.DataFrame) -> list[str]:
    """Return the column headings, one per by-variable after the level."""
    return [*_HEADINGS[:2], *frame.attrs.get("by", ()), *_HEADINGS[2:]]


def _rows(frame: pd.DataFrame) -> list[list[str]]:
    """Return display rows: variable, level, groups, estimate, CI, bounds, unknown share."""
    by = list(frame.attrs.get("by", ()))
    out = []
    for r in frame.to_dict(orient="records"):
        groups = ["All" if r.get(b) is None else str(r[b]) for b in by]
        out.append([str(r["variable"]), str(r["level"]), *groups, _pct(r["estimate"]),
                    f"{100 * r['ci_low']:.1f}–{100 * r['ci_high']:.1f}", _pct(r["lower"]),
                    _pct(r["upper"]), _pct(r["unknown_share"])])
    return out


def bounds_terminal(frame: pd.DataFrame, provenance: Mapping[str, Any] | None = None) -> Any:
    """Return a rich table of the bounds next to the valid-case estimates."""
    from rich import box
    from rich.table import Table

    table = Table(title="Proportions and their nonresponse bounds", title_justify="left",
                  box=box.SIMPLE_HEAD, padding=(0, 1), pad_edge=False)
    heads = _headings(frame)
    left = len(heads) - 5
    for i, h in enumerate(heads):
        table.add_column(h, justify="left" if i < left else "right", no_wrap=True)
    for row in _rows(frame):
        table.add_row(*row)
    table.caption = ("Bounds: the proportion if every respondent asked whose answer is unknown "
                     "had given this level (upper) or another (lower); Unknown: their weighted "
                     "share of those asked.")
    table.caption_justify = "left"
    return table


def bounds_markdown(frame: pd.DataFrame, provenance: Mapping[str, Any] | None = None) -> str:
    """Return a markdown table with the provenance in an HTML comment."""
    lines = ["<!--", "wstats provenance",
             *(ln.replace("--", "- -") for ln in provenance_lines(provenance)), "-->", ""]
    heads = _headings(frame)
    lines.append("| " + " | ".join(heads) + " |")
    lines.append("|" + "|".join(["---"] * (len(heads) - 5) + ["---:"] * 5) + "|")
    lines += ["| " + " | ".join(r) + " |" for r in _rows(frame)]
    return "\n".join(lines) + "\n"


def bounds_csv(frame: pd.DataFrame, provenance: Mapping[str, Any] | None = None) -> str:
    """Return tidy CSV with full-precision numbers, provenance in leading # lines."""
    buf = io.StringIO()
    buf.write("".join(f"# {ln}\n" for ln in ["wstats provenance",
                                             *provenance_lines(provenance)]))
    w = csv.writer(buf, lineterminator="\n")
    w.writerow([str(c) for c in frame.columns])
    for row in frame.itertuples(index=False):
        w.writerow([value_text(v) for v in row])
    return buf.getvalue()


def bounds_json(frame: pd.DataFrame, provenance: Mapping[str, Any] | None = None) -> str:
    """Return ``{"provenance", "settings", "results"}`` JSON."""
    from wstats.render._json import _dump
    from wstats.reports.bounds import bounds_records

    return _dump({"provenance": dict(provenance or {}), "settings": dict(frame.attrs),
                  "results": bounds_records(frame)})
