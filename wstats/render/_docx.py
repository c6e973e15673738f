"""Word documents (python-docx, optional extra ``word``): a publication table ready to paste.

The document holds the title, the table (spanning headers merged across their columns,
section rows bold and merged across the table, numbers right-aligned), the caption and
footnotes under it, the methods paragraph and, last, the provenance record in small type.
Cells are text as printed, so the table in Word reads exactly as the other formats do.

The registry always lists ``docx``; the command line checks :func:`missing_library` before
any work is done, so a missing python-docx costs one line with the ``pip install`` to run.
"""

from __future__ import annotations

import importlib.util
import io
from collections.abc import Mapping
from typing import Any

from wstats.errors import OutputError
from wstats.render._grid import Grid, PublicationLike, provenance_lines, publication_grid

__all__ = ["INSTALL_HINT", "missing_library", "table_docx"]

#: What to run when python-docx is absent.
INSTALL_HINT = "pip install 'wstats[word]' (or pip install python-docx)"
_SMALL_PT = 7


def missing_library() -> str | None:
    """Return the one-line message when python-docx is not installed, else None."""
    if importlib.util.find_spec("docx") is not None:
        return None
    return f"Word (.docx) output needs the python-docx package; install it with {INSTALL_HINT}"


def table_docx(table: PublicationLike, provenance: Mapping[str, Any] | None = None) -> bytes:
    """Render a publication table as a Word document (bytes).

    Parameters
    ----------
    table : the publication table.
    provenance : the provenance record (default: the table's own).

    Returns
    -------
    bytes
        The ``.docx`` file.

    Raises
    ------
    OutputError
        python-docx is not installed (the message says how to install it).
    """
    problem = missing_library()
    if problem:
        raise OutputError(problem)
    import docx

    doc = docx.Document()
    grid = publication_grid(table)
    doc.add_paragraph().add_run(grid.title).bold = True
    _table(doc, grid)
    for line in [grid.caption, *grid.notes]:
        if line:
            doc.add_paragraph(line)
    if grid.methods:
        doc.add_paragraph(f"Methods. {grid.methods}")
    lines = provenance_lines(provenance or table.provenance)
    _small(doc.add_paragraph(), "\n".join(lines))
    doc.core_properties.title = grid.title[:255]  # Word's limit for a property
    buf = io.BytesIO()
    doc.save(buf)
    return buf.getvalue()


def _table(doc: Any, grid: Grid) -> None:
    """Add the grid as a Word table: spans, header row, body rows."""
    from docx.enum.text import WD_ALIGN_PARAGRAPH

    width = len(grid.columns)
    heads = 2 if grid.spans else 1
    out = doc.add_table(rows=heads + len(grid.rows), cols=width)
    out.style = "Table Grid"
    if grid.spans:
        for span in grid.spans:
            cell = out.cell(0, span.start)
            if span.stop - span.start > 1:
                cell = cell.merge(out.cell(0, span.stop - 1))
            _text(cell, span.text, bold=True, align=WD_ALIGN_PARAGRAPH.CENTER)
    for j, col in enumerate(grid.columns):
        _text(out.cell(heads - 1, j), col.header, bold=True,
              align=WD_ALIGN_PARAGRAPH.RIGHT if col.align == "r" else None)
    for i, (row, kind) in enumerate(zip(grid.rows, grid.kinds, strict=True), start=heads):
        if kind == "section":
            _text(out.cell(i, 0).merge(out.cell(i, width - 1)), row[0], bold=True)
            continue
        for j, (text, col) in enumerate(zip(row, grid.columns, strict=True)):
            _text(out.cell(i, j), text,
                  align=WD_ALIGN_PARAGRAPH.RIGHT if col.align == "r" else None)


def _text(cell: Any, text: str, bold: bool = False, align: Any = None) -> None:
    """Write *text* into a cell's first paragraph."""
    para = cell.paragraphs[0]
    para.add_run(text).bold = bold
    if align is not None:
        para.alignment = align


def _small(para: Any, text: str) -> None:
    """Write *text* into a paragraph in small type."""
    from docx.shared import Pt

    para.add_run(text).font.size = Pt(_SMALL_PT)
