"""The records of a look (see :mod:`wstats.reports.look`): code rows, bars, summaries."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from wstats.readers.display import as_html, as_text

__all__ = ["CATEGORICAL", "Bar", "CodeRow", "LookResult", "VariableLook"]

#: kinds whose chart is a bar per level and whose unlabelled codes are unexplained
CATEGORICAL = ("categorical", "binary", "text")


@dataclass(frozen=True)
class CodeRow:
    """One raw code of a variable and what decoding makes of it.

    Attributes
    ----------
    code : the raw code as text (``7``, ``-9``, ``.a`` for a tag, ``blank``, a text value),
        or ``low..high`` for valid codes listed together.
    rows : rows holding it (unweighted).
    weighted : the sum of their weights (rows without a usable weight count 0).
    label : the value label of the code, or None.
    reason : ``valid`` or the missing reason it becomes.
    value : the value it becomes when valid (NaN for a reason, a text value, or a range row).
    explained : False when nothing explains the code (see the module docstring).
    ruled : True when a rule (codebook code, file declaration, tag or blank rule) decided it.
    codes : number of distinct codes the row stands for (1, or more for a range row).
    """

    code: str
    rows: int
    weighted: float
    label: str | None
    reason: str
    value: float
    explained: bool
    ruled: bool = False
    codes: int = 1


@dataclass(frozen=True)
class Bar:
    """One bar of a chart: a level (``low == high``) or a bin ``[low, high)``.

    Attributes
    ----------
    text : what the bar is (a level's label or code, or the bin's limits).
    low, high : the level's value twice, or the bin's limits (NaN for a text level).
    share : weighted share of the valid rows, 0..1.
    rows : unweighted valid rows in it.
    """

    text: str
    low: float
    high: float
    share: float
    rows: int


@dataclass(frozen=True)
class VariableLook:
    """Everything :func:`look` found for one variable.

    Attributes
    ----------
    name, label, kind : the variable, its label (codebook's, else the file's) and kind.
    storage : ``number`` or ``text`` in the file.
    codes : one :class:`CodeRow` per raw code (numbers by value, then tags, then blanks).
    n_rows, n_valid : rows read, and rows that are valid after decoding.
    mean, weighted_mean : of the valid values (NaN when none or text).
    quartiles : (first quartile, median, third quartile), weighted (NaN when none or text).
    minimum, maximum : of the valid values (NaN when none or text).
    reasons : rows per reason that is not ``valid`` (only reasons that occur).
    chart : ``frequency`` (bars are levels), ``histogram`` (bars are bins) or ``none``.
    bars : the chart's bars.
    """

    name: str
    label: str | None
    kind: str
    storage: str
    codes: tuple[CodeRow, ...]
    n_rows: int
    n_valid: int
    mean: float
    weighted_mean: float
    quartiles: tuple[float, float, float]
    minimum: float
    maximum: float
    reasons: dict[str, int]
    chart: str
    bars: tuple[Bar, ...]


@dataclass(frozen=True)
class LookResult:
    """The look at one or more variables of one file.

    Attributes
    ----------
    path : the file read.
    codebook : the codebook applied (its path), or None (the file's own declarations only).
    weight : the weight column, or None (every row weighs 1).
    unweighted_rows : rows left out of the weighted figures (weight not a positive number).
    variables : one :class:`VariableLook` per variable, in the order asked.
    """

    path: str
    codebook: str | None
    weight: str | None
    unweighted_rows: int
    variables: tuple[VariableLook, ...] = field(default_factory=tuple)

    def records(self) -> list[dict[str, Any]]:
        """Return one JSON-ready dict per variable (NaN as None)."""
        return [_record(v) for v in self.variables]

    def __repr__(self) -> str:
        """Show the look as the terminal does."""
        return as_text(self, f"LookResult({self.path}: {[v.name for v in self.variables]})")

    def _repr_html_(self) -> str | None:
        """Show the look in a notebook (the terminal text, pre-formatted)."""
        return as_html(self)


def _record(v: VariableLook) -> dict[str, Any]:
    """Return a variable's look as plain JSON-ready data."""
    def num(x: float) -> float | None:
        return None if x != x else float(x)  # NaN -> None

    return {
        "variable": v.name, "label": v.label, "kind": v.kind, "storage": v.storage,
        "n_rows": v.n_rows, "n_valid": v.n_valid, "mean": num(v.mean),
        "weighted_mean": num(v.weighted_mean), "quartiles": [num(q) for q in v.quartiles],
        "min": num(v.minimum), "max": num(v.maximum), "reasons": dict(v.reasons),
        "codes": [{"code": c.code, "rows": c.rows, "weighted": c.weighted, "label": c.label,
                   "reason": c.reason, "value": num(c.value), "explained": c.explained,
                   "ruled": c.ruled, "codes": c.codes} for c in v.codes],
        "chart": v.chart,
        "bars": [{"text": b.text, "low": num(b.low), "high": num(b.high), "share": b.share,
                  "rows": b.rows} for b in v.bars],
    }
