"""Markdown (pipe tables): provenance in an HTML comment, a bold title, notes below."""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

from wstats.render._grid import (
    Grid,
    NonresponseLike,
    PublicationLike,
    default_provenance,
    estimate_grid,
    nonresponse_grid,
    provenance_lines,
    publication_grid,
)
from wstats.reports.methods import escape_markdown as _escape

if TYPE_CHECKING:
    from wstats.estimation.results import EstimateTable

__all__ = ["estimate_markdown", "grid_markdown", "nonresponse_markdown", "table_markdown"]


def estimate_markdown(table: EstimateTable, provenance: Mapping[str, Any] | None = None) -> str:
    """Render an estimate table as Markdown text."""
    return grid_markdown(estimate_grid(table), provenance or default_provenance(table))


def nonresponse_markdown(
    table: NonresponseLike, provenance: Mapping[str, Any] | None = None
) -> str:
    """Render a nonresponse table as Markdown text."""
    return grid_markdown(nonresponse_grid(table), provenance or default_provenance(table))


def table_markdown(table: PublicationLike, provenance: Mapping[str, Any] | None = None) -> str:
    """Render a publication table (with its methods paragraph) as Markdown text."""
    return grid_markdown(publication_grid(table), provenance or table.provenance)


def grid_markdown(grid: Grid, provenance: Mapping[str, Any]) -> str:
    """Draw a grid as a pipe table with notes and an optional methods section."""
    out = ["<!--", "wstats provenance", *(_comment(x) for x in provenance_lines(provenance)),
           "-->", "", f"**{_escape(grid.title)}**", ""]
    if grid.caption:
        out += [f"*{_escape(grid.caption)}*", ""]
    headers = grid.headers()
    out.append("| " + " | ".join(_escape(h) for h in headers) + " |")
    out.append("|" + "|".join("---:" if c.align == "r" else ":---" for c in grid.columns) + "|")
    width = len(grid.columns)
    for row, kind in zip(grid.rows, grid.kinds, strict=True):
        if kind == "section":
            cells = [f"**{_escape(row[0])}**", *([""] * (width - 1))]
        else:
            cells = [_escape(c) for c in row]
        out.append("| " + " | ".join(cells) + " |")
    for note in grid.notes:
        out += ["", _escape(note)]
    if grid.methods:
        out += ["", "**Methods.** " + _escape(grid.methods)]
    return "\n".join(out) + "\n"


def _comment(line: str) -> str:
    """Keep a line from closing the surrounding HTML comment."""
    return line.replace("--", "- -")
