"""Many variables in one pass: means, totals and proportions under Taylor linearization.

The per-statistic classes of :mod:`wstats._stats` give the same numbers one variable at a
time. Here each variable costs a few passes over its rows (weighted bucket sums of its values
and validity; a categorical variable's levels in one bincount), its counts come from its
non-valid rows only, and the variances of all variables are computed together from one
(pairs x columns) block of linearized PSU totals, in column tiles that bound the memory.
Replicate designs, ratios and quantiles keep the per-variable classes.
"""

from __future__ import annotations

from collections import deque
from collections.abc import Callable, Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats._intervals import effective_n
from wstats._reasons import VALID
from wstats._stats import (
    Context,
    Piece,
    _Moments,
    _piece,
    category_levels,
    integer_codes,
    level_index,
)
from wstats._variance import domain_df, linearized_variance

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats._column import DecodedColumn

    Array = npt.NDArray[np.float64]
    Bool = npt.NDArray[np.bool_]

__all__ = ["BATCHED", "batch_pieces"]

_Job = tuple["Array", Callable[["Array"], Piece]]

#: statistics computed here (under linearization)
BATCHED = ("mean", "total", "proportion")
_TILE = 4_000_000  # pair x column cells of linearized totals held before their variances
_THREADS = 2  # the machines this is tuned for have 2 cores


class _Variances:
    """Collect linearized pair totals of many columns; compute their variances in tiles."""

    def __init__(self, ctx: Context) -> None:
        self.ctx = ctx
        self.pending: list[tuple[Array, Callable[[Array], Piece]]] = []
        self.width = 0
        self.done: list[Piece] = []

    def add(self, z: Array, finish: Callable[[Array], Piece]) -> None:
        """Queue pair totals *z* (pairs, k); *finish* turns their variances (D, k) into a Piece."""
        self.pending.append((z, finish))
        self.width += z.shape[1]
        if self.width * max(z.shape[0], 1) >= _TILE:
            self.flush()

    def flush(self) -> None:
        """Compute the variances of every queued column at once."""
        if not self.pending:
            return
        block = np.hstack([z for z, _ in self.pending])
        sums = self.ctx.sums
        var = (linearized_variance(block, sums) if block.shape[1]
               else np.zeros((sums.n_domains, 0)))
        start = 0
        for z, finish in self.pending:
            self.done.append(finish(var[:, start : start + z.shape[1]]))
            start += z.shape[1]
        self.pending, self.width = [], 0


def batch_pieces(ctx: Context, jobs: Sequence[tuple[str, str]], ci: str) -> list[Piece]:
    """Return the Pieces of (variable, statistic) *jobs*, in order, computed together.

    The row passes of the variables run on a few threads (numpy releases the interpreter
    lock in them); results are taken in job order and only a few jobs are in flight, so the
    memory stays bounded.
    """
    acc = _Variances(ctx)
    with ThreadPoolExecutor(_THREADS) as pool:
        pending: deque[Future[_Job]] = deque()
        for job in jobs:  # loop over variables only
            pending.append(pool.submit(_prepare, ctx, job, ci))
            if len(pending) > 2 * _THREADS:
                acc.add(*pending.popleft().result())
        while pending:
            acc.add(*pending.popleft().result())
    acc.flush()
    return acc.done


def _prepare(ctx: Context, job: tuple[str, str], ci: str) -> _Job:
    """Return the linearized pair totals of one job and how to finish its Piece."""
    name, stat = job
    if stat == "proportion":
        return _proportion(ctx, name, ci)
    return _mean_or_total(ctx, name, stat)


def _moments(ctx: Context, col: DecodedColumn, weighted_n: Array, valid: Bool) -> _Moments:
    """Return n, weighted n, Kish deff_w, df and reason counts, from the non-valid rows."""
    sums = ctx.sums
    counts, w2_bad = sums.invalid_counts(col.reasons, len(ctx.vocabulary), valid)
    rows = sums.domain_rows
    n = rows[:, 0] - counts.sum(1)
    w2 = rows[:, 1] - w2_bad
    with np.errstate(divide="ignore", invalid="ignore"):
        kish = np.where(weighted_n > 0, n * w2 / (weighted_n * weighted_n), np.nan)
    df = np.full(len(n), ctx.design.df)
    if ctx.per_domain_df:
        df = domain_df(sums.pair_counts(valid.astype(np.float64)), sums)[:, 0]
    return _Moments(n, weighted_n, kish, df, counts)


def _mean_or_total(ctx: Context, name: str, stat: str) -> _Job:
    """Queue the domain mean or total of *name* (Wald-t; intervals are added later)."""
    col = ctx.numeric(name, stat)
    sums = ctx.sums
    valid = col.reasons == VALID
    y = np.where(valid, col.values, 0.0)
    buckets = sums.bucket_sums([y, valid])
    pair = sums.to_pairs(buckets)
    tot = sums.bucket_domains(buckets)
    wn = tot[:, 1]
    m = _moments(ctx, col, wn, valid)
    with np.errstate(divide="ignore", invalid="ignore"):
        mean = tot[:, 0] / wn
        if stat == "mean":
            z = (pair[:, 0] - mean[sums.pair_domain] * pair[:, 1]) / wn[sums.pair_domain]
            z = np.where(np.isfinite(z), z, 0.0)
        else:
            z = pair[:, 0]
    s2 = _weighted_s2(ctx, y, valid, mean, m)
    est = mean if stat == "mean" else tot[:, 0]

    def finish(var: Array) -> Piece:
        v = var[:, 0]
        if stat == "mean":
            v = np.where(np.isfinite(est), v, np.nan)
            return _piece(name, stat, ctx, m, est, v, s2 / m.n)
        return _piece(name, stat, ctx, m, est, v, m.weighted_n**2 * s2 / m.n)

    return z[:, None], finish


