"""HTML: a standalone, well-formed page with the provenance in a leading comment."""

from __future__ import annotations

from collections.abc import Mapping
from html import escape
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

if TYPE_CHECKING:
    from wstats.estimation.results import EstimateTable

__all__ = ["estimate_html", "grid_html", "nonresponse_html", "table_html"]

_STYLE = (
    "table{border-collapse:collapse;font-variant-numeric:tabular-nums}"
    "th,td{padding:2px 8px}thead th{border-bottom:1px solid #000}"
    "tbody tr.section th{text-align:left;padding-top:6px}"
    "tr.summary td,tr.summary th{border-top:1px solid #999}"
    ".num{text-align:right;white-space:nowrap}.txt{text-align:left}"
    "table{border-top:2px solid #000;border-bottom:2px solid #000}"
)


def estimate_html(table: EstimateTable, provenance: Mapping[str, Any] | None = None) -> str:
    """Render an estimate table as an HTML page."""
    return grid_html(estimate_grid(table), provenance or default_provenance(table))


def nonresponse_html(table: NonresponseLike, provenance: Mapping[str, Any] | None = None) -> str:
    """Render a nonresponse table as an HTML page."""
    return grid_html(nonresponse_grid(table), provenance or default_provenance(table))


def table_html(table: PublicationLike, provenance: Mapping[str, Any] | None = None) -> str:
    """Render a publication table (with its methods paragraph) as an HTML page."""
    return grid_html(publication_grid(table), provenance or table.provenance)


def grid_html(grid: Grid, provenance: Mapping[str, Any]) -> str:
    """Draw a grid as an HTML page: caption, two-level head when spans exist, notes."""
    comment = "\n".join(x.replace("--", "- -") for x in provenance_lines(provenance))
    out = [
        "<!DOCTYPE html>",
        f"<!--\nwstats provenance\n{comment}\n-->",
        '<html lang="en">',
        "<head>",
        '<meta charset="utf-8">',
        f"<title>{escape(grid.title)}</title>",
        f"<style>{_STYLE}</style>",
        "</head>",
        "<body>",
        "<table>",
        f"<caption>{escape(grid.title)}</caption>",
        *_head(grid),
        "<tbody>",
        *_body(grid),
        "</tbody>",
        "</table>",
    ]
    if grid.caption:
        out.append(f'<p class="design">{escape(grid.caption)}</p>')
    out += [f'<p class="note">{escape(n)}</p>' for n in grid.notes]
    if grid.methods:
        out.append(f'<p class="methods"><strong>Methods.</strong> {escape(grid.methods)}</p>')
    out += ["</body>", "</html>"]
    return "\n".join(out) + "\n"


def _head(grid: Grid) -> list[str]:
    """Return the thead rows: a spanning row for grouping variables, then column headers."""
    rows = ["<thead>"]
    if grid.spans:
        cells, col = [], 0
        for span in grid.spans:
            if span.start > col:
                cells.append(f'<th colspan="{span.start - col}"></th>')
            cells.append(f'<th colspan="{span.stop - span.start}" scope="colgroup">'
                         f"{escape(span.text)}</th>")
            col = span.stop
        if col < len(grid.columns):
            cells.append(f'<th colspan="{len(grid.columns) - col}"></th>')
        rows.append("<tr>" + "".join(cells) + "</tr>")
    heads = "".join(f'<th scope="col" class="{_cls(c.align)}">{escape(c.header)}</th>'
                    for c in grid.columns)
    rows += ["<tr>" + heads + "</tr>", "</thead>"]
    return rows


def _body(grid: Grid) -> list[str]:
    """Return the tbody rows; section rows span the table, first cells are row headers."""
    out = []
    width = len(grid.columns)
    for row, kind in zip(grid.rows, grid.kinds, strict=True):
        if kind == "section":
            out.append(f'<tr class="section"><th colspan="{width}" scope="rowgroup">'
                       f"{escape(row[0])}</th></tr>")
            continue
        cells = [f'<th scope="row" class="{_cls(grid.columns[0].align)}">{escape(row[0])}</th>']
        cells += [f'<td class="{_cls(c.align)}">{escape(v)}</td>'
                  for c, v in zip(grid.columns[1:], row[1:], strict=True)]
        out.append(f'<tr class="{kind}">' + "".join(cells) + "</tr>")
    return out


def _cls(align: str) -> str:
    """Return the CSS class for an alignment."""
    return "num" if align == "r" else "txt"
