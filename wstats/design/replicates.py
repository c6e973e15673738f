"""Replicate-weight variance: which columns, the per-method scale and factors, the formula.

The variance of an estimate from R replicate estimates theta_r is

    v = scale * sum_r factor_r * (theta_r - centre)^2

with ``centre`` the full-sample estimate (default) or the mean of the theta_r. Scale and
factors per method (Wolter 2007, ch. 3-4; Rust & Rao 1996; Fay & Train 1995; Judkins 1990;
Rao & Wu 1988; Kott 2001):

=================  =====================  ==========================================
method             scale                  factors
=================  =====================  ==========================================
brr                1/R                    1
fay (rho)          1/(R (1 - rho)^2)      1
jackknife          (R - 1)/R              1 (delete-one / delete-a-group, unstratified)
jackknife-strata   1                      (n_h - 1)/n_h of the stratum of the dropped PSU
bootstrap          1/R                    1
sdr                4/R                    1 (successive difference replication)
custom             ``replicate_scale``    ``replicate_factors`` (default 1)
=================  =====================  ==========================================

Degrees of freedom: PSUs - strata when the design also names strata or PSUs; otherwise R for
brr and fay (one replicate per half-sample stratum is the usual layout) and R - 1 for the
others.
"""

from __future__ import annotations

import fnmatch
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.errors import DesignError, did_you_mean

if TYPE_CHECKING:
    import numpy.typing as npt

    Array = npt.NDArray[np.float64]

__all__ = [
    "REPLICATE_SCALES",
    "jackknife_strata_factors",
    "replicate_df",
    "replicate_scale",
    "replicate_variance",
    "resolve_replicate_columns",
]

#: method -> human-readable scale rule (shown in design summaries and the methods text).
REPLICATE_SCALES: dict[str, str] = {
    "brr": "1/R",
    "fay": "1/(R(1-rho)^2)",
    "jackknife": "(R-1)/R",
    "jackknife-strata": "(n_h-1)/n_h per replicate",
    "bootstrap": "1/R",
    "sdr": "4/R",
    "custom": "given scale x given factors",
}


def resolve_replicate_columns(
    spec: Sequence[str] | str, available: Sequence[str], source: str
) -> list[str]:
    """Return the replicate columns named by a list or a glob; raise DesignError if none match."""
    if isinstance(spec, str):
        names = [c for c in available if fnmatch.fnmatchcase(c, spec)]
        if not names:
            stem = spec.replace("*", "").replace("?", "")
            raise DesignError(
                f"replicate glob '{spec}' matches no column in {source} (fix the glob or list "
                f"the columns){did_you_mean(stem, available)}"
            )
        return names
    names = list(spec)
    if not names:
        raise DesignError("the replicate-weight column list is empty; name at least 2 columns")
    for name in names:
        if name not in available:
            raise DesignError(
                f"replicate-weight column '{name}' is not in {source}"
                f"{did_you_mean(name, available)}"
            )
    return names


def replicate_scale(method: str, n_rep: int, rho: float, given: float | None) -> float:
    """Return the overall variance multiplier of *method* for *n_rep* replicates."""
    if given is not None:
        return float(given)
    rules = {
        "brr": 1.0 / n_rep,
        "fay": 1.0 / (n_rep * (1.0 - rho) ** 2),
        "jackknife": (n_rep - 1.0) / n_rep,
        "jackknife-strata": 1.0,
        "bootstrap": 1.0 / n_rep,
        "sdr": 4.0 / n_rep,
    }
    return rules[method]


def replicate_df(method: str, n_rep: int, design_df: float | None) -> float:
    """Return the degrees of freedom of a replicate design (see the module docstring)."""
    if design_df is not None:
        return design_df
    return float(n_rep) if method in ("brr", "fay") else float(n_rep - 1)


def jackknife_strata_factors(
    rep: Array, weights: Array, row_stratum: npt.NDArray[np.signedinteger[Any]],
    n_h: npt.NDArray[np.int64],
) -> Array:
    """Return (n_h - 1)/n_h per replicate, n_h of the stratum whose PSU the replicate drops.

    The dropped PSU is recognised by rows with a positive full-sample weight and a zero
    replicate weight; every such row of one replicate must lie in one stratum.
    """
    dropped = (rep == 0) & (weights > 0)[:, None]
    has = dropped.any(axis=0)
    if not has.all():
        first = int(np.flatnonzero(~has)[0]) + 1
        raise DesignError(
            f"jackknife-strata: replicate {first} sets no positively weighted row to 0, so the "
            "dropped PSU cannot be found; give replicate_factors or use method 'jackknife'"
        )
    first_row = dropped.argmax(axis=0)
    stratum = row_stratum[first_row]
    strata_hit = np.where(dropped, row_stratum[:, None], stratum[None, :])
    if (strata_hit != stratum[None, :]).any():
        raise DesignError(
            "jackknife-strata: a replicate drops rows of more than one stratum; check the "
            "strata column or give replicate_factors"
        )
    h = n_h[stratum].astype(np.float64)
    return np.asarray((h - 1.0) / h, dtype=np.float64)


def replicate_variance(
    theta_r: Array, theta: Array, scale: float, factors: Array, center: str
) -> Array:
    """Return scale * sum_r factor_r (theta_r - centre)^2 over axis 0, vectorised.

    *theta_r* has shape (R, ...) and *theta* the trailing shape; ``center`` is ``full`` or
    ``mean``. NaN replicate estimates (an empty domain in one replicate) give NaN.
    """
    centre = theta if center == "full" else theta_r.mean(axis=0)
    dev = theta_r - centre[None, ...]
    shape = (-1,) + (1,) * (theta_r.ndim - 1)
    return np.asarray(scale * np.sum(factors.reshape(shape) * dev * dev, axis=0))
