"""What :func:`wstats.compare` returns: tidy tables of differences and of tests."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.readers.display import as_html, as_text

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["Comparison", "RowTable"]

@dataclass(frozen=True, eq=False)
class RowTable:
    """Tidy rows of one kind (differences or tests): a list of dicts with fixed columns."""

    rows: tuple[dict[str, Any], ...]
    columns: tuple[str, ...]

    def to_pandas(self) -> pd.DataFrame:
        """Return the rows as a pandas frame (one column per entry of ``columns``)."""
        import pandas as pd

        return pd.DataFrame([[r.get(c) for c in self.columns] for r in self.rows],
                            columns=list(self.columns))

    def records(self) -> list[dict[str, Any]]:
        """Return JSON-ready rows (NaN -> None, in column order)."""
        return [{c: _plain(r.get(c)) for c in self.columns} for r in self.rows]

    def __len__(self) -> int:
        return len(self.rows)


def _plain(v: Any) -> Any:
    """Return a JSON-safe value: NaN -> None, numpy scalars -> Python."""
    if hasattr(v, "item") and not isinstance(v, str):
        v = v.item()
    if isinstance(v, float) and not np.isfinite(v):
        return None if np.isnan(v) else ("inf" if v > 0 else "-inf")
    return v


@dataclass(frozen=True, eq=False)
class Comparison:
    """The result of :func:`compare`.

    Attributes
    ----------
    differences : one row per variable x level x pair of groups (:data:`DIFFERENCE_COLUMNS`).
    tests : global tests and trend contrasts (:data:`TEST_COLUMNS`).
    by : the grouping variable; level : the confidence level of the intervals.
    design : summary of the design used; settings : pairing, reference, adjustment, df rule,
        standard population (for the methods text and provenance).
    """

    differences: RowTable
    tests: RowTable
    by: str
    level: float
    design: Mapping[str, Any] = field(default_factory=dict)
    settings: Mapping[str, Any] = field(default_factory=dict)

    def __repr__(self) -> str:
        """Show the comparison as the terminal does, with its design line."""
        return as_text(self, f"Comparison(by {self.by!r})")

    def _repr_html_(self) -> str | None:
        """Show the comparison in a notebook (its terminal text: it has no html format)."""
        return as_html(self)
