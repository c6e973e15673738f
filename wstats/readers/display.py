"""How results show themselves in a Python session: as the terminal table, or as HTML.

Results (a file's columns in the readers layer, estimate tables in estimation; nonresponse,
bounds, publication tables and looks in reports) live below the renderers, so they cannot
import them; this module sits in the lowest layer that holds a result, so that every one can
ask here. Instead the render
layer registers, when it is imported, one function that draws any result as terminal text
and one that draws it as HTML; a result's ``__repr__`` and ``_repr_html_`` ask here. The
public door (``wstats/__init__.py``) imports the render layer as soon as any public name is
used, so a session that came in through ``import wstats`` always has them. Without them (a
module imported directly, render never loaded) a result shows a one-line summary instead.

This module imports nothing from wstats.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

__all__ = ["as_html", "as_text", "register"]

_HOOKS: dict[str, Callable[[Any], str | None]] = {}


def register(text: Callable[[Any], str | None], html: Callable[[Any], str | None]) -> None:
    """Set the functions that draw a result as terminal text and as HTML (None: cannot)."""
    _HOOKS["text"], _HOOKS["html"] = text, html


def as_text(obj: Any, summary: str) -> str:
    """Return *obj* drawn as the terminal table, or *summary* when no renderer can draw it."""
    hook = _HOOKS.get("text")
    shown = hook(obj) if hook is not None else None
    return summary if shown is None else shown


def as_html(obj: Any) -> str | None:
    """Return *obj* drawn as HTML, or None (the notebook then shows the text)."""
    hook = _HOOKS.get("html")
    return hook(obj) if hook is not None else None
