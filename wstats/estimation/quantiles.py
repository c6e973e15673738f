"""Weighted quantiles per domain: Q(p) = min{y : F(y) >= p}, one sort for all domains."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.estimation.domains import Domains

    Array = npt.NDArray[np.float64]
    Index = npt.NDArray[np.int64]
    Bool = npt.NDArray[np.bool_]

__all__ = ["domain_quantiles"]

_TOL = 1e-10  # relative tolerance when comparing cumulative weight shares with p


def domain_quantiles(
    y: Array, weights: Array, domains: Domains, valid: Bool, probs: Array
) -> Array:
    """Return lower weighted quantiles Q(p) = min{y : F(y) >= p} per domain.

    Parameters
    ----------
    y, weights, valid : values, weights and validity of the rows used.
    domains : the domain membership.
    probs : (D, K) probabilities per domain (domain 0 = population).

    Returns
    -------
    (D, K) array; NaN for a domain without valid rows or with zero total weight.
    """
    out = np.full(probs.shape, np.nan)
    pop = domains.inside & valid
    out[:1] = _coded_quantiles(y, weights, np.where(pop, 0, -1), 1, probs[:1])
    if domains.n_cells:
        cell = np.where(valid, domains.cell, -1)
        out[1:] = _coded_quantiles(y, weights, cell, domains.n_cells, probs[1:])
    return out


def _coded_quantiles(y: Array, w: Array, code: Index, n_codes: int, probs: Array) -> Array:
    """Return Q(p) per code group (code -1 = ignored), one sort, group-wise cumulative sums."""
    keep = code >= 0
    ys, ws, cs = y[keep], w[keep], code[keep]
    order = np.lexsort((ys, cs))
    ys, ws, cs = ys[order], ws[order], cs[order]
    groups = np.arange(n_codes)
    start = np.searchsorted(cs, groups, side="left")
    end = np.searchsorted(cs, groups, side="right")
    cw = np.cumsum(ws)
    before = np.r_[0.0, cw][start]
    total = np.r_[0.0, cw][end] - before
    with np.errstate(divide="ignore", invalid="ignore"):
        share = (cw - before[cs]) / total[cs]
    key = cs + np.nan_to_num(share, nan=0.0)
    target = groups[:, None] + probs - _TOL
    idx = np.searchsorted(key, target.ravel(), side="left").reshape(probs.shape)
    idx = np.clip(idx, start[:, None], np.maximum(end - 1, start)[:, None])
    found = (end > start)[:, None] & (total > 0)[:, None] & ~np.isnan(probs)
    values = ys[np.clip(idx, 0, max(len(ys) - 1, 0))] if len(ys) else np.zeros(probs.shape)
    return np.where(found, values, np.nan)
