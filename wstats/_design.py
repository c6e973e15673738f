"""The sample design: what the user declares (Design) and its validated arrays (BoundDesign).

Conventions (each changes numbers):

- PSU ids are nested within strata: PSU 1 of stratum A and PSU 1 of stratum B are two PSUs.
  Without a PSU column every row is its own PSU; without strata there is one stratum.
- FPC is applied at the first stage only: a value > 1 is the population count of PSUs N_h
  (f_h = n_h/N_h), a value in (0, 1] the sampling fraction f_h itself.
- Strata with one PSU (``singleton``): ``fail`` raises; ``certainty`` lets them contribute
  nothing; ``center`` (an ad hoc, conservative heuristic with no published source) measures
  the singleton PSU total against the grand mean of all PSU totals; ``collapse`` sorts the
  strata by value and pools every singleton stratum with the next stratum in that order (a
  run of singletons joins the first stratum after it; a singleton that is last joins the pool
  before it); each pool is then one stratum (Cochran 1977; Hansen, Hurwitz & Madow 1953).
- Degrees of freedom: number of PSUs minus number of (variance) strata.
- Row numbers in messages count data rows from 1.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats._replicates import resolve_replicate_columns
from wstats.design.pooling import check_pool_rule
from wstats.errors import DesignError, did_you_mean

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats._column import Dataset, DecodedColumn

    Array = npt.NDArray[np.float64]
    Index = npt.NDArray[np.int64]
    #: per-row codes (strata, PSUs): int32 unless there are 2**31 or more distinct values
    Codes = npt.NDArray[np.signedinteger[Any]]

__all__ = ["REPLICATE_METHODS", "SINGLETON_TREATMENTS", "BoundDesign", "Design"]

SINGLETON_TREATMENTS = ("fail", "certainty", "center", "collapse")
REPLICATE_METHODS = ("brr", "fay", "jackknife", "jackknife-strata", "bootstrap", "sdr", "custom")


def _one_of(what: str, value: str, allowed: Sequence[str]) -> None:
    """Raise DesignError unless *value* is one of *allowed*."""
    if value not in allowed:
        raise DesignError(
            f"design {what} '{value}' is not one of {', '.join(allowed)}"
            f"{did_you_mean(str(value), allowed)}"
        )


@dataclass(frozen=True)
class Design:
    """A sample design, declared by column names.

    Parameters
    ----------
    weight : column of final analysis weights (required).
    strata : column of strata; None = one stratum.
    psu : column of primary sampling units (numbered within or across strata); None = every
        row is its own PSU.
    fpc : first-stage finite population correction column: values > 1 are the population
        count of PSUs in the stratum, values in (0, 1] the sampling fraction.
    singleton : treatment of strata with one PSU: ``fail``, ``certainty``, ``center``,
        ``collapse``.
    replicates : replicate-weight columns, a list of names or one glob (``"rw_*"``).
    replicate_method : ``brr``, ``fay``, ``jackknife``, ``jackknife-strata``, ``bootstrap``,
        ``sdr`` or ``custom``.
    fay_rho : Fay's perturbation factor (method ``fay``).
    replicate_scale : overall variance scale (method ``custom``, or to override).
    replicate_factors : per-replicate factors (``jackknife-strata`` given, or ``custom``).
    replicate_center : ``full`` (deviations from the full-sample estimate) or ``mean``.
    drop_incomplete : drop rows with a missing weight/stratum/PSU (reported) instead of failing.
    domain_df : ``design`` (PSUs - strata of the whole design, default) or ``domain`` (only
        strata and PSUs holding domain members).
    pool : for data pooled from several files: how each file's weights are rescaled,
        ``equal`` (1/K, default), ``rows`` (n_k/n) or factors summing to 1, one per file
        (see :mod:`wstats.design.pooling`). Ignored for one file.
    shared_psus : for pooled files: the files reuse the same strata and PSUs (same codes,
        same clusters), so the covariance between periods is estimated; by default strata
        are keyed by (file, stratum) and the periods are independent.

    Examples
    --------
    >>> Design("FINALWT", strata="STRAT_ID", psu="CLUSTER_ID").singleton
    'fail'
    """

    weight: str
    strata: str | None = None
    psu: str | None = None
    fpc: str | None = None
    singleton: str = "fail"
    replicates: Sequence[str] | str | None = None
    replicate_method: str | None = None
    fay_rho: float = 0.0
    replicate_scale: float | None = None
    replicate_factors: Sequence[float] | None = None
    replicate_center: str = "full"
    drop_incomplete: bool = False
    domain_df: str = "design"
    extra: dict[str, str] = field(default_factory=dict)
    pool: str | Sequence[float] = "equal"
    shared_psus: bool = False

    def __post_init__(self) -> None:
        """Check the options that do not need data."""
        if not isinstance(self.weight, str) or not self.weight:
            raise DesignError("the design needs a weight column; give weight='COLUMN'")
        _one_of("singleton", self.singleton, SINGLETON_TREATMENTS)
        _one_of("replicate_center", self.replicate_center, ("full", "mean"))
        _one_of("domain_df", self.domain_df, ("design", "domain"))
        check_pool_rule(self.pool)
        if self.replicates is None:
            if self.replicate_method is not None:
                raise DesignError(
                    f"replicate_method '{self.replicate_method}' was given without replicate "
                    "weights; name them with replicates=[...] or a glob"
                )
            return
        self._check_replicate_options()

    def columns(
        self, available: Sequence[str] | None = None, source: str = "the data"
    ) -> list[str]:
        """Return the columns the design needs (a replicate glob matched against *available*).

        Examples
        --------
        >>> Design("W", strata="S", psu="P").columns()
        ['W', 'S', 'P']
        """
        cols = [c for c in (self.weight, self.strata, self.psu, self.fpc) if c]
        if self.replicates is not None:
            if available is not None:
                cols += resolve_replicate_columns(self.replicates, list(available), source)
            elif isinstance(self.replicates, str):
                raise DesignError(f"replicate glob '{self.replicates}' needs the file's columns")
            else:
                cols += list(self.replicates)
        return list(dict.fromkeys(cols))

    def _check_replicate_options(self) -> None:
        """Check method, rho, scale and factors of a replicate-weight design."""
        if self.replicate_method is None:
            raise DesignError(
                "replicate weights were given without replicate_method; choose one of "
                + ", ".join(REPLICATE_METHODS)
            )
        _one_of("replicate_method", self.replicate_method, REPLICATE_METHODS)
        if not 0.0 <= self.fay_rho < 1.0:
            raise DesignError(f"fay_rho {self.fay_rho} is outside [0, 1); use e.g. 0.5")
        if self.replicate_scale is not None and not self.replicate_scale > 0:
            raise DesignError(f"replicate_scale {self.replicate_scale} must be positive")
        if self.replicate_method == "custom" and self.replicate_scale is None:
            raise DesignError("replicate_method 'custom' needs replicate_scale (e.g. 0.05)")
        if self.replicate_factors is not None:
            f = np.asarray(self.replicate_factors, dtype=np.float64)
            if not (np.isfinite(f).all() and (f >= 0).all()):
                raise DesignError("replicate_factors must be finite and non-negative")
        if self.fpc is not None:
            raise DesignError(
                "fpc cannot be combined with replicate weights; fold the correction into "
                "replicate_factors or replicate_scale"
            )

    def bind(self, data: Dataset) -> BoundDesign:
        """Validate the design against *data* and return its arrays.

        Parameters
        ----------
        data : the decoded dataset holding the design columns.

        Returns
        -------
        BoundDesign

        Raises
        ------
        DesignError, WeightError, SingletonStratumError
            When a column is absent or unusable, weights are bad, or strata hold one PSU.
        """
        from wstats._binding import bind

        return bind(self, data)


@dataclass(frozen=True, eq=False)
class BoundDesign:
    """A design checked against data, as arrays ready for the estimators.

    Attributes
    ----------
    design : the declared :class:`Design`.
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
    pool : how several files were pooled (:func:`wstats.design.pooling.pool_summary`), or
        None for one file.
    """

    design: Design
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
    pool: dict[str, Any] | None = None

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
            **({"pool": self.pool} if self.pool is not None else {}),
        }
