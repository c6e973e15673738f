"""The sample design as the user declares it (Design); binding it to data gives a BoundDesign.

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

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.columns import require_dataset
from wstats.design.binding import bind
from wstats.design.bound import BoundDesign
from wstats.design.pooling import check_pool_rule
from wstats.design.replicates import resolve_replicate_columns
from wstats.errors import DesignError, WstatsError, did_you_mean

if TYPE_CHECKING:
    from pathlib import Path

    import numpy.typing as npt

    from wstats.decoding.codebook import Codebook
    from wstats.decoding.columns import Dataset

    Array = npt.NDArray[np.float64]
    Index = npt.NDArray[np.int64]
    #: per-row codes (strata, PSUs): int32 unless there are 2**31 or more distinct values
    Codes = npt.NDArray[np.signedinteger[Any]]

__all__ = ["REPLICATE_METHODS", "SINGLETON_TREATMENTS", "Design"]

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
    >>> Design("wt_final", strata="ds_strat", psu="ds_psu").singleton
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

    @classmethod
    def from_codebook(cls, codebook: Codebook | str | Path, **overrides: Any) -> Design:
        """Return the design a codebook's ``[design]`` table declares, keywords on top.

        Parameters
        ----------
        codebook : a loaded :class:`~wstats.Codebook`, or the path of its TOML file.
        **overrides : any ``Design`` field (``singleton="collapse"``, ``domain_df=...``);
            None leaves the codebook's value, as an absent CLI option does.

        Returns
        -------
        Design

        Raises
        ------
        DesignError
            The table names an unknown key, or no weight is given anywhere.

        Examples
        --------
        >>> from wstats.decoding.codebook import Codebook
        >>> cb = Codebook.from_dict({"design": {"weight": "W", "strata": "S"}})
        >>> Design.from_codebook(cb, psu="P").columns()
        ['W', 'S', 'P']
        """
        from wstats.decoding.codebook import Codebook, load_codebook

        cb = codebook if isinstance(codebook, Codebook) else load_codebook(codebook)
        merged = {**(cb.design or {}), **{k: v for k, v in overrides.items() if v is not None}}
        return cls.from_table(merged, f"{cb.source}: design.", DesignError,
                              'add weight = "COLUMN" to its [design] or pass weight="COLUMN"')

    @classmethod
    def from_table(cls, table: Mapping[str, Any], where: str,
                   error: type[WstatsError] = DesignError,
                   weight_hint: str = 'add weight = "COLUMN" to [design]') -> Design:
        """Return the Design a ``[design]`` table declares (codebook, spec, analysis file).

        *where* starts each message (the file and ``design.``); *error* is the error class
        its caller raises; *weight_hint* says where a missing weight goes.
        """
        from dataclasses import fields

        allowed = [f.name for f in fields(cls) if f.name != "extra"]
        for key in table:
            if key not in allowed:
                raise error(f"{where}{key}: unknown design key; allowed: "
                            f"{', '.join(allowed)}{did_you_mean(key, allowed)}")
        if not table.get("weight"):
            raise error(f"{where}weight: no weight column given; {weight_hint}")
        return cls(**table)

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
        require_dataset(data, "Design.bind")
        return bind(self, data)
