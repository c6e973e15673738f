"""Renderers: pure functions from result tables to text (terminal: a rich renderable).

One registry per result type maps a format name to ``f(table, provenance=None)``:

- :data:`ESTIMATE_RENDERERS` for :class:`~wstats.estimation.results.EstimateTable`,
- :data:`NONRESPONSE_RENDERERS` for ``NonresponseTable``,
- :data:`TABLE_RENDERERS` for ``PublicationTable`` (also ``docx``, a Word document),
- :data:`COMPARE_RENDERERS` for a ``Comparison``,
- :data:`COLUMNS_RENDERERS` and :data:`LOOK_RENDERERS` for the first-look results.

Results show themselves in a Python session through these registries: importing this
package registers :func:`wstats.render._show.show_text` and ``show_html`` with
:mod:`wstats.readers.display`.

Text formats return ``str``, ``xlsx`` returns ``bytes`` and ``terminal`` a rich renderable.
Every written format carries the provenance record (``provenance=None`` falls back to the
table's own, or to a minimal record). The ``xlsx`` entries are absent when openpyxl is not
installed; ``docx`` is always listed (the command line says how to install python-docx
before any work is done). Nothing here prints; the command line does.
"""

from __future__ import annotations

import importlib
import importlib.util
from collections.abc import Callable, Iterator, Mapping, MutableMapping
from pathlib import Path
from typing import TYPE_CHECKING, Any

from wstats.errors import OutputError

if TYPE_CHECKING:
    from wstats.reports.tables import PublicationTable

__all__ = [
    "BOUNDS_RENDERERS",
    "COLUMNS_RENDERERS",
    "COMPARE_RENDERERS",
    "ESTIMATE_RENDERERS",
    "FORMATS",
    "LOOK_RENDERERS",
    "NONRESPONSE_RENDERERS",
    "TABLE_RENDERERS",
    "plain_text",
    "render_check",
    "strip_line_ends",
    "with_provenance",
    "write_table",
]

Renderer = Callable[..., Any]


class _Registry(MutableMapping[str, Renderer]):
    """Format name -> renderer, importing a renderer's module the first time it is asked for.

    A run writes one format: importing every renderer (rich, html, latex, ...) would cost
    more start-up time than the rendering itself. A renderer may also be set directly (a
    format of one's own, or a stand-in in a test).
    """

    def __init__(self, where: Mapping[str, tuple[str, str]]) -> None:
        self._where: dict[str, tuple[str, str] | Renderer] = dict(where)

    def __getitem__(self, fmt: str) -> Renderer:
        entry = self._where[fmt]
        if not isinstance(entry, tuple):
            return entry
        module, name = entry  # a module in wstats.render, and its function
        renderer: Renderer = getattr(importlib.import_module(f"wstats.render.{module}"), name)
        return renderer

    def __setitem__(self, fmt: str, renderer: Renderer) -> None:
        self._where[fmt] = renderer

    def __delitem__(self, fmt: str) -> None:
        del self._where[fmt]

    def __iter__(self) -> Iterator[str]:
        return iter(self._where)

    def __len__(self) -> int:
        return len(self._where)


_TEXT = ("terminal", "markdown", "latex", "html", "csv", "json")
#: formats of the three table registries: xlsx only when openpyxl is installed
_FORMATS = (*_TEXT, "xlsx") if importlib.util.find_spec("openpyxl") is not None else _TEXT


def _each_module(kind: str) -> _Registry:
    """Return the registry of ``<kind>_<format>`` functions, one module per format."""
    return _Registry({fmt: (f"_{fmt}", f"{kind}_{fmt}") for fmt in _FORMATS})


ESTIMATE_RENDERERS: MutableMapping[str, Renderer] = _each_module("estimate")
NONRESPONSE_RENDERERS: MutableMapping[str, Renderer] = _each_module("nonresponse")
TABLE_RENDERERS: MutableMapping[str, Renderer] = _Registry(
    {**{fmt: (f"_{fmt}", f"table_{fmt}") for fmt in _FORMATS}, "docx": ("_docx", "table_docx")})
#: renderers of a comparison (``wstats.compare``)
COMPARE_RENDERERS: MutableMapping[str, Renderer] = _Registry(
    {fmt: ("_compare", f"compare_{fmt}") for fmt in ("terminal", "markdown", "csv", "json")})
