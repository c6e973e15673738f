"""Plain-text helpers of the first-look screens: cutting, column fitting, numbers, bars."""

from __future__ import annotations

import math
from collections.abc import Sequence

__all__ = ["bar", "cut", "fit_columns", "number"]

_ELLIPSIS = "…"
_GAP = "  "
_EIGHTHS = " ▏▎▍▌▋▊▉"


def cut(text: str, width: int) -> str:
    """Return *text* cut to *width* characters, ending in an ellipsis when cut."""
    if len(text) <= width:
        return text
    return text[: max(width - 1, 0)] + _ELLIPSIS if width > 0 else ""


def number(value: float | int | None, digits: int = 0) -> str:
    """Format a count or value with thousands separators; '' for None, '-' for NaN."""
    if value is None:
        return ""
    if isinstance(value, float) and math.isnan(value):
        return "-"
    if digits == 0 and float(value).is_integer():
        return f"{int(value):,}"
    return f"{value:,.{digits}f}" if digits else f"{value:,.4g}"


def bar(share: float, width: int) -> str:
    """Draw a share (0..1) as Unicode blocks filling at most *width* characters."""
    if not share > 0:
        return ""
    eighths = max(1, round(min(share, 1.0) * width * 8))
    full, part = divmod(eighths, 8)
    return "█" * full + (_EIGHTHS[part] if part else "")


def fit_columns(head: Sequence[str], rows: Sequence[Sequence[str]], width: int, *,
                flexible: int, right: Sequence[int] = (),
                shrinkable: dict[int, int] | None = None) -> list[str]:
    """Lay out a table of text cells in at most *width* characters per line.

    Column *flexible* gives up width first (down to 10 characters), then the *shrinkable*
    columns down to their given minimum, then *flexible* down to 4; cut cells end in an
    ellipsis. Columns in *right* are right-aligned. Returns the heading line, a rule and the
    rows.
    """
    widths = [max([len(h), *(len(r[i]) for r in rows)]) for i, h in enumerate(head)]
    room = width - len(_GAP) * (len(head) - 1)
    steps = [(flexible, min(widths[flexible], 10)),
             *((i, m) for i, m in (shrinkable or {}).items()), (flexible, 4)]
    for col, least in steps:
        over = sum(widths) - room
        if over > 0:
            widths[col] = max(least, widths[col] - over)

    def line(cells: Sequence[str]) -> str:
        parts = [cut(c, w).rjust(w) if i in right else cut(c, w).ljust(w)
                 for i, (c, w) in enumerate(zip(cells, widths, strict=True))]
        return _GAP.join(parts).rstrip()

    return [line(head), _GAP.join("-" * w for w in widths), *(line(r) for r in rows)]
