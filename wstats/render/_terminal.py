"""Terminal: rich renderables (only ``cli.py`` prints them).

Readable without colour: flags are marks in the cell text with footnotes naming the rule,
suppressed cells say ``[suppressed]``, numbers are right-aligned and never wrapped. A table
wider than the screen is cut into column blocks, each repeating the leading label columns,
instead of squeezing numbers.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterable, Sequence
from typing import TYPE_CHECKING, Any

from rich.cells import cell_len

from wstats.render._grid import (
    Grid,
    NonresponseLike,
    PublicationLike,
    estimate_grid,
    nonresponse_grid,
    publication_grid,
)
from wstats.render._panels import add_rows

if TYPE_CHECKING:
    from rich.console import Console, ConsoleOptions, RenderableType, RenderResult

    from wstats.estimation.results import EstimateTable

__all__ = [
    "GridView", "estimate_terminal", "nonresponse_terminal", "render_check", "table_terminal",
]

_SHORT = 16  # label columns up to this width are kept on one line
_WRAP_AT = 14  # a wrappable text column is given at least this width
_LABEL_WRAP = 20  # a long label column is wrapped to this width rather than split the table
_PAD = 2  # what rich adds per column: the separator and one space of padding on the left
#: Longest cell text shown; longer labels (a CSV cell of a million characters) are cut here,
#: so that drawing takes time in proportion to the table, not to the text (machine formats
#: such as csv and json keep the whole text).
MAX_CELL = 200


def estimate_terminal(table: EstimateTable, provenance: Any = None) -> RenderableType:
    """Return a rich renderable of an estimate table (a block per variable)."""
    return GridView(estimate_grid(table), per_section=True)


def nonresponse_terminal(table: NonresponseLike, provenance: Any = None) -> RenderableType:
    """Return a rich renderable of a nonresponse table (a block per variable)."""
    return GridView(nonresponse_grid(table), per_section=True)


def table_terminal(table: PublicationLike, provenance: Any = None) -> RenderableType:
    """Return a rich renderable of a publication table (methods paragraph below)."""
    return GridView(publication_grid(table), per_section=False)


class GridView:
    """Draw a Grid at whatever width the console offers."""

    def __init__(self, grid: Grid, per_section: bool) -> None:
        self.grid = _shortened(grid)
        self.per_section = per_section

    def __rich_console__(self, console: Console, options: ConsoleOptions) -> RenderResult:
        from rich.text import Text

        g = self.grid
        yield Text(g.title, style="bold")
        if g.caption:
            yield Text(g.caption)
        for title, rows, kinds in _blocks(g, self.per_section):
            if not self.per_section:  # a publication table: groups side by side, or panels
                from wstats.render._panels import panels

                yield from panels(g, rows, kinds, options.max_width)
                continue
            for cols in _column_blocks(g, rows, options.max_width):
                yield _table(g, cols, rows, kinds, title)
        for note in g.notes:
            yield Text(note)
        if g.methods:
            yield Text("")
            yield Text("Methods. " + g.methods)


def _shortened(g: Grid) -> Grid:
    """Return *g* with cells and titles longer than MAX_CELL cut, and a note saying so."""
    rows = tuple(tuple(_cut(c) for c in row) for row in g.rows)
    if rows == g.rows and len(g.title) <= MAX_CELL:
        return g
    note = (f"Text longer than {MAX_CELL} characters is cut here (ending in '…'); the csv and "
            "json formats keep it whole.")
    return dataclasses.replace(g, title=_cut(g.title), rows=rows, notes=(*g.notes, note))


def _cut(text: str) -> str:
    """Return *text* cut to MAX_CELL characters."""
    return text if len(text) <= MAX_CELL else text[: MAX_CELL - 1] + "…"


def _blocks(
    g: Grid, per_section: bool
) -> Iterable[tuple[str | None, list[tuple[str, ...]], list[str]]]:
    """Yield (title, rows, kinds) per section, or the whole grid as one block."""
    if not per_section:
        yield None, list(g.rows), list(g.kinds)
        return
    title: str | None = None
    rows: list[tuple[str, ...]] = []
    kinds: list[str] = []
    for row, kind in zip(g.rows, g.kinds, strict=True):
        if kind == "section":
            if rows or title is not None:
                yield title, rows, kinds
            title, rows, kinds = row[0], [], []
        else:
            rows.append(row)
            kinds.append(kind)
    if rows or title is not None:
        yield title, rows, kinds


def _column_blocks(
    g: Grid, rows: Sequence[tuple[str, ...]], width: int
) -> list[list[int]]:
    """Split column indexes into blocks that fit *width*, repeating leading text columns."""
    headers = _headers(g)
    lead = _leading_text(g)
    need = []
    for i, col in enumerate(g.columns):
        longest = max([cell_len(h) for h in headers[i].split("\n")]
                      + [cell_len(r[i]) for r in rows if i < len(r)])
        # trailing text (the reason breakdown) may wrap; numbers and labels may not
        wrap = col.align == "l" and i >= lead
        need.append((min(longest, _WRAP_AT) if wrap else longest) + _PAD)
    # a Level column that is empty in this block (means beside proportions) is left out
    base = [i for i in range(lead) if g.columns[i].key != "level"
            or any(i < len(r) and r[i] for r in rows)]
    blocks = _split(base, range(lead, len(g.columns)), need, width)
    if len(blocks) > 1:  # long labels (value labels of a file) wrap before columns split off
        narrow = [min(n, _LABEL_WRAP + _PAD) if i in base and n - _PAD > _SHORT else n
                  for i, n in enumerate(need)]
        fewer = _split(base, range(lead, len(g.columns)), narrow, width)
        blocks = fewer if len(fewer) < len(blocks) else blocks
    return blocks


def _split(base: list[int], others: Iterable[int], need: list[int], width: int
           ) -> list[list[int]]:
    """Return blocks of column indexes, each *base* plus the others that fit *width*."""
    current, used = list[int](), sum(need[i] for i in base)
    blocks: list[list[int]] = []
    for i in others:
        if current and used + need[i] - _PAD > width:
            blocks.append(base + current)
            current, used = [], sum(need[i] for i in base)
        current.append(i)
        used += need[i]
    blocks.append(base + current)
    return blocks


def _leading_text(g: Grid) -> int:
    """Return how many leading columns are labels (repeated in every column block)."""
    n = 0
    while n < len(g.columns) and g.columns[n].align == "l" and g.columns[n].key != "not_valid":
        n += 1
    return max(n, 1)


def _headers(g: Grid) -> list[str]:
    """Return headers with the grouping variable on a first line (``Sex\\nMale``)."""
    out = [c.header for c in g.columns]
    for s in g.spans:
        for i in range(s.start, s.stop):
            out[i] = f"{s.text}\n{out[i]}"
    return out


def _table(
    g: Grid, cols: list[int], rows: Sequence[tuple[str, ...]], kinds: Sequence[str],
    title: str | None,
) -> RenderableType:
    """Build one rich Table of the chosen columns."""
    from rich import box
    from rich.table import Table
    from rich.text import Text

    table = Table(title=title, title_justify="left", title_style="bold", box=box.SIMPLE_HEAD,
                  show_edge=False, pad_edge=False, expand=False, padding=(0, 1, 0, 0))
    headers = _headers(g)
    for i in cols:
        numeric = g.columns[i].align == "r"
        longest = max((cell_len(r[i]) for r in rows if i < len(r)), default=0)
        table.add_column(Text(headers[i]), justify="right" if numeric else "left",
                         no_wrap=numeric or longest <= _SHORT, overflow="fold")
    add_rows(table, rows, kinds, cols)
    return table


def _meaning(row: dict[str, Any]) -> str:
    """Return a check row's reason, or for a substitute code the value it became."""
    value = row.get("value")
    if row["reason"] == "valid" and isinstance(value, float) and value == value:
        return f"→ {value:g} (valid)"
    return str(row["reason"])