BOUNDS_RENDERERS: MutableMapping[str, Renderer] = _Registry(
    {fmt: ("_bounds", f"bounds_{fmt}") for fmt in ("terminal", "markdown", "csv", "json")})
#: ``wstats columns`` (a FileOverview): terminal text at a given width, JSON, CSV
COLUMNS_RENDERERS: MutableMapping[str, Renderer] = _Registry(
    {fmt: ("_columns", f"columns_{fmt}") for fmt in ("terminal", "json", "csv")})
#: ``wstats look`` (a LookResult): terminal text at a given width, JSON
LOOK_RENDERERS: MutableMapping[str, Renderer] = _Registry(
    {fmt: ("_look", f"look_{fmt}") for fmt in ("terminal", "json")})


def render_check(report: Any) -> Any:
    """Return the terminal renderable of a ``wstats check`` report (see _terminal)."""
    from wstats.render._terminal import render_check as draw

    return draw(report)


#: Every format name some registry offers, in a stable order.
FORMATS: tuple[str, ...] = tuple(TABLE_RENDERERS)

#: File suffix -> format, for outputs named in a table spec.
SUFFIX_FORMATS: dict[str, str] = {
    ".md": "markdown", ".markdown": "markdown", ".tex": "latex", ".html": "html",
    ".htm": "html", ".csv": "csv", ".json": "json", ".xlsx": "xlsx", ".txt": "terminal",
    ".docx": "docx",
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
    from wstats.errors import require_package
    from wstats.readers.output import atomic_write

    if any(fmt == "docx" for _, fmt in table.outputs):
        require_package("Word files", "", OutputError)  # before any file is written
    written = []
    for path, fmt in table.outputs:
        if fmt not in TABLE_RENDERERS:
            raise OutputError(f"cannot write {path}: format '{fmt}' needs a package that is "
                              "not installed (xlsx: pip install openpyxl)")
        data = TABLE_RENDERERS[fmt](table, provenance=table.provenance)
        if fmt == "terminal":
            data = plain_text(data, table.provenance)
        atomic_write(Path(path), data, overwrite=overwrite)
        written.append(Path(path))
    return written


def plain_text(renderable: Any, provenance: Mapping[str, Any] | None = None,
               width: int = 100) -> str:
    """Return a rich renderable drawn as plain text at a fixed width, provenance below.

    Parameters
    ----------
    renderable : what a ``terminal`` renderer returned.
    provenance : the record to append (None: none, for the screen).
    width : columns of the drawing.

    Returns
    -------
    str
    """
    import io

    from rich.console import Console

    buf = io.StringIO()
    Console(file=buf, width=width, color_system=None, force_terminal=False,
            legacy_windows=False).print(renderable)
    return with_provenance(strip_line_ends(buf.getvalue()), "text", provenance)


def strip_line_ends(text: str) -> str:
    """Return *text* without the spaces the table layout pads each line with."""
    return "\n".join(line.rstrip() for line in text.split("\n"))


def with_provenance(text: str, fmt: str, provenance: Mapping[str, Any] | None) -> str:
    """Return *text* carrying its provenance the way its format allows comments.

    ``text``: a block after a blank line; ``markdown``: an HTML comment first; ``latex``:
    ``%`` lines first. No provenance: *text* unchanged.
    """
    from wstats.render._grid import provenance_lines

    if not provenance:
        return text
    lines = ["wstats provenance", *provenance_lines(provenance)]
    if fmt == "markdown":
        return "\n".join(["<!--", *(ln.replace("--", "- -") for ln in lines), "-->", ""]) + text
    if fmt == "latex":
        return "".join(f"% {ln}\n" for ln in lines) + text
    return text.rstrip("\n") + "\n\n" + "".join(f"  {ln}\n" for ln in lines)


def _show_text(obj: Any) -> str | None:
    """Draw a result as terminal text (the module is imported on the first ``repr``)."""
    from wstats.render._show import show_text

    return show_text(obj)


def _show_html(obj: Any) -> str | None:
    """Draw a result as HTML (the module is imported on the first notebook display)."""
    from wstats.render._show import show_html

    return show_html(obj)


def _register_display() -> None:
    """Let results show themselves (see :mod:`wstats.readers.display`)."""
    from wstats.readers.display import register

    register(_show_text, _show_html)


_register_display()