def _weighted_s2(ctx: Context, y: Array, valid: Bool, centre: Array, m: _Moments) -> Array:
    """Return s^2 = n/(n-1) sum w (y - centre_d)^2 / sum w per domain (see :mod:`_stats`)."""
    c = centre[0] if np.isfinite(centre[0]) else 0.0
    dev = y - c
    np.multiply(dev, dev, out=dev)
    np.multiply(dev, valid, out=dev)
    q = ctx.sums.bucket_domains(ctx.sums.bucket_sums(dev))[:, 0]
    with np.errstate(divide="ignore", invalid="ignore"):
        ss = np.maximum(q - m.weighted_n * (centre - c) ** 2, 0.0)
        return np.asarray(m.n / (m.n - 1.0) * ss / m.weighted_n)


def _levels(ctx: Context, col: DecodedColumn, valid: Bool
            ) -> tuple[list[Any], list[str], Array]:
    """Return the levels, their labels and the weighted sums by bucket and level (nb, L).

    Small whole-number codes (the usual case) take one bincount over the valid rows: their
    codes give both the distinct values and, through a lookup table, each row's level.
    """
    sums = ctx.sums
    nb = sums.n_buckets
    rows = np.flatnonzero(valid)  # then gathers: cheaper than three boolean selections
    vv = col.values.take(rows) if col.values.dtype.kind == "f" else col.values[:0]
    codes = integer_codes(vv)
    if codes is None:
        values, labels = category_levels(col)
        index = level_index(col, values, valid)
        key = sums.bucket * len(values) + index
        key[index < 0] = nb * len(values)  # not valid / no level: the discard slot
        weights = ctx.design.weights
    else:
        shifted, lo = codes
        observed = np.flatnonzero(np.bincount(shifted)) + lo
        values, labels = category_levels(col, observed)
        # every valid value is an observed whole number in [lo, hi] and one of the levels
        lv = np.asarray(values, dtype=np.float64)
        hi = float(observed[-1])
        pos = np.flatnonzero((lv >= lo) & (lv <= hi) & (lv == np.floor(lv)))[::-1]
        table = np.full(int(hi - lo) + 1, -1, dtype=np.int64)
        table[(lv[pos] - lo).astype(np.int64)] = pos  # reversed: the first level wins
        key = sums.bucket.take(rows)
        key *= len(values)
        key += table[shifted]
        weights = ctx.design.weights.take(rows)
    nl = len(values)
    out = np.bincount(key, weights=weights, minlength=nb * nl + 1)[: nb * nl]
    return values, labels, out.reshape(nb, nl).astype(np.float64, copy=False)


def _proportion(ctx: Context, name: str, ci: str) -> _Job:
    """Queue the proportion of every level of *name*, per domain."""
    col = ctx.columns[name]
    sums = ctx.sums
    valid = col.reasons == VALID
    values, labels, buckets = _levels(ctx, col, valid)
    nl = len(values)
    by_level = sums.to_pairs(buckets)
    valid_b = sums.bucket_sums([valid]) if nl else np.zeros((sums.n_buckets, 1))
    den_pair = sums.to_pairs(valid_b)[:, 0]
    den = sums.bucket_domains(valid_b)[:, 0]
    m = _moments(ctx, col, den, valid)
    nd = sums.n_domains
    with np.errstate(divide="ignore", invalid="ignore"):
        est = (sums.domain_totals(by_level) / den[:, None]) if nl else np.zeros((nd, 0))
        z = (by_level - est[sums.pair_domain] * den_pair[:, None]) / den[sums.pair_domain, None]
    z = np.where(np.isfinite(z), z, 0.0)

    def finish(var: Array) -> Piece:
        var = np.where(np.isfinite(est), var, np.nan)
        p, n = est.ravel(), np.repeat(m.n, nl)
        empty = n == 0
        p = np.where(empty, np.nan, p)
        se = np.where(empty, np.nan, np.sqrt(np.maximum(var.ravel(), 0.0)))
        nan = np.full(len(p), np.nan)
        with np.errstate(divide="ignore", invalid="ignore"):
            deff = np.where(p * (1 - p) > 0, var.ravel() / (p * (1 - p) / n), np.nan)
        shown: list[str | None] = [*labels] * nd
        return Piece(name, "proportion", shown, np.nan, np.repeat(np.arange(nd), nl),
                     p, se, nan, nan.copy(), np.repeat(m.df, nl), deff,
                     np.repeat(m.deff_weight, nl), effective_n(p, se, n), n,
                     np.repeat(m.weighted_n, nl), np.repeat(m.reasons, nl, axis=0), ci)

    return z.reshape(len(z), nl), finish  # no level: zero columns, the Piece is still made
