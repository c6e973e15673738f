"""One covariance for many estimates of one design (REFERENCES §12).

Every estimate here is a ratio of weighted totals Y/X by domain (a mean: X = weight of the
valid rows; a proportion: Y = a level's indicator; a total: X absent). Under Taylor
linearization each has influence values u_k = (y_k - R x_k)/X (u_k = y_k for a total), zero
outside its domain, and its PSU totals z_hi; two estimates' covariance is

    c(a, b) = sum_h (1 - f_h) n_h/(n_h - 1) sum_i (z^a_hi - zbar^a_h)(z^b_hi - zbar^b_h),

the same centring, factor, FPC and singleton treatment as :mod:`wstats.estimation.variance`, so the
diagonal is the variance the estimate table reports. Replicate designs take
scale * sum_r factor_r (theta^a_r - centre^a)(theta^b_r - centre^b) with the design's
coefficient and centring (:mod:`wstats.design.replicates`). Any linear combination c'theta then has
variance c'Vc (Wolter 2007, *Introduction to Variance Estimation*, 2nd ed., ch. 6).

Work: one weighted pass per value column into (PSU, domain) sums (:class:`WeightedSums`),
then a dense (PSUs x estimates) block in PSU tiles; nothing is looped over rows.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.estimation.sums import WeightedSums

    Array = npt.NDArray[np.float64]
    Index = npt.NDArray[np.int64]
    #: makes the value columns of a tile of rows (a slice or row numbers)
    Parts = Callable[[Any], Sequence[npt.NDArray[Any] | float]]

__all__ = ["Covariance", "Influence", "joint_covariance", "ratio_influence", "total_influence"]

_CELLS = 2_000_000  # PSU x estimate cells of the dense block held at once


@dataclass(frozen=True, eq=False)
class Influence:
    """Estimates Y/X (or totals Y) of V value columns in D domains, ready for covariances.

    Attributes
    ----------
    estimate : (D, V) the estimates; NaN where the domain's X total is 0.
    z : (pairs, V) linearized totals per (PSU, domain) pair of the weighted sums, or None
        for a replicate design.
    replicates : (R, D, V) the replicate estimates, or None under linearization.
    """

    estimate: Array
    z: Array | None
    replicates: Array | None


def ratio_influence(sums: WeightedSums, parts: Parts, width: int) -> Influence:
    """Return the influence of the ratios Y_v/X per domain.

    *parts(rows)* gives the *width* numerator columns and then the denominator column of a
    tile of rows (a slice or row numbers; zero where a row does not count).
    """
    if sums.design.uses_replicates:
        rep = sums.replicate_sums(_full(parts, sums.n_rows, width + 1))
        with np.errstate(divide="ignore", invalid="ignore"):
            est = _ratio(sums.bucket_domains(sums.bucket_sums_of(parts, width + 1)))
            return Influence(est, None, rep[:, :, :width] / rep[:, :, width:])
    buckets = sums.bucket_sums_of(parts, width + 1)
    pair = sums.to_pairs(buckets)
    tot = sums.bucket_domains(buckets)
    with np.errstate(divide="ignore", invalid="ignore"):
        est = _ratio(tot)
        den = tot[sums.pair_domain, width:]
        z = (pair[:, :width] - est[sums.pair_domain] * pair[:, width:]) / den
    return Influence(est, np.where(np.isfinite(z), z, 0.0), None)


def total_influence(sums: WeightedSums, parts: Parts, width: int) -> Influence:
    """Return the influence of the totals of the *width* columns *parts* makes, per domain."""
    if sums.design.uses_replicates:
        rep = sums.replicate_sums(_full(parts, sums.n_rows, width))
        est = sums.bucket_domains(sums.bucket_sums_of(parts, width))
        return Influence(est, None, rep)
    buckets = sums.bucket_sums_of(parts, width)
    return Influence(sums.bucket_domains(buckets), sums.to_pairs(buckets), None)


def _ratio(tot: Array) -> Array:
    """Return the numerator columns of domain totals over their last (denominator) column."""
    return np.asarray(tot[:, :-1] / tot[:, -1:])


def _full(parts: Parts, n: int, width: int) -> Array:
    """Return the value columns *parts* makes for all *n* rows as an (n, width) array."""
    cols = parts(slice(0, n))
    return np.column_stack([np.broadcast_to(np.asarray(c, dtype=np.float64), (n,))
                            for c in cols[:width]])


@dataclass(frozen=True, eq=False)
class Covariance:
    """K estimates of one design and their covariance matrix.

    Attributes
    ----------
    estimate : (K,) the estimates.
    matrix : (K, K) design-based covariance; rows and columns of a NaN estimate are NaN.
    df : degrees of freedom of the design (PSUs - strata, or the replicate design's).
    """

    estimate: Array
    matrix: Array
    df: float

    def variance(self, c: npt.ArrayLike) -> Array:
        """Return c V c' for each row of *c* ((K,) -> scalar array, (M, K) -> (M,)).

        NaN where a nonzero coefficient meets a NaN estimate (a zero one does not).
        """
        cm = np.atleast_2d(np.asarray(c, dtype=np.float64))
        out = np.einsum("mk,kl,ml->m", cm, np.nan_to_num(self.matrix), cm)
        out[self._touched(cm)] = np.nan
        return np.asarray(out if np.ndim(c) > 1 else out[0])

    def combine(self, c: npt.ArrayLike) -> tuple[Array, Array]:
        """Return the estimates c theta and their standard errors sqrt(c V c')."""
        cm = np.asarray(c, dtype=np.float64)
        est = np.atleast_1d(np.atleast_2d(cm) @ np.nan_to_num(self.estimate))
        est[self._touched(np.atleast_2d(cm))] = np.nan
        se = np.sqrt(np.maximum(self.variance(cm), 0.0))
        return (est if cm.ndim > 1 else est[0]), se

    def subset(self, index: npt.ArrayLike) -> Covariance:
        """Return the estimates *index* with their block of the covariance."""
        i = np.asarray(index, dtype=np.int64)
        return Covariance(self.estimate[i], self.matrix[np.ix_(i, i)], self.df)

    def transform(self, a: npt.ArrayLike) -> Covariance:
        """Return the estimates A theta with covariance A V A' (A: (M, K))."""
        am = np.atleast_2d(np.asarray(a, dtype=np.float64))
        bad = self._touched(am)
        est = am @ np.nan_to_num(self.estimate)
        matrix = am @ np.nan_to_num(self.matrix) @ am.T
        est[bad] = np.nan
        matrix[bad, :] = np.nan
        matrix[:, bad] = np.nan
        return Covariance(est, matrix, self.df)

    def _touched(self, cm: Array) -> npt.NDArray[np.bool_]:
        """Return, per row of *cm*, whether a nonzero coefficient meets a NaN estimate."""
        missing = ~np.isfinite(self.estimate)
        return np.asarray(((cm != 0) & missing[None, :]).any(axis=1), dtype=bool)


#: one block of picked estimates: an influence and, per estimate, its domain and column
Pick = tuple[Influence, "Index", "Index"]


def joint_covariance(sums: WeightedSums, picks: Sequence[Pick]) -> Covariance:
    """Return the estimates picked from influences and their full covariance.

    Parameters
    ----------
    sums : the weighted-sums engine the influences were made with (one design).
    picks : (influence, domains, columns): the estimates ``influence.estimate[d, v]`` for
        the paired entries of *domains* and *columns*, in order.

    Returns
    -------
    Covariance
        The K picked estimates (K = all entries of all picks) and their K x K covariance.
    """
    distinct, back = _distinct_picks(picks)
    est = np.concatenate([inf.estimate[d, v] for inf, d, v in picks]) if picks else np.zeros(0)
    if sums.design.uses_replicates:
        matrix = _replicate_matrix(sums, distinct, est[_firsts(back)])
    else:
        matrix = _linearized_matrix(sums, distinct)
    matrix = matrix[np.ix_(back, back)]
    bad = ~np.isfinite(est)
    matrix[bad, :] = np.nan
    matrix[:, bad] = np.nan
    return Covariance(est, matrix, float(sums.design.df))


def _distinct_picks(picks: Sequence[Pick]) -> tuple[list[Pick], Index]:
    """Return the picks without repeated estimates, and each estimate's distinct number."""
    distinct: list[Pick] = []
    back: list[Index] = []
    start = 0
    for inf, dom, col in picks:  # loop over picks (variables) only
        key = np.asarray(dom, dtype=np.int64) * inf.estimate.shape[1] + np.asarray(col)
        uniq, inv = np.unique(key, return_inverse=True)
        v = inf.estimate.shape[1]
        distinct.append((inf, uniq // v, uniq % v))
        back.append(start + inv.ravel())
        start += len(uniq)
    return distinct, (np.concatenate(back) if back else np.zeros(0, np.int64))


def _firsts(back: Index) -> Index:
    """Return, per distinct number in *back*, the first position holding it."""
    order = np.argsort(back, kind="stable")
    first = np.r_[True, back[order][1:] != back[order][:-1]] if len(back) else back.astype(bool)
    return np.asarray(order[first], dtype=np.int64)


def _replicate_matrix(sums: WeightedSums, picks: Sequence[Pick], est: Array) -> Array:
    """Return scale * sum_r f_r (theta_r - centre)(theta_r - centre)' of the picked estimates."""
    d = sums.design
    assert d.factors is not None  # a replicate design has its factors
    theta_r = np.concatenate([_replicates(inf)[:, dom, v] for inf, dom, v in picks], axis=1)
    centre = est if d.design.replicate_center == "full" else theta_r.mean(axis=0)
    dev = theta_r - centre[None, :]
    return np.asarray(d.scale * (dev.T @ (d.factors[:, None] * dev)))


def _replicates(inf: Influence) -> Array:
    """Return the replicate estimates of an influence made under a replicate design."""
    assert inf.replicates is not None  # made with the same (replicate) design
    return inf.replicates


def _linearized_matrix(sums: WeightedSums, picks: Sequence[Pick]) -> Array:
    """Return sum_h coef_h sum_i (z_hi - m_h)(z_hi - m_h)' over every PSU of the design.

    m_h is the stratum mean of the PSU totals (a PSU without members adds z = 0), or for a
    one-PSU stratum under ``center`` the mean of all PSU totals, as in the variance code.
    """
    from wstats.estimation.variance import _stratum_coefficients

    d = sums.design
    k = sum(len(dom) for _, dom, _ in picks)
    targets = _targets(sums, picks)
    strata = _strata_sums(sums, targets, k)
    centre = strata / np.maximum(d.n_h, 1)[:, None].astype(np.float64)
    single = d.n_h == 1
    if d.design.singleton == "center" and single.any():
        centre[single] = strata.sum(axis=0) / d.n_psu
    coef = _stratum_coefficients(d.n_h, d.f_h, d.design.singleton)
    out = np.zeros((k, k))
    step = max(1, _CELLS // max(k, 1))
    for first in range(0, d.n_psu, step):  # PSU tiles, not rows
        last = min(first + step, d.n_psu)
        dev = _psu_block(sums, targets, k, first, last)
        h = d.psu_stratum[first:last]
        dev -= centre[h]
        out += dev.T @ (coef[h][:, None] * dev)
        del dev
    return out


def _targets(sums: WeightedSums, picks: Sequence[Pick]) -> list[tuple[Array, Index]]:
    """Return per pick its pair totals z and, per (pair, column), the estimate number or -1."""
    out = []
    start = 0
    for inf, dom, col in picks:  # loop over picks (variables) only
        assert inf.z is not None  # made under linearization
        key = np.full(inf.estimate.shape, -1, dtype=np.int64)
        key[dom, col] = start + np.arange(len(dom))
        start += len(dom)
        out.append((inf.z, key[sums.pair_domain]))
    return out


def _strata_sums(sums: WeightedSums, targets: list[tuple[Array, Index]], k: int) -> Array:
    """Return the sums of the PSU totals of every picked estimate by stratum: (H, K)."""
    out = np.zeros((sums.design.n_strata, k))
    h = sums.design.psu_stratum[sums.pair_psu]
    for z, target in targets:
        hit = target >= 0
        rows, cols = np.nonzero(hit)
        np.add.at(out, (h[rows], target[rows, cols]), z[rows, cols])
    return out


def _psu_block(sums: WeightedSums, targets: list[tuple[Array, Index]], k: int, first: int,
               last: int) -> Array:
    """Return the PSU totals of PSUs first..last-1 for every picked estimate: (PSUs, K)."""
    block = np.zeros((last - first, k))
    lo, hi = np.searchsorted(sums.pair_psu, [first, last])  # pairs are sorted by PSU
    psu = sums.pair_psu[lo:hi] - first
    for z, target in targets:
        t = target[lo:hi]
        rows, cols = np.nonzero(t >= 0)
        block[psu[rows], t[rows, cols]] = z[lo:hi][rows, cols]
    return block