def render_check(report: Any) -> RenderableType:
    """Return a rich renderable of a codebook check (``wstats.decoding.draft.CodebookCheck``)."""
    from rich.console import Group
    from rich.text import Text

    parts: list[RenderableType] = [Text("Codebook check", style="bold")]
    explained = report.frame
    if len(explained):
        rows = [(str(r["variable"]), str(r["raw_code"]), _meaning(r),
                 f"{int(r['count']):,}") for r in explained.to_dict(orient="records")]
        parts.append(_plain_table("Codes explained by a rule",
                                  ["Variable", "Raw code", "Meaning", "Rows"], rows))
    unexplained = report.unexplained
    if len(unexplained):
        odd = [(str(r["variable"]), str(r["code"]), f"{int(r['count']):,}")
               for r in unexplained.to_dict(orient="records")]
        parts.append(_plain_table("Values no rule explains (now 'invalid')",
                                  ["Variable", "Value", "Rows"], odd))
    for name, close in report.absent:
        hint = f"; did you mean '{close}'?" if close else ""
        parts.append(Text(f"absent: codebook variable {name} is not in the file{hint}"))
    parts += [Text(f"problem: {p}") for p in report.problems]
    parts.append(Text("OK: every codebook variable was found and applied" if report.ok
                      else "NOT OK: see the absent variables and problems above"))
    return Group(*parts)


def _plain_table(title: str, headers: Sequence[str],
                 rows: Sequence[Sequence[str]]) -> RenderableType:
    """Return a simple rich table, counts right-aligned (the last column)."""
    from rich import box
    from rich.table import Table
    from rich.text import Text

    table = Table(title=title, title_justify="left", box=box.SIMPLE_HEAD, show_edge=False,
                  pad_edge=False)
    for i, h in enumerate(headers):
        last = i == len(headers) - 1
        table.add_column(Text(h), justify="right" if last else "left", no_wrap=last)
    for row in rows:
        table.add_row(*(Text(c) for c in row))
    return table
