"""A design checked against data (BoundDesign): the arrays the estimators use.

:class:`DeclaredDesign` is the shape of a declared design (``wstats.Design``) as this layer's
lower modules read it, so that binding needs no import of the class that calls it.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Protocol

import numpy as np

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.columns import DecodedColumn

    Array = npt.NDArray[np.float64]
    Index = npt.NDArray[np.int64]
    #: per-row codes (strata, PSUs): int32 unless there are 2**31 or more distinct values
    Codes = npt.NDArray[np.signedinteger[Any]]

__all__ = ["BoundDesign", "DeclaredDesign"]


class DeclaredDesign(Protocol):
    """The fields of a declared design (see :class:`wstats.design.declared.Design`)."""

    @property
    def weight(self) -> str: ...
    @property
    def strata(self) -> str | None: ...
    @property
    def psu(self) -> str | None: ...
    @property
    def fpc(self) -> str | None: ...
    @property
    def singleton(self) -> str: ...
    @property
    def replicates(self) -> Sequence[str] | str | None: ...
    @property
    def replicate_method(self) -> str | None: ...
    @property
    def fay_rho(self) -> float: ...
    @property
    def replicate_scale(self) -> float | None: ...
    @property
    def replicate_factors(self) -> Sequence[float] | None: ...
    @property
    def replicate_center(self) -> str: ...
    @property
    def drop_incomplete(self) -> bool: ...
    @property
    def domain_df(self) -> str: ...
    @property
    def extra(self) -> dict[str, str]: ...


@dataclass(frozen=True, eq=False)
class BoundDesign:
    """A design checked against data, as arrays ready for the estimators.

    Attributes
    ----------
    design : the declared design (a :class:`wstats.Design`).
    rows : indices of the data rows used (None = all rows; set when rows were dropped).
    weights : float64 full-sample weights of the rows used.
    psu : global PSU index 0..P-1 of each row (int32 below 2**31 PSUs); PSUs are numbered
        stratum by stratum.
    psu_stratum : variance stratum 0..H-1 of each PSU (after any collapsing).
    n_h : number of PSUs per variance stratum.
    f_h : first-stage sampling fraction per variance stratum (0 without FPC).
    stratum_labels : label of each variance stratum (pooled strata joined by ``+``).
    singleton_strata : number of strata that held one PSU before any treatment.
    replicate_weights : n x R float64 matrix, or None for linearization.
    replicate_columns : names of the replicate-weight columns.
    scale, factors : replicate variance scale and per-replicate factors (see _replicates).
    df : design degrees of freedom.
    dropped_rows : rows dropped for a missing weight/stratum/PSU/FPC (``drop_incomplete``).
    zero_weights : rows with weight exactly 0 (kept; they count in n_h but add nothing).
    """

    design: DeclaredDesign
    rows: Index | None
    weights: Array
    psu: Codes
    psu_stratum: Index
    n_h: Index
    f_h: Array
    stratum_labels: tuple[str, ...]
    singleton_strata: int
    replicate_weights: Array | None
    replicate_columns: tuple[str, ...]
    scale: float
    factors: Array | None
    df: float
    dropped_rows: int
    zero_weights: int

    @property
    def n_rows(self) -> int:
        """Rows used for estimation."""
        return len(self.weights)

    @property
    def n_psu(self) -> int:
        """Number of PSUs."""
        return len(self.psu_stratum)

    @property
    def n_strata(self) -> int:
        """Number of variance strata."""
        return len(self.n_h)

    @property
    def uses_replicates(self) -> bool:
        """True when variances come from replicate weights."""
        return self.replicate_weights is not None

    def column(self, col: DecodedColumn) -> DecodedColumn:
        """Return *col* restricted to the rows used (itself when no row was dropped)."""
        if self.rows is None:
            return col
        raw = None if col.raw is None else col.raw[self.rows]
        return col.replace(values=col.values[self.rows], reasons=col.reasons[self.rows], raw=raw)

    def summary(self) -> dict[str, Any]:
        """Return a JSON-ready description of the design as used."""
        d = self.design
        reps = self.replicate_weights is not None
        return {
            "weight": d.weight,
            "strata": d.strata,
            "psu": d.psu,
            "fpc": d.fpc,
            "n_strata": self.n_strata,
            "n_psu": self.n_psu,
            "df": self.df,
            "singleton": d.singleton,
            "singleton_strata": self.singleton_strata,
            "variance_method": "replicates" if reps else "linearization",
            "replicate_method": d.replicate_method if reps else None,
            "n_replicates": len(self.replicate_columns),
            "replicate_center": d.replicate_center if reps else None,
            "n_rows": self.n_rows,
            "dropped_rows": self.dropped_rows,
            "zero_weights": self.zero_weights,
            "domain_df": d.domain_df,
        }
