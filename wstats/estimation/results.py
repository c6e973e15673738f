"""Estimates as data: a frozen table of tidy rows, before any text is made of it.

The rows are held as plain columns (one numpy array per column); the pandas frame is built
only when something asks for it, so that answering from the command line in JSON never
imports pandas.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cached_property
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.readers.display import as_html, as_text

if TYPE_CHECKING:
    import numpy.typing as npt
    import pandas as pd

__all__ = ["ESTIMATE_COLUMNS", "EstimateTable", "object_column"]

#: Columns of :attr:`EstimateTable.frame`, in order. By-variable columns are inserted after
#: ``p``, one per by-variable, named as the variable (values: the level label when one exists,
#: else the raw value; None/NaN for the whole-population rows).
#:
#: variable    name of the analysed variable (``num/den`` for a ratio)
#: statistic   ``mean``, ``total``, ``proportion``, ``ratio``, ``quantile``
#: level       category label for a proportion, else None
#: p           probability for a quantile (e.g. 0.5), else NaN
#: estimate    the point estimate (proportions as fractions 0-1)
#: se          design-based standard error (NaN when it cannot be estimated)
#: ci_low, ci_high   confidence limits at ``level`` of the table
#: df          degrees of freedom used for the interval (inf = normal)
#: cv          se / |estimate| (NaN when estimate is 0)
#: deff        design effect: design variance / SRS-with-replacement variance
#: deff_weight Kish's weighting design effect n*sum(w^2)/sum(w)^2 over the valid domain rows
#: n_eff       effective sample size n / deff (for proportions capped at n)
#: n           unweighted count of valid rows in the domain
#: weighted_n  sum of weights of valid rows in the domain
#: reasons     dict reason -> count of domain rows excluded for that reason (non-valid)
#: flags       tuple of reliability rule ids that fired (empty = none); see _reliability
#: suppress    True when a reliability rule says the estimate must not be shown
ESTIMATE_COLUMNS: tuple[str, ...] = (
    "variable", "statistic", "level", "p",
    "estimate", "se", "ci_low", "ci_high", "df", "cv", "deff", "deff_weight", "n_eff",
    "n", "weighted_n", "reasons", "flags", "suppress",
)

#: Columns handed to pandas as lists: text, and cells that are dicts or tuples.
_LIST_COLUMNS = ("variable", "statistic", "reasons", "flags")
_INFINITE_TO_NULL = ("estimate", "se", "ci_low", "ci_high", "cv", "deff")


@dataclass(frozen=True, eq=False)
class EstimateTable:
    """The result of one estimation call.

    Attributes
    ----------
    columns : the tidy rows as columns, one per variable x level x domain x statistic: name
        -> 1-D numpy array (object arrays for text, levels, reasons and flags), in the order
        of :data:`ESTIMATE_COLUMNS` with the by-variables after ``p``.
    by : names of the by-variables (crossed), in the order given.
    level : confidence level of the intervals (e.g. 0.95).
    design : summary of the design used (see ``BoundDesign.summary()``).
    settings : what else was used (interval method per statistic, df rule, reliability
        standard), for the methods paragraph and provenance.

    Examples
    --------
    >>> t = EstimateTable.from_frame(__import__("pandas").DataFrame(
    ...     {"variable": ["y"], "statistic": ["mean"], "estimate": [2.5]}))
    >>> t.n_rows, t.records()[0]["estimate"]
    (1, 2.5)
    """

    columns: Mapping[str, npt.NDArray[Any]]
    by: tuple[str, ...] = ()
    level: float = 0.95
    design: Mapping[str, Any] = field(default_factory=dict)
    settings: Mapping[str, Any] = field(default_factory=dict)

    @classmethod
    def from_frame(cls, frame: pd.DataFrame, by: tuple[str, ...] = (), level: float = 0.95,
                   design: Mapping[str, Any] | None = None,
                   settings: Mapping[str, Any] | None = None) -> EstimateTable:
        """Return a table holding the rows of a tidy *frame* (which :attr:`frame` returns)."""
        columns = {str(c): frame[c].to_numpy() for c in frame.columns}
        table = cls(columns, tuple(by), level, dict(design or {}), dict(settings or {}))
        table.__dict__["frame"] = frame  # the cached property's slot: no rebuild
        return table

    def __repr__(self) -> str:
        """Show the table as the terminal does, with its design line."""
        names = sorted(set(np.asarray(self.columns.get("variable", [])).tolist()))
        return as_text(self, f"EstimateTable({self.n_rows} rows; variables {names})")

    def _repr_html_(self) -> str | None:
        """Show the table as the ``--format html`` renderer does (notebooks)."""
        return as_html(self)

    @property
    def n_rows(self) -> int:
        """Number of estimate rows."""
        return len(next(iter(self.columns.values()))) if self.columns else 0

    @cached_property
    def frame(self) -> pd.DataFrame:
        """The tidy rows as a pandas frame, built on first use (text columns as objects)."""
        import pandas as pd

        data: dict[str, Any] = {}
        for name, values in self.columns.items():
            if name in _LIST_COLUMNS:  # as if built from lists: pandas picks the text type
                data[name] = np.asarray(values).tolist()
            elif name in ("level", "standard", *self.by):  # None, not NaN (population, crude)
                data[name] = pd.Series(values, dtype=object)
            else:
                data[name] = values
        return pd.DataFrame(data)

    def to_pandas(self) -> pd.DataFrame:
        """Return a copy of the tidy frame."""
        return self.frame.copy()

    def records(self) -> list[dict[str, Any]]:
        """Return JSON-ready rows: by-columns folded into ``group`` (None for the population)."""
        names = list(self.columns)
        cells = [np.asarray(self.columns[c]).tolist() for c in names]
        out: list[dict[str, Any]] = []
        for values in zip(*cells, strict=True):
            row = dict(zip(names, values, strict=True))
            group = {b: _plain(row.pop(b)) for b in self.by}
            whole = all(v is None for v in group.values())
            rec: dict[str, Any] = {"group": None if whole else group}
            for k, v in row.items():
                if k == "reasons":
                    rec[k] = {str(a): int(b) for a, b in dict(v).items()}
                elif k == "flags":
                    rec[k] = list(v)
                else:
                    rec[k] = _plain(v)
            if rec.get("statistic") != "quantile":
                rec.pop("p", None)
            for k in (*_INFINITE_TO_NULL, "df"):
                x = rec.get(k)
                if isinstance(x, float) and math.isinf(x):
                    rec[k] = None if k != "df" else "inf"
            out.append(rec)
        return out


def object_column(values: list[Any]) -> npt.NDArray[Any]:
    """Return a 1-D object array of *values* (tuples and dicts kept as single cells)."""
    return np.fromiter(values, dtype=object, count=len(values))


def _plain(v: Any) -> Any:
    """Return a JSON-safe scalar: numpy -> Python, NaN -> None."""
    if v is None:
        return None
    if hasattr(v, "item"):
        v = v.item()
    if isinstance(v, float) and math.isnan(v):
        return None
    return v
