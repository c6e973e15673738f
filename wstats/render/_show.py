"""Results drawn for a Python session: ``repr`` is the terminal table, ``_repr_html_`` the
``--format html`` renderer (pre-formatted terminal text for results without an HTML format).

:mod:`wstats.render` registers these two functions with :mod:`wstats.readers.display` when
it is imported; the results ask there, since they cannot import the render layer.
"""

from __future__ import annotations

import html
import re
import shutil
from collections.abc import MutableMapping
from typing import Any

__all__ = ["notebook_fragment", "show_html", "show_text"]

#: result type name -> registry of :mod:`wstats.render`
_SHOWN = {"EstimateTable": "estimate", "NonresponseTable": "nonresponse",
          "BoundsFrame": "bounds", "PublicationTable": "table", "Comparison": "compare",
          "LookResult": "look", "FileOverview": "columns"}
_OWN_WIDTH = ("look", "columns")  # renderers that lay out plain text at a given width


def _registry(kind: str) -> MutableMapping[str, Any]:
    """Return the renderer registry of a result kind."""
    import wstats.render

    registry: MutableMapping[str, Any] = getattr(wstats.render, f"{kind.upper()}_RENDERERS")
    return registry


def show_text(obj: Any, width: int | None = None) -> str | None:
    """Return a result drawn as the terminal shows it; None for an object of another type.

    The width is the terminal's (100 when it cannot be told); text, not colour.
    """
    kind = _SHOWN.get(type(obj).__name__)
    if kind is None:
        return None
    from wstats.render import plain_text

    width = width or shutil.get_terminal_size((100, 24)).columns
    terminal = _registry(kind)["terminal"]
    drawn = terminal(obj, width=width) if kind in _OWN_WIDTH else terminal(obj)
    text = drawn if isinstance(drawn, str) else plain_text(drawn, None, width)
    return text.rstrip("\n")


def show_html(obj: Any) -> str | None:
    """Return a result as its ``html`` renderer draws it (else its terminal text, escaped, in
    ``<pre>``); None for an object of another type."""
    kind = _SHOWN.get(type(obj).__name__)
    if kind is None:
        return None
    registry = _registry(kind)
    if "html" in registry:
        return notebook_fragment(registry["html"](obj))
    return f"<pre>{html.escape(show_text(obj) or '')}</pre>"


_RULE = re.compile(r"([^{}]+)\{([^{}]*)\}")


def notebook_fragment(page: str) -> str:
    """Return an ``--format html`` page as a fragment for a notebook cell.

    The page's body goes in a ``<div class="wstats-result">`` and its style rules are scoped
    to that div, so that they do not restyle every other table of the notebook.
    """
    style = re.search(r"<style>(.*?)</style>", page, re.S)
    body = re.search(r"<body>(.*)</body>", page, re.S)
    inner = body.group(1).strip() if body else page
    rules = "".join(
        ",".join(f".wstats-result {sel.strip()}" for sel in m.group(1).split(","))
        + "{" + m.group(2) + "}" for m in _RULE.finditer(style.group(1) if style else ""))
    scoped = f"<style>{rules}</style>\n" if rules else ""
    return f'{scoped}<div class="wstats-result">\n{inner}\n</div>'

