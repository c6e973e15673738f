"""Publication tables on a terminal: column groups side by side, else panels of columns.

A table whose columns fit the width is drawn once, its row labels wrapped if that is what
makes it fit. Otherwise it is cut into column panels, each repeating the row labels; a
grouping variable's name is drawn once over its columns (``──── Sex ────``), not on each.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from typing import TYPE_CHECKING, Any

from rich.cells import cell_len

if TYPE_CHECKING:
    from rich.console import RenderableType

    from wstats.render._grid import Grid

__all__ = ["panels"]

_GAP = 2  # between two columns: one space of padding and the column separator
_LABEL_MIN = 20  # row labels are wrapped down to this width before columns are split off


def panels(g: Grid, rows: Sequence[tuple[str, ...]], kinds: Sequence[str],
           width: int) -> Iterator[RenderableType]:
    """Yield, per panel, the line of group names (if any) and the table."""
    widths = _widths(g, rows)
    for label, cols in _layout(widths, width):
        sized = {0: label, **{i: widths[i] for i in cols}}
        if g.spans:
            yield _span_line(g, [0, *cols], sized)
        yield _table(g, [0, *cols], sized, rows, kinds)


def _widths(g: Grid, rows: Sequence[tuple[str, ...]]) -> list[int]:
    """Return each column's natural width: its longest cell or header."""
    return [max([cell_len(c.header)] + [cell_len(r[i]) for r in rows if i < len(r)])
            for i, c in enumerate(g.columns)]


def _layout(widths: list[int], width: int) -> list[tuple[int, list[int]]]:
    """Return (label width, column indexes) per panel: one panel when the columns fit."""
    others = list(range(1, len(widths)))
    need = sum(widths[i] + _GAP for i in others)
    if widths[0] + need <= width:
        return [(widths[0], others)]
    label = min(widths[0], max(_LABEL_MIN, width - need))
    if label + need <= width:
        return [(label, others)]
    label = min(widths[0], max(_LABEL_MIN, width // 3))
    out: list[tuple[int, list[int]]] = []
    current: list[int] = []
    used = label
    for i in others:
        if current and used + _GAP + widths[i] > width:
            out.append((label, current))
            current, used = [], label
        current.append(i)
        used += _GAP + widths[i]
    out.append((label, current))
    return out


def _span_line(g: Grid, cols: list[int], sized: dict[int, int]) -> RenderableType:
    """Return the line(s) naming each group over its own columns, centred in a rule.

    A name longer than its columns is wrapped onto more lines over them (bottom-aligned), so
    it never reaches over a neighbour such as the whole-population column.
    """
    from rich.text import Text

    group = {i: s.text for s in g.spans for i in range(s.start, s.stop)}
    blocks: list[tuple[int, int, list[str]]] = []  # (start, span, lines)
    pos, k = sized[0] + _GAP, 1
    while k < len(cols):
        name, j = group.get(cols[k]), k
        while j < len(cols) and group.get(cols[j]) == name:
            j += 1
        span = sum(sized[c] for c in cols[k:j]) + _GAP * (j - k - 1)
        if name:
            blocks.append((pos, span, _ruled(name, span)))
        pos += span + _GAP
        k = j
    height = max((len(b[2]) for b in blocks), default=1)
    lines = [[" "] * pos for _ in range(height)]
    for start, span, texts in blocks:
        for n, text in enumerate(texts, start=height - len(texts)):
            lines[n][start:start + span] = list(text.center(span))
    return Text("\n".join("".join(line).rstrip() for line in lines))


def _ruled(name: str, span: int) -> list[str]:
    """Return *name* centred in a rule of *span* cells, or wrapped to lines of *span*."""
    import textwrap

    if len(name) + 2 <= span:
        fill = span - len(name) - 2
        return ["─" * (fill // 2) + f" {name} " + "─" * (fill - fill // 2)]
    return textwrap.wrap(name, max(span, 1)) or [""]


def _table(g: Grid, cols: list[int], sized: dict[int, int], rows: Sequence[tuple[str, ...]],
           kinds: Sequence[str]) -> RenderableType:
    """Return one rich Table of the chosen columns at the chosen widths."""
    from rich import box
    from rich.table import Table
    from rich.text import Text

    table = Table(box=box.SIMPLE_HEAD, show_edge=False, pad_edge=False, expand=False,
                  padding=(0, 1, 0, 0))
    for i in cols:
        numeric = g.columns[i].align == "r"
        table.add_column(Text(g.columns[i].header), justify="right" if numeric else "left",
                         width=sized[i], no_wrap=numeric, overflow="fold")
    add_rows(table, rows, kinds, cols)
    return table


def add_rows(table: Any, rows: Sequence[tuple[str, ...]], kinds: Sequence[str],
             cols: Sequence[int]) -> None:
    """Add the chosen cells of *rows* to a rich Table, section and summary labels in bold."""
    from rich.text import Text

    for row, kind in zip(rows, kinds, strict=True):
        cells = [Text(row[i] if i < len(row) else "") for i in cols]
        if kind in ("section", "summary"):
            cells[0].stylize("bold")
        table.add_row(*cells)
