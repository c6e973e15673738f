"""Renderers of a look at variables (``wstats look``): terminal text and JSON.

Per variable: a heading, the code table (code, rows, label, what it becomes; unexplained
codes marked ``?``), the decoded summary and a chart of Unicode blocks (a weighted share per
level, or a weighted histogram). Every line fits the given width (80 by default).
"""

from __future__ import annotations

import json
from typing import Any

from wstats.render._text import bar, cut, fit_columns, number

__all__ = ["look_json", "look_terminal"]

_MARK = "?"


def look_terminal(result: Any, width: int = 80) -> str:
    """Return the look as lines of at most *width* characters."""
    weight = f"weighted by {result.weight}" if result.weight else "unweighted (no --weight)"
    source = f"codebook {result.codebook}" if result.codebook else "the file's own labels"
    lines = [cut(f"{result.path}: {weight}", width), cut(f"codes read with {source}", width)]
    if result.unweighted_rows:
        lines.append(cut(f"{result.unweighted_rows:,} rows have no positive weight and count "
                         "0 in weighted figures", width))
    for var in result.variables:
        lines += ["", *_variable(var, width, bool(result.weight))]
    return "\n".join(lines) + "\n"


def _variable(var: Any, width: int, weighted: bool) -> list[str]:
    """Return the lines of one variable."""
    kind = f"({var.kind})"
    room = width - len(var.name) - len(kind) - 4
    label = f"  {cut(var.label, room)}" if var.label and room > 3 else ""
    head = cut(f"{var.name}{label}  {kind}", width)  # the kind stays; the label gives way
    return [head, "=" * min(len(head), width), *_codes(var, width), "",
            *_summary(var, width, weighted), *_chart(var, width, weighted)]


def _codes(var: Any, width: int) -> list[str]:
    """Return the code table with a note for unexplained codes."""
    rows = [[c.code + ("" if c.explained else f" {_MARK}"), number(c.rows), c.label or "",
             _becomes(c)] for c in var.codes]
    lines = fit_columns(["code", "rows", "label", "becomes"], rows, width, flexible=2,
                        right=(1,), shrinkable={3: 12, 0: 6})
    if any(not c.explained for c in var.codes):
        lines.append(cut(f"{_MARK} no codebook rule or label explains this code", width))
    return lines


def _becomes(code: Any) -> str:
    """Say what a raw code becomes: a value, values (a range row) or a reason."""
    if code.reason != "valid":
        return str(code.reason)
    if code.codes > 1:
        return f"values ({code.codes:,} codes)"
    if code.value != code.value:  # NaN: a text value
        return "value"
    return f"value {code.value:g}"


def _summary(var: Any, width: int, weighted: bool) -> list[str]:
    """Return the summary lines: valid n, means, quartiles, range, reasons."""
    out = [f"valid {var.n_valid:,} of {var.n_rows:,} rows"]
    if var.mean == var.mean:  # not NaN
        out.append(f"mean {number(var.mean, 3)}" + (
            f"   weighted mean {number(var.weighted_mean, 3)}" if weighted else ""))
        q1, q2, q3 = (number(q) for q in var.quartiles)
        out.append(f"min {number(var.minimum)}   {'weighted ' if weighted else ''}quartiles "
                   f"{q1} | {q2} | {q3}   max {number(var.maximum)}")
    if var.reasons:
        out.append("not valid: " + ", ".join(f"{k} {v:,}" for k, v in var.reasons.items()))
    return [cut(line, width) for line in out]


def _chart(var: Any, width: int, weighted: bool) -> list[str]:
    """Return the chart: one line per level or bin, a bar and the weighted percentage."""
    if not var.bars:
        return []
    title = ("share of valid rows per level" if var.chart == "frequency"
             else "distribution of valid values")
    title = f"weighted {title}" if weighted else title
    text_w = min(max(len(b.text) for b in var.bars), 24)
    room = max(width - text_w - 10, 5)
    peak = max(b.share for b in var.bars) or 1.0
    lines = ["", title]
    for b in var.bars:
        share = f"{100 * b.share:5.1f}%" if b.share == b.share else "    -"
        lines.append(f"{cut(b.text, text_w).ljust(text_w)}  {share}  "
                     f"{bar(b.share / peak, room)}".rstrip())
    if any(b.low < b.high for b in var.bars):  # bins, not single values (nor texts)
        lines.append(cut("a bin 'a to b' holds a up to, not including, b (the last holds b)",
                         width))
    return lines


def look_json(result: Any, provenance: Any = None) -> str:
    """Return the look as JSON: the file, weight, codebook and one object per variable."""
    doc: dict[str, Any] = {"file": result.path, "weight": result.weight,
                           "codebook": result.codebook,
                           "unweighted_rows": result.unweighted_rows,
                           "variables": result.records()}
    if provenance is not None:
        doc = {"provenance": provenance, **doc}
    return json.dumps(doc, indent=2, ensure_ascii=False) + "\n"
