"""CSV: tidy rows with full-precision numbers; provenance in leading ``#`` comment lines.

Numbers are written with Python's shortest round-trip representation (``repr``), so reading
the file back gives the same floats. Blank = not available (NaN) or suppressed; ``inf`` is
written as ``inf``. Readers that do not skip comments can use ``comment="#"`` (pandas) or
drop lines starting with ``#``.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Iterable, Mapping, Sequence
from typing import TYPE_CHECKING, Any

from wstats.render._grid import (
    NonresponseLike,
    PublicationLike,
    default_provenance,
    provenance_lines,
    publication_grid,
)

if TYPE_CHECKING:
    from wstats.estimation.results import EstimateTable

__all__ = ["SUPPRESSED_FIELDS", "estimate_csv", "nonresponse_csv", "table_csv", "value_text"]

#: Fields emptied in written outputs when a reliability rule suppresses the estimate.
SUPPRESSED_FIELDS: tuple[str, ...] = ("estimate", "se", "ci_low", "ci_high", "cv", "deff")


def value_text(v: Any) -> str:
    """Return one CSV field: shortest round-trip float, plain int/str, '' for NaN/None."""
    if v is None:
        return ""
    if hasattr(v, "item") and not isinstance(v, str):
        v = v.item()
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        if math.isnan(v):
            return ""
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, (tuple, list)):
        return ";".join(str(x) for x in v)
    return str(v)


def estimate_csv(table: EstimateTable, provenance: Mapping[str, Any] | None = None) -> str:
    """Render an estimate table as tidy CSV (one ``excluded_<reason>`` column per reason)."""
    frame = table.frame
    reasons = list(dict.fromkeys(r for d in frame["reasons"] for r in dict(d)))
    header: list[str] = []
    for col in frame.columns:
        header += [f"excluded_{r}" for r in reasons] if col == "reasons" else [str(col)]
    rows = []
    for rec in frame.to_dict(orient="records"):
        if rec["suppress"]:
            rec.update(dict.fromkeys(SUPPRESSED_FIELDS))
        counts = dict(rec.pop("reasons") or {})
        rec.update({f"excluded_{r}": int(counts.get(r, 0)) for r in reasons})
        rows.append([rec[h] for h in header])
    return _write(provenance or default_provenance(table), [], header, rows)


def nonresponse_csv(table: NonresponseLike, provenance: Mapping[str, Any] | None = None) -> str:
    """Render a nonresponse table as tidy CSV (its frame's columns, flags joined by ';')."""
    frame = table.frame
    header = [str(c) for c in frame.columns]
    rows = [[rec[h] for h in header] for rec in frame.to_dict(orient="records")]
    return _write(provenance or default_provenance(table), [], header, rows)


def table_csv(table: PublicationLike, provenance: Mapping[str, Any] | None = None) -> str:
    """Render a publication table's formatted cells as CSV; notes and methods as comments."""
    grid = publication_grid(table)
    notes = [f"note: {n}" for n in grid.notes]
    notes += [f"methods: {grid.methods}"] if grid.methods else []
    header = ["", *grid.headers()[1:]]
    width = len(header)
    rows = [list(r) + [""] * (width - len(r)) for r in grid.rows]
    return _write(provenance or table.provenance, notes, header, rows)


def _write(
    provenance: Mapping[str, Any], notes: Iterable[str], header: Sequence[str],
    rows: Iterable[Sequence[Any]],
) -> str:
    """Write comment lines, the header and the rows with the csv module."""
    buf = io.StringIO()
    buf.write("# wstats provenance\n")
    for line in [*provenance_lines(provenance), *notes]:
        buf.write("# " + line.replace("\n", " ") + "\n")
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(header)
    writer.writerows([value_text(v) for v in row] for row in rows)
    return buf.getvalue()
