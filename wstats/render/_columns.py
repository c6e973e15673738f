"""Renderers of a file overview (``wstats columns``): terminal text, JSON, CSV.

The terminal text fits the given width (80 by default): labels and long code lists are cut
with an ellipsis, names are never cut below 8 characters. JSON and CSV carry the full text.
"""

from __future__ import annotations

import csv
import io
import json
from typing import Any

from wstats.render._text import cut, fit_columns, number

__all__ = ["columns_csv", "columns_json", "columns_terminal"]

_HEAD = ("name", "label", "type", "blanks", "distinct", "missing codes", "labels")
_STORAGE = {"number": "num", "text": "text"}


def columns_terminal(view: Any, width: int = 80) -> str:
    """Return the overview as lines of at most *width* characters."""
    lines = [cut(_title(view), width)]
    if view.search:
        lines.append(cut(f"search {' '.join(view.search)!r}: {len(view.columns)} of "
                         f"{view.n_file_columns} columns match", width))
    if not view.columns:
        return "\n".join([*lines, "no column matches; search for fewer or other words"]) + "\n"
    rows = [[c.name, c.label or "", _STORAGE[c.storage], number(c.blanks), number(c.distinct),
             " ".join(c.missing_codes) or "-", "yes" if c.value_labels else "no"]
            for c in view.columns]
    body = fit_columns(list(_HEAD), rows, width, flexible=1, right=(3, 4),
                       shrinkable={0: 8, 5: 8})
    return "\n".join([*lines, "", *body]) + "\n"


def _title(view: Any) -> str:
    """Say what file this is and how big."""
    rows = "rows not read" if view.n_rows is None else f"{view.n_rows:,} rows"
    return f"{view.path}: {view.n_file_columns:,} columns, {rows} ({view.format})"


def columns_json(view: Any, provenance: Any = None) -> str:
    """Return the overview as JSON: the file's facts and one object per column."""
    doc = {"file": {"path": view.path, "format": view.format, "reader": view.reader,
                    "rows": view.n_rows, "columns": view.n_file_columns,
                    "search": list(view.search)},
           "columns": view.records()}
    if provenance is not None:
        doc = {"provenance": provenance, **doc}
    return json.dumps(doc, indent=2, ensure_ascii=False) + "\n"


def columns_csv(view: Any, provenance: Any = None) -> str:
    """Return the overview as CSV, one row per column, codes separated by spaces."""
    buf = io.StringIO()
    out = csv.writer(buf, lineterminator="\n")
    keys = ["position", "name", "label", "storage", "format", "rows", "blanks", "distinct",
            "missing_codes", "value_labels"]
    out.writerow(keys)
    for rec in view.records():
        rec["missing_codes"] = " ".join(rec["missing_codes"])
        out.writerow(["" if rec[k] is None else rec[k] for k in keys])
    return buf.getvalue()
