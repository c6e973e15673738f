"""LaTeX: a booktabs ``table`` float to ``\\input``; provenance as ``%`` comment lines.

Needs ``\\usepackage{booktabs}`` in the preamble (said in the header comment). Characters with
a meaning in LaTeX are escaped and the few non-ASCII marks used by wstats are written as
commands, so the fragment compiles with pdflatex as well as lualatex.
"""

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
from wstats.reports.methods import escape_latex

if TYPE_CHECKING:
    from wstats.estimation.results import EstimateTable

__all__ = ["estimate_latex", "grid_latex", "nonresponse_latex", "table_latex"]

def estimate_latex(table: EstimateTable, provenance: Mapping[str, Any] | None = None) -> str:
    """Render an estimate table as a booktabs LaTeX table."""
    return grid_latex(estimate_grid(table), provenance or default_provenance(table))


def nonresponse_latex(
    table: NonresponseLike, provenance: Mapping[str, Any] | None = None
) -> str:
    """Render a nonresponse table as a booktabs LaTeX table."""
    return grid_latex(nonresponse_grid(table), provenance or default_provenance(table))


def table_latex(table: PublicationLike, provenance: Mapping[str, Any] | None = None) -> str:
    """Render a publication table (and its methods paragraph) as booktabs LaTeX."""
    return grid_latex(publication_grid(table), provenance or table.provenance)


def grid_latex(grid: Grid, provenance: Mapping[str, Any]) -> str:
    """Draw a grid as a ``table`` float with booktabs rules and notes under the tabular."""
    width = len(grid.columns)
    out = ["% wstats provenance", *(f"% {x}" for x in provenance_lines(provenance)),
           "% requires \\usepackage{booktabs}", r"\begin{table}[htbp]", r"\centering",
           rf"\caption{{{escape_latex(grid.title)}}}",
           r"\begin{tabular}{" + "".join(c.align for c in grid.columns) + "}", r"\toprule"]
    out += _spans(grid)
    out.append(" & ".join(escape_latex(c.header) for c in grid.columns) + r" \\")
    out.append(r"\midrule")
    previous = "data"
    for row, kind in zip(grid.rows, grid.kinds, strict=True):
        if kind == "section":
            previous = kind
            out.append(rf"\multicolumn{{{width}}}{{l}}{{\textit{{{escape_latex(row[0])}}}}} \\")
            continue
        if kind == "summary" and kind != previous:
            out.append(r"\midrule")
        previous = kind
        out.append(" & ".join(escape_latex(c) for c in row) + r" \\")
    out += [r"\bottomrule", r"\end{tabular}"]
    notes = [grid.caption, *grid.notes] if grid.caption else list(grid.notes)
    if notes:
        out += [r"\par\smallskip", r"\begin{minipage}{\linewidth}\footnotesize"]
        out += [escape_latex(n) + r"\par" for n in notes]
        out.append(r"\end{minipage}")
    out.append(r"\end{table}")
    if grid.methods:
        out += ["", r"\paragraph{Methods.} " + escape_latex(grid.methods)]
    return "\n".join(out) + "\n"


def _spans(grid: Grid) -> list[str]:
    """Return the spanning header row and its cmidrules (nothing when no spans)."""
    if not grid.spans:
        return []
    cells, rules, col = [], [], 0
    for span in grid.spans:
        cells += [""] * (span.start - col)
        cells.append(rf"\multicolumn{{{span.stop - span.start}}}{{c}}{{{escape_latex(span.text)}}}")
        rules.append(rf"\cmidrule(lr){{{span.start + 1}-{span.stop}}}")
        col = span.stop
    cells += [""] * (len(grid.columns) - col)
    return [" & ".join(cells) + r" \\", " ".join(rules)]
