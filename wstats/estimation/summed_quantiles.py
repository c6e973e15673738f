"""Exact quantiles from summed partitions, with the Woodruff interval.

Each partition sums its weights by (group, value): the weighted distribution of a variable in
every (file, stratum, PSU, domain key) group. That is all a lower quantile
Q(p) = min{y : F(y) >= p} needs (identical values add their weights; the quantile is the same
as over the rows), and all its Woodruff (1952) interval needs too: the weight below a
threshold in each group gives the linearized totals of the proportion below Q(p) without a
second pass over the data. The formulas are those of
:class:`wstats.estimation.statistics.Quantile`.

Exact, but not a reduction for a continuous variable: the client holds each distinct value
once per group, which approaches the number of rows when every value differs.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from wstats.estimation.domains import Domains
from wstats.estimation.quantiles import domain_quantiles
from wstats.estimation.statistics import Context, Piece, _piece, _t, _with_se
from wstats.estimation.variance import linearized_variance

if TYPE_CHECKING:
    import numpy.typing as npt
    import pandas as pd

    from wstats.estimation.from_sums import Summed

    Array = npt.NDArray[np.float64]

__all__ = ["quantile_piece"]


def quantile_piece(s: Summed, name: str, j: int, levels: pd.DataFrame, p: float) -> Piece:
    """Return the Piece of the domain quantiles at *p* of variable *j* (its value sums)."""
    from wstats.estimation.from_sums import group_rows, moments

    ws = s.sums
    row = group_rows(s, levels)
    y = levels["value"].to_numpy(float)
    w = levels["w"].to_numpy(float) * s.lam[row]
    doms = Domains(ws.domains.inside[row], ws.domains.cell[row], ws.domains.n_cells)
    ok = np.ones(len(y), dtype=bool)
    m = moments(s, j)
    nd = ws.n_domains
    q = domain_quantiles(y, w, doms, ok, np.full((nd, 1), float(p)))[:, 0]
    var_f = _below_variance(s, j, row, y, w, q)
    se_f = np.sqrt(np.maximum(var_f, 0.0))
    t = _t(m.df, s.level)
    bounds = np.column_stack([np.clip(p - t * se_f, 0.0, 1.0), np.clip(p + t * se_f, 0.0, 1.0)])
    lim = domain_quantiles(y, w, doms, ok, bounds)
    with np.errstate(divide="ignore", invalid="ignore"):
        v_srs = p * (1.0 - p) / m.n
        se = (lim[:, 1] - lim[:, 0]) / (2.0 * t)
    ctx = Context(ws, {}, s.vocabulary, s.level)
    out = _piece(name, "quantile", ctx, m, q, var_f, v_srs, (lim[:, 0], lim[:, 1]), p)
    return _with_se(out, np.where(m.n > 0, se, np.nan))


def _below_variance(s: Summed, j: int, row: npt.NDArray[np.int64], y: Array, w: Array,
                    q: Array) -> Array:
    """Return the linearization variance of the share below Q(p) per domain.

    As the in-memory engine: a row's own domain threshold (its cell's, or the population's
    outside every cell) for the cells, the population's for the population.
    """
    ws, n = s.sums, len(s.frame)
    cell_q = q[ws.domains.cell[row] + 1]
    below_cell = np.bincount(row, weights=np.where(y <= cell_q, w, 0.0),
                             minlength=n).astype(np.float64)
    below_pop = np.bincount(row, weights=np.where(y <= q[0], w, 0.0),
                            minlength=n).astype(np.float64)
    valid = s.frame[f"w{j}"].to_numpy(float) * s.lam
    buckets = ws.bucket_sums([below_cell, below_pop, valid])
    pair, tot = ws.to_pairs(buckets), ws.bucket_domains(buckets)
    with np.errstate(divide="ignore", invalid="ignore"):
        est = tot[:, :2] / tot[:, 2:3]
        z = (pair[:, :2] - est[ws.pair_domain] * pair[:, 2:3]) / tot[ws.pair_domain, 2:3]
    var = np.where(np.isfinite(est),
                   linearized_variance(np.where(np.isfinite(z), z, 0.0), ws), np.nan)
    return np.asarray(np.r_[var[:1, 1], var[1:, 0]], dtype=np.float64)
