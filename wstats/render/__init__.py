"""Renderers: pure functions from result tables to text (terminal: a rich renderable).

One registry per result type maps a format name to ``f(table, provenance=None)``:

- :data:`ESTIMATE_RENDERERS` for :class:`~wstats._results.EstimateTable`,
- :data:`NONRESPONSE_RENDERERS` for ``NonresponseTable``,
- :data:`TABLE_RENDERERS` for ``PublicationTable``.

Text formats return ``str``, ``xlsx`` returns ``bytes`` and ``terminal`` a rich renderable.
Every written format carries the provenance record (``provenance=None`` falls back to the
table's own, or to a minimal record). The ``xlsx`` entries are absent when openpyxl is not
installed. Nothing here prints; the command line does.
"""

from __future__ import annotations

import importlib.util
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any

from wstats.errors import OutputError
from wstats.render import _bounds, _csv, _html, _json, _latex, _markdown, _terminal

if TYPE_CHECKING:
    from wstats._pubtable import PublicationTable

__all__ = [
    "BOUNDS_RENDERERS",
    "ESTIMATE_RENDERERS",
    "FORMATS",
    "NONRESPONSE_RENDERERS",
    "TABLE_RENDERERS",
    "render_check",
    "write_table",
]

Renderer = Callable[..., Any]
render_check = _terminal.render_check

ESTIMATE_RENDERERS: dict[str, Renderer] = {
    "terminal": _terminal.estimate_terminal,
    "markdown": _markdown.estimate_markdown,
    "latex": _latex.estimate_latex,
    "html": _html.estimate_html,
    "csv": _csv.estimate_csv,
    "json": _json.estimate_json,
}
NONRESPONSE_RENDERERS: dict[str, Renderer] = {
    "terminal": _terminal.nonresponse_terminal,
    "markdown": _markdown.nonresponse_markdown,
    "latex": _latex.nonresponse_latex,
    "html": _html.nonresponse_html,
    "csv": _csv.nonresponse_csv,
    "json": _json.nonresponse_json,
}
BOUNDS_RENDERERS: dict[str, Renderer] = {
    "terminal": _bounds.bounds_terminal,
    "markdown": _bounds.bounds_markdown,
    "csv": _bounds.bounds_csv,
    "json": _bounds.bounds_json,
}
TABLE_RENDERERS: dict[str, Renderer] = {
    "terminal": _terminal.table_terminal,
    "markdown": _markdown.table_markdown,
    "latex": _latex.table_latex,
    "html": _html.table_html,
    "csv": _csv.table_csv,
    "json": _json.table_json,
}

if importlib.util.find_spec("openpyxl") is not None:
    from wstats.render import _xlsx

    ESTIMATE_RENDERERS["xlsx"] = _xlsx.estimate_xlsx
    NONRESPONSE_RENDERERS["xlsx"] = _xlsx.nonresponse_xlsx
    TABLE_RENDERERS["xlsx"] = _xlsx.table_xlsx

#: Every format name some registry offers, in a stable order.
FORMATS: tuple[str, ...] = tuple(TABLE_RENDERERS)

#: File suffix -> format, for outputs named in a table spec.
SUFFIX_FORMATS: dict[str, str] = {
    ".md": "markdown", ".markdown": "markdown", ".tex": "latex", ".html": "html",
    ".htm": "html", ".csv": "csv", ".json": "json", ".xlsx": "xlsx", ".txt": "terminal",
}


def write_table(table: PublicationTable, overwrite: bool = False) -> list[Path]:
    """Write a publication table to every output its spec names.

    Parameters
    ----------
    table : the built table; its ``outputs`` are ``(path, format)`` pairs from the spec.
    overwrite : replace existing files (otherwise an existing file raises OutputError).

    Returns
    -------
    list of Path
        The files written, in spec order.
    """
    from wstats._io import atomic_write

    written = []
    for path, fmt in table.outputs:
        if fmt not in TABLE_RENDERERS:
            raise OutputError(f"cannot write {path}: format '{fmt}' needs a package that is "
                              "not installed (xlsx: pip install openpyxl)")
        data = TABLE_RENDERERS[fmt](table, provenance=table.provenance)
        if fmt == "terminal":
            data = _plain_text(data)
        atomic_write(Path(path), data, overwrite=overwrite)
        written.append(Path(path))
    return written


def _plain_text(renderable: Any, width: int = 100) -> str:
    """Return a rich renderable drawn as plain text at a fixed width."""
    import io

    from rich.console import Console

    buf = io.StringIO()
    Console(file=buf, width=width, color_system=None, force_terminal=False,
            legacy_windows=False).print(renderable)
    return buf.getvalue()
