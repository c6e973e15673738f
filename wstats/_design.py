"""The sample design: what the user declares (Design) and its validated arrays (BoundDesign)."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

__all__ = ["REPLICATE_METHODS", "SINGLETON_TREATMENTS", "Design"]

SINGLETON_TREATMENTS = ("fail", "certainty", "center", "collapse")
REPLICATE_METHODS = ("brr", "fay", "jackknife", "jackknife-strata", "bootstrap", "sdr", "custom")


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
