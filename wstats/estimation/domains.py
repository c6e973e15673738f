"""Domain membership: the population domain (the ``where`` rows) and the crossed by-cells.

Domain 0 is the whole population (rows satisfying the ``where`` condition); domains 1..C are
the crossed ``by`` cells. A row is in domain 0 and in at most one cell.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.columns import Dataset
    from wstats.decoding.expressions import Expression

    Index = npt.NDArray[np.int64]
    Bool = npt.NDArray[np.bool_]

__all__ = ["Domains", "empty_where_note", "no_cell", "no_row_note"]

@dataclass(frozen=True, eq=False)
class Domains:
    """Domain membership of the rows used.

    Attributes
    ----------
    inside : rows in the population domain (the ``where`` condition holds; all rows if none:
        then a read-only view of one ``True``, no memory per row).
    cell : crossed by-cell 0..C-1 of each row, -1 outside every cell (by value not valid,
        or outside the population domain).
    n_cells : number of crossed by-cells C (0 without ``by``).
    """

    inside: Bool
    cell: Index
    n_cells: int

    @property
    def n_domains(self) -> int:
        """Population plus cells."""
        return self.n_cells + 1

    @classmethod
    def build(cls, inside: Bool, codes: list[Index], sizes: list[int]) -> Domains:
        """Cross per-variable level codes (-1 = no level) into cell numbers, row-major."""
        if not codes:
            return cls(inside, no_cell(len(inside)), 0)
        ok = inside & np.logical_and.reduce([c >= 0 for c in codes])
        safe = [np.where(ok, c, 0) for c in codes]
        cell = np.ravel_multi_index(safe, sizes) if sizes else np.zeros(len(inside), np.int64)
        return cls(inside, np.where(ok, cell, -1).astype(np.int64), int(np.prod(sizes)))


def no_cell(n: int) -> Index:
    """Return the cell column of *n* rows outside every by-cell: -1 everywhere, read-only.

    A broadcast view of one value: no memory per row.
    """
    return np.broadcast_to(np.int64(-1), (n,))


def empty_where_note(where: str, expr: Expression, data: Dataset) -> str:
    """Explain a ``where`` condition that selects no row (a legitimate, empty answer).

    When it tests a variable for a number that the codebook turns into a missing reason,
    the number is no longer a value of the variable: say so, and how to select by reason.
    """
    note = no_row_note(where, data.source or "")
    codes = data.metadata.get("reason_codes", {})
    for name, value in expr.compared_codes():
        reason = codes.get(name, {}).get(value)
        if reason is not None:
            return (f"{note}; {value:g} is a code the codebook turns into the reason "
                    f"'{reason}' for {name}, so it is no longer a value of {name}: select "
                    f"those rows with reason({name}, \"{reason}\")")
    return note + _CHECK


_CHECK = "; check the condition against the values in the data"


def no_row_note(where: str, source: str, check: bool = False) -> str:
    """Return the start of the note on a ``where`` that selects no row of *source*."""
    of = f" of {source}" if source else ""
    return (f"where '{where}' selects no row{of}, so every estimate has n = 0 and no value"
            + (_CHECK if check else ""))
