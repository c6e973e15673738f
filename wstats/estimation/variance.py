"""Design-based variances from weighted sums: Taylor linearization and replicate weights.

Linearization (Woodruff 1971; Wolter 2007, ch. 6): with z_hi the weighted total of the
linearized values u over PSU i of stratum h (per domain and value column),

    v = sum_h (1 - f_h) * n_h/(n_h - 1) * sum_i (z_hi - zbar_h)^2,

summed over all n_h PSUs of the design, a PSU without domain members having z_hi = 0.
Singleton strata (n_h = 1): ``certainty`` contributes 0; ``center`` contributes
(1 - f_h) (z_h1 - zbar)^2 with zbar the mean of all P PSU totals (an ad hoc, conservative
heuristic); ``collapse`` was resolved when the design was bound.

Linearized values: a total uses u = y; a ratio of sums R = Y/X (mean: X = weight of valid
rows; proportion: Y = indicator) uses u = (y - R x)/X, all per domain, zero outside it.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.design.replicates import replicate_variance

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.estimation.sums import WeightedSums

    Array = npt.NDArray[np.float64]

__all__ = ["domain_df", "linearized_variance", "ratio_estimate", "total_estimate"]


def linearized_variance(z: Array, sums: WeightedSums) -> Array:
    """Return the linearization variance per domain from pair totals *z* (pairs, V) -> (D, V)."""
    d = sums.design
    nd = sums.n_domains
    hd, s = sums.strata_cells
    n_cells = s.shape[0]
    n_h = np.repeat(d.n_h, nd).astype(np.float64)
    occupied = np.bincount(hd, minlength=n_cells).astype(np.float64)
    centre = np.asarray(s @ z) / n_h[:, None]
    single = np.repeat(d.n_h == 1, nd)
    if d.design.singleton == "center" and single.any():
        grand = sums.domain_totals(z) / d.n_psu
        centre[single] = np.tile(grand, (d.n_strata, 1))[single]
    dev = z - centre[hd]
    ss = np.asarray(s @ (dev * dev)) + (n_h - occupied)[:, None] * centre * centre
    coef = _stratum_coefficients(d.n_h, d.f_h, d.design.singleton)
    return np.asarray((np.repeat(coef, nd)[:, None] * ss).reshape(d.n_strata, nd, -1).sum(0))


def _stratum_coefficients(n_h: npt.NDArray[np.int64], f_h: Array, singleton: str) -> Array:
    """Return (1 - f_h) n_h/(n_h - 1), and for one-PSU strata 0 or (1 - f_h) (``center``)."""
    n = n_h.astype(np.float64)
    many = n > 1
    coef = (1.0 - f_h) * n / np.where(many, n - 1.0, 1.0)
    single_coef = (1.0 - f_h) if singleton == "center" else np.zeros_like(f_h)
    return np.asarray(np.where(many, coef, single_coef), dtype=np.float64)


def domain_df(members: Array, sums: WeightedSums) -> Array:
    """Return PSUs - strata counting only those with members, from pair counts (pairs, V)."""
    _, s = sums.strata_cells
    has = (members > 0).astype(np.float64)
    psus = sums.domain_totals(has)
    strata_cells = (np.asarray(s @ has) > 0).reshape(sums.design.n_strata, sums.n_domains, -1)
    return np.asarray(psus - strata_cells.sum(0), dtype=np.float64)


def total_estimate(sums: WeightedSums, y: Array) -> tuple[Array, Array]:
    """Return (totals, variances) per domain of the columns of *y* (zero outside validity)."""
    pair = sums.pair_sums(y)
    est = sums.domain_totals(pair)
    if sums.design.uses_replicates:
        return est, _replicate(sums.replicate_sums(y), est, sums)
    return est, linearized_variance(pair, sums)


def ratio_estimate(sums: WeightedSums, y: Array, x: npt.NDArray[Any]
                   ) -> tuple[Array, Array, Array]:
    """Return (ratios Y/X, variances, X totals) per domain; *y* (n, V), *x* (n,) or (n, V).

    A boolean *x* (a validity mask) is the weighted count of valid rows: the mean's denominator.

    NaN where the domain total of x is 0 (no valid row with weight).
    """
    y2 = y[:, None] if y.ndim == 1 else y
    k = y2.shape[1]
    is_mask = x.dtype == np.bool_
    x_sums = sums.valid_pair_sums(x.astype(bool)) if is_mask else sums.pair_sums(x)
    pair = np.column_stack([sums.pair_sums(y2), x_sums])
    tot = sums.domain_totals(pair)
    num, den = tot[:, :k], tot[:, k:]
    with np.errstate(divide="ignore", invalid="ignore"):
        est = num / den
        if sums.design.uses_replicates:
            rep = sums.replicate_sums(np.column_stack([y2, x]).astype(np.float64))
            theta_r = rep[:, :, :k] / rep[:, :, k:]
            return est, _replicate(theta_r, est, sums), den
        z = (pair[:, :k] - est[sums.pair_domain] * pair[:, k:]) / den[sums.pair_domain]
    z = np.where(np.isfinite(z), z, 0.0)
    var = np.where(np.isfinite(est), linearized_variance(z, sums), np.nan)
    return est, var, den


def _replicate(theta_r: Array, theta: Array, sums: WeightedSums) -> Array:
    """Return the replicate variance of *theta* (D, V) from *theta_r* (R, D, V)."""
    d = sums.design
    assert d.factors is not None
    return replicate_variance(theta_r, theta, d.scale, d.factors, d.design.replicate_center)
