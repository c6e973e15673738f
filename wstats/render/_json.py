"""JSON: ``{"provenance": ..., "results": [...], "rules": {...}}``; schema in docs/output-schema.md.

Floats keep full precision; NaN becomes null and infinities the strings ``"inf"``/``"-inf"``
so the output is strict JSON. Suppressed estimates have their numbers nulled (see
:data:`wstats.render._csv.SUPPRESSED_FIELDS`).
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from typing import TYPE_CHECKING, Any

from wstats.render._csv import SUPPRESSED_FIELDS
from wstats.render._grid import NonresponseLike, PublicationLike, default_provenance
from wstats.reports.cells import rule_info

if TYPE_CHECKING:
    from wstats.estimation.results import EstimateTable

__all__ = ["estimate_json", "nonresponse_json", "table_json"]


def estimate_json(table: EstimateTable, provenance: Mapping[str, Any] | None = None) -> str:
    """Render an estimate table as JSON: provenance, result records, rules that fired."""
    records = table.records()
    for rec in records:
        if rec.get("suppress"):
            rec.update(dict.fromkeys(SUPPRESSED_FIELDS))
    return _dump({"provenance": provenance or default_provenance(table), "results": records,
                  "rules": _rules(f for r in records for f in r.get("flags") or ())})


def nonresponse_json(table: NonresponseLike, provenance: Mapping[str, Any] | None = None) -> str:
    """Render a nonresponse table as JSON: provenance, result records, rules that fired."""
    records = table.records()
    return _dump({"provenance": provenance or default_provenance(table), "results": records,
                  "rules": _rules(f for r in records for f in r.get("flags") or ())})


def table_json(table: PublicationLike, provenance: Mapping[str, Any] | None = None) -> str:
    """Render a publication table as JSON: formatted cells, notes, methods, estimates."""
    keys = [c.key for c in table.columns]
    rows = [{"label": r["label"], "kind": r["kind"], "variable": r["variable"],
             "level": r["level"], "cells": {k: r[k] for k in keys}}
            for r in table.cells.to_dict(orient="records")]
    estimates = table.estimates.records()
    for rec in estimates:
        if rec.get("suppress"):
            rec.update(dict.fromkeys(SUPPRESSED_FIELDS))
    return _dump({
        "provenance": provenance or table.provenance, "title": table.title,
        "columns": [{"key": c.key, "header": c.header, "group": c.group, "level": c.level}
                    for c in table.columns],
        "rows": rows, "footnotes": list(table.footnotes), "methods": table.methods,
        "results": estimates,
        "rules": _rules(f for r in estimates for f in r.get("flags") or ()),
    })


def _rules(ids: Iterable[str]) -> dict[str, dict[str, str]]:
    """Return rule id -> {description, source} for the rules that fired, sorted by id."""
    out = {}
    for rule in sorted(set(ids)):
        description, source = rule_info(rule)
        out[rule] = {"description": description, "source": source}
    return out


def _clean(value: Any) -> Any:
    """Return *value* as strict-JSON data (numpy to Python, NaN to null, inf to strings)."""
    if isinstance(value, Mapping):
        return {str(k): _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):
        value = value.item()
    if isinstance(value, float):
        if math.isnan(value):
            return None
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
    return value


def _dump(data: Mapping[str, Any]) -> str:
    """Serialise with stable key order (provenance keys sorted) and a final newline."""
    from wstats.render._json_text import indented
    from wstats.reports.provenance import normalize

    out = {str(k): v for k, v in data.items()}  # the results are cleaned as they are written
    out["provenance"] = normalize(_clean(out["provenance"]))
    return indented(out) + "\n"
