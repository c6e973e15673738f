"""Excel workbooks (openpyxl, optional): the formatted table, tidy estimates, notes, provenance.

The registry drops the xlsx entries when openpyxl is not installed. Sheets: ``Table`` (the
formatted cells as text, as printed), ``Estimates`` (tidy numbers), ``Notes`` (footnotes and
the methods paragraph) and ``Provenance`` (one ``key | value`` row per line).
"""

from __future__ import annotations

import io
from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

from wstats.render._csv import SUPPRESSED_FIELDS, value_text
from wstats.render._grid import (
    Grid,
    NonresponseLike,
    PublicationLike,
    default_provenance,
    estimate_grid,
    nonresponse_grid,
    provenance_lines,
    publication_grid,
)

if TYPE_CHECKING:
    import pandas as pd

    from wstats.estimation.results import EstimateTable

__all__ = ["estimate_xlsx", "nonresponse_xlsx", "table_xlsx"]


def table_xlsx(table: PublicationLike, provenance: Mapping[str, Any] | None = None) -> bytes:
    """Render a publication table as an .xlsx workbook (bytes)."""
    return _workbook(publication_grid(table), _tidy(table.estimates.frame),
                     provenance or table.provenance)


def estimate_xlsx(table: EstimateTable, provenance: Mapping[str, Any] | None = None) -> bytes:
    """Render an estimate table as an .xlsx workbook (bytes)."""
    return _workbook(estimate_grid(table), _tidy(table.frame),
                     provenance or default_provenance(table))


def nonresponse_xlsx(
    table: NonresponseLike, provenance: Mapping[str, Any] | None = None
) -> bytes:
    """Render a nonresponse table as an .xlsx workbook (bytes)."""
    return _workbook(nonresponse_grid(table), _tidy(table.frame),
                     provenance or default_provenance(table))


def _tidy(frame: pd.DataFrame) -> list[list[Any]]:
    """Return header + rows of a tidy frame with Excel-safe values (suppressed numbers blank)."""
    header = [str(c) for c in frame.columns]
    rows: list[list[Any]] = [header]
    for rec in frame.to_dict(orient="records"):
        if rec.get("suppress"):
            rec.update(dict.fromkeys(SUPPRESSED_FIELDS))
        rows.append([_cell(rec[h]) for h in header])
    return rows


def _cell(v: Any) -> Any:
    """Return a value Excel can hold: numbers stay numbers, the rest becomes text."""
    if hasattr(v, "item") and not isinstance(v, str):
        v = v.item()
    if isinstance(v, bool) or v is None:
        return v
    if isinstance(v, (int, float)):
        text = value_text(v)
        return None if text == "" else (v if text not in ("inf", "-inf") else text)
    if isinstance(v, Mapping):
        return "; ".join(f"{k} {n}" for k, n in v.items())
    return value_text(v)


def _workbook(grid: Grid, tidy: Sequence[Sequence[Any]], provenance: Mapping[str, Any]) -> bytes:
    """Build the four sheets and return the saved workbook."""
    from openpyxl import Workbook

    wb = Workbook()
    _table_sheet(wb.active, grid)
    est = wb.create_sheet("Estimates")
    for row in tidy:
        est.append(list(row))
    notes = wb.create_sheet("Notes")
    for line in [grid.caption, *grid.notes, *([f"Methods. {grid.methods}"] if grid.methods
                                              else [])]:
        if line:
            notes.append([line])
    prov = wb.create_sheet("Provenance")
    for line in provenance_lines(provenance):
        key, _, value = line.partition(": ")
        prov.append([key, value])
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def _table_sheet(ws: Any, grid: Grid) -> None:
    """Write the formatted grid: title, spanning headers (merged), rows, notes."""
    from openpyxl.styles import Alignment, Font

    ws.title = "Table"
    ws.append([grid.title])
    ws.cell(row=1, column=1).font = Font(bold=True)
    if grid.spans:
        ws.append([""] * len(grid.columns))
        r = ws.max_row
        for s in grid.spans:
            ws.cell(row=r, column=s.start + 1, value=s.text)
            ws.cell(row=r, column=s.start + 1).alignment = Alignment(horizontal="center")
            if s.stop - s.start > 1:
                ws.merge_cells(start_row=r, start_column=s.start + 1, end_row=r,
                               end_column=s.stop)
    ws.append([c.header for c in grid.columns])
    for row, kind in zip(grid.rows, grid.kinds, strict=True):
        ws.append(list(row))
        if kind == "section":
            ws.cell(row=ws.max_row, column=1).font = Font(bold=True)
        for j, col in enumerate(grid.columns, start=1):
            if col.align == "r":
                ws.cell(row=ws.max_row, column=j).alignment = Alignment(horizontal="right")
    ws.append([])
    for note in [grid.caption, *grid.notes]:
        if note:
            ws.append([note])
    ws.column_dimensions["A"].width = max(12, min(60, max(len(r[0]) for r in grid.rows) + 2)
                                          if grid.rows else 12)
