"""Estimates as data: a frozen table of tidy rows, before any text is made of it."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["ESTIMATE_COLUMNS", "EstimateTable"]

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


@dataclass(frozen=True, eq=False)
class EstimateTable:
    """The result of one estimation call.

    Attributes
    ----------
    frame : tidy rows, one per variable x level x domain x statistic; columns per
        :data:`ESTIMATE_COLUMNS` with the by-variables after ``p``.
    by : names of the by-variables (crossed), in the order given.
    level : confidence level of the intervals (e.g. 0.95).
    design : summary of the design used (see ``BoundDesign.summary()``).
    settings : what else was used (interval method per statistic, df rule, reliability
        standard), for the methods paragraph and provenance.
    """

    frame: pd.DataFrame
    by: tuple[str, ...] = ()
    level: float = 0.95
    design: Mapping[str, Any] = field(default_factory=dict)
    settings: Mapping[str, Any] = field(default_factory=dict)

    def to_pandas(self) -> pd.DataFrame:
        """Return a copy of the tidy frame."""
        return self.frame.copy()

    def records(self) -> list[dict[str, Any]]:
        """Return JSON-ready rows: by-columns folded into ``group`` (None for the population)."""
        import math

        out: list[dict[str, Any]] = []
        for row in self.frame.to_dict(orient="records"):
            group = {b: _plain(row.pop(b)) for b in self.by}
            whole = all(v is None for v in group.values())
            rec: dict[str, Any] = {"group": None if whole else group}
            for k, v in row.items():
                if k == "reasons":
                    rec[k] = {str(a): int(b) for a, b in dict(v).items()}
                elif k == "flags":
                    rec[k] = list(v)
                else:
                    rec[str(k)] = _plain(v)
            if rec.get("statistic") != "quantile":
                rec.pop("p", None)
            for k in ("estimate", "se", "ci_low", "ci_high", "df", "cv", "deff"):
                x = rec.get(k)
                if isinstance(x, float) and math.isinf(x):
                    rec[k] = None if k != "df" else "inf"
            out.append(rec)
        return out


def _plain(v: Any) -> Any:
    """Return a JSON-safe scalar: numpy -> Python, NaN -> None."""
    import math

    if v is None:
        return None
    if hasattr(v, "item"):
        v = v.item()
    if isinstance(v, float) and math.isnan(v):
        return None
    return v
