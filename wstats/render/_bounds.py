"""Sensitivity bounds (a pandas frame from ``wstats.reports.bounds.bounds``) in every format.

The terminal and markdown share one Grid (design line, a block per variable, flag marks and
notes) with the estimate and nonresponse tables. A valid-case estimate that the reliability
standard suppresses is suppressed with its interval and bounds (they would reveal it).
"""

from __future__ import annotations

import csv
import io
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

from wstats.render._csv import SUPPRESSED_FIELDS, value_text
from wstats.render._grid import Column, Grid, design_line, provenance_lines
from wstats.reports.cells import (
    SUPPRESSED,
    FlagNotes,
    fmt_count,
    fmt_number,
    group_text,
    interval,
)
from wstats.reports.cells import with_marks as _with_marks

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["BOUNDS_HIDDEN", "bounds_csv", "bounds_grid", "bounds_json", "bounds_markdown",
           "bounds_terminal"]

#: Fields emptied in written outputs when the valid-case estimate is suppressed.
BOUNDS_HIDDEN: tuple[str, ...] = (*(f for f in SUPPRESSED_FIELDS if f not in ("cv", "deff")),
                                  "lower", "upper")
_DEFINITION = ("Bounds: the proportion if every respondent asked whose answer is unknown "
               "had given this level (upper) or another (lower); Unknown: their weighted "
               "share of those asked.")


def _pct(x: Any) -> str:
    """Return a proportion as a percent with one decimal ('' when not available)."""
    text = fmt_number(None if x is None else 100 * float(x), 1)
    return f"{text}%" if text else ""


def _cells(r: Mapping[str, Any], notes: FlagNotes) -> list[str]:
    """Return Estimate, CI, Lower, Upper, Unknown and n of one row (suppressed: hidden)."""
    flags = tuple(r.get("flags") or ())
    # an empty domain has nothing to hide: "n/a", as nonresponse shows it, not "[suppressed]"
    empty = "empty" in flags
    suppress = bool(r.get("suppress", False)) and not empty
    marks = notes.mark(flags, suppress)
    n = fmt_count(r["n_valid"])
    if empty:
        return [_with_marks("n/a", marks), "", "", "", "", n]
    if suppress:
        return [_with_marks(SUPPRESSED, marks), "", "", "", _pct(r["unknown_share"]), n]
    ci = interval(fmt_number(100 * float(r["ci_low"]), 1), fmt_number(100 * float(r["ci_high"]), 1))
    return [_with_marks(_pct(r["estimate"]), marks), ci, _pct(r["lower"]), _pct(r["upper"]),
            _pct(r["unknown_share"]), n]


def bounds_grid(frame: pd.DataFrame) -> Grid:
    """Return the grid of a bounds frame: a block per variable, a row per domain and level."""
    attrs = frame.attrs
    by, level = list(attrs.get("by", ())), float(attrs.get("level", 0.95))
    ci = f"{fmt_number(level * 100, 1).rstrip('0').rstrip('.')}% CI"
    cols = [*(Column(b, b, "l") for b in by), Column("level", "Level", "l"),
            Column("estimate", "Estimate"), Column("ci", ci), Column("lower", "Lower"),
            Column("upper", "Upper"), Column("unknown", "Unknown"), Column("n", "n")]
    notes, current = FlagNotes(), None
    last: tuple[str, ...] | None = None
    rows: list[tuple[str, ...]] = []
    kinds: list[str] = []
    for rec in frame.to_dict(orient="records"):
        r = {str(k): v for k, v in rec.items()}
        if r["variable"] != current:
            current = r["variable"]
            rows.append((f"{current} (percent)",))
            kinds.append("section")
        domain: tuple[str, ...] = (str(current), *(group_text(r[b]) for b in by))
        cells = _cells(r, notes)
        if domain == last:  # a domain's unknown share and n are shown once, on its first level
            cells[-2:] = ["", ""]
        rows.append(tuple([*domain[1:], str(r["level"]), *cells]))
        kinds.append("data")
        last = domain
    return Grid(title="Proportions and their nonresponse bounds", columns=tuple(cols),
                rows=tuple(rows), kinds=tuple(kinds), notes=(*notes.notes(), _DEFINITION),
                caption=design_line(attrs.get("design") or {}, attrs.get("settings") or {},
                                    level))


def bounds_terminal(frame: pd.DataFrame, provenance: Mapping[str, Any] | None = None) -> Any:
    """Return a rich renderable of the bounds next to the valid-case estimates."""
    from wstats.render._terminal import GridView

    return GridView(bounds_grid(frame), per_section=True)


def bounds_markdown(frame: pd.DataFrame, provenance: Mapping[str, Any] | None = None) -> str:
    """Return a markdown table (the grid's rows) with the provenance in an HTML comment."""
    g = bounds_grid(frame)
    lines = ["<!--", "wstats provenance",
             *(ln.replace("--", "- -") for ln in provenance_lines(provenance)), "-->", "",
             f"**{g.title}**", "", g.caption, ""]
    heads = ["Variable", *(c.header for c in g.columns)]
    lines.append("| " + " | ".join(heads) + " |")
    lines.append("|" + "|".join("---:" if c.align == "r" else "---"
                                for c in (Column("v", "", "l"), *g.columns)) + "|")
    variable = ""
    for row, kind in zip(g.rows, g.kinds, strict=True):
        if kind == "section":
            variable = row[0].rsplit(" (", 1)[0]
            continue
        lines.append("| " + " | ".join([variable, *row]) + " |")
    lines += ["", *g.notes]
    return "\n".join(lines) + "\n"


def _hidden(frame: pd.DataFrame) -> pd.DataFrame:
    """Return *frame* with the numbers of suppressed rows emptied (NaN)."""
    if "suppress" not in frame.columns or not frame["suppress"].any():
        return frame
    out = frame.copy()
    out.loc[out["suppress"].astype(bool), list(BOUNDS_HIDDEN)] = float("nan")
    return out


def bounds_csv(frame: pd.DataFrame, provenance: Mapping[str, Any] | None = None) -> str:
    """Return tidy CSV with full-precision numbers, provenance in leading # lines."""
    buf = io.StringIO()
    buf.write("".join(f"# {ln}\n" for ln in ["wstats provenance",
                                             *provenance_lines(provenance)]))
    w = csv.writer(buf, lineterminator="\n")
    w.writerow([str(c) for c in frame.columns])
    for row in _hidden(frame).itertuples(index=False):
        w.writerow([value_text(v) for v in row])
    return buf.getvalue()


def bounds_json(frame: pd.DataFrame, provenance: Mapping[str, Any] | None = None) -> str:
    """Return ``{"provenance", "settings", "results"}`` JSON."""
    from wstats.render._json import _dump
    from wstats.reports.bounds import bounds_records

    settings = {k: v for k, v in frame.attrs.items() if k != "design"}
    return _dump({"provenance": dict(provenance or {}), "settings": settings,
                  "results": bounds_records(_hidden(frame))})
