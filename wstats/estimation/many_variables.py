"""Many variables in one pass: means, totals and proportions under Taylor linearization.

The per-statistic classes of :mod:`wstats.estimation.statistics` give the same numbers one variable
at a time. Here each variable costs a few passes over its rows (weighted bucket sums of its values
and validity; a categorical variable's levels in one bincount), its counts come from its non-valid
rows only, and the variances of all variables are computed together from one (pairs x columns)
block of linearized PSU totals, in column tiles that bound the memory. Replicate designs, ratios
and quantiles keep the per-variable classes.
"""

from __future__ import annotations

from collections import deque
from collections.abc import Callable, Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.columns import row_tiles
from wstats.estimation.intervals import effective_n
from wstats.estimation.levels import _SPAN, category_levels, level_index
from wstats.estimation.statistics import (
    Context,
    Piece,
    _Moments,
    _piece,
)
from wstats.estimation.variance import domain_df, linearized_variance

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.columns import DecodedColumn

    Array = npt.NDArray[np.float64]
    Bool = npt.NDArray[np.bool_]

__all__ = ["BATCHED", "batch_pieces", "proportion_piece"]

_Job = tuple["Array", Callable[["Array"], Piece]]

#: statistics computed here (under linearization)
BATCHED = ("mean", "total", "proportion")
_TILE = 4_000_000  # pair x column cells of linearized totals held before their variances
_THREADS = 2  # the machines this is tuned for have 2 cores
_DENSE = 1 << 19  # (bucket, code) cells summed in one pass (4 MiB); more take a lookup table


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


def _moments(ctx: Context, col: DecodedColumn, weighted_n: Array) -> _Moments:
    """Return n, weighted n, Kish deff_w, df and reason counts, from the non-valid rows."""
    sums = ctx.sums
    counts, w2_bad = sums.invalid_counts(col, len(ctx.vocabulary))
    rows = sums.domain_rows
    n = rows[:, 0] - counts.sum(1)
    w2 = rows[:, 1] - w2_bad
    with np.errstate(divide="ignore", invalid="ignore"):
        kish = np.where(weighted_n > 0, n * w2 / (weighted_n * weighted_n), np.nan)
    df = np.full(len(n), ctx.design.df)
    if ctx.per_domain_df:
        valid = col.valid.astype(np.float64)
        df = domain_df(sums.pair_counts(valid), sums)[:, 0]
    return _Moments(n, weighted_n, kish, df, counts)


def _mean_or_total(ctx: Context, name: str, stat: str) -> _Job:
    """Queue the domain mean or total of *name* (Wald-t; intervals are added later)."""
    col = ctx.numeric(name, stat)
    sums = ctx.sums
    values = col.values  # a number column: NaN exactly where not valid

    def parts(rows: Any) -> list[Any]:  # a tile of rows: the values (0 if not valid), validity
        v = values[rows]
        ok = v == v  # False exactly at NaN
        return [_zeroed(v, ok), ok]

    buckets = sums.bucket_sums_of(parts, 2)
    pair = sums.to_pairs(buckets)
    tot = sums.bucket_domains(buckets)
    wn = tot[:, 1]
    m = _moments(ctx, col, wn)
    with np.errstate(divide="ignore", invalid="ignore"):
        mean = tot[:, 0] / wn
        if stat == "mean":
            z = (pair[:, 0] - mean[sums.pair_domain] * pair[:, 1]) / wn[sums.pair_domain]
            z = np.where(np.isfinite(z), z, 0.0)
        else:
            z = pair[:, 0]
    s2 = _weighted_s2(ctx, col, mean, m)
    est = mean if stat == "mean" else tot[:, 0]

    def finish(var: Array) -> Piece:
        v = var[:, 0]
        if stat == "mean":
            v = np.where(np.isfinite(est), v, np.nan)
            return _piece(name, stat, ctx, m, est, v, s2 / m.n)
        return _piece(name, stat, ctx, m, est, v, m.weighted_n**2 * s2 / m.n)

    return z[:, None], finish


def _weighted_s2(ctx: Context, col: DecodedColumn, centre: Array, m: _Moments) -> Array:
    """Return s^2 = n/(n-1) sum w (y - centre_d)^2 / sum w per domain (see :mod:`_stats`)."""
    c = centre[0] if np.isfinite(centre[0]) else 0.0
    values = col.values  # a number column: NaN exactly where not valid

    def parts(rows: Any) -> list[Any]:  # a tile of rows: squared deviations of valid values
        dev = values[rows] - c
        dev = _zeroed(dev, dev == dev, out=dev)  # dev == dev: False exactly at NaN
        np.multiply(dev, dev, out=dev)
        return [dev]

    q = ctx.sums.bucket_domains(ctx.sums.bucket_sums_of(parts, 1))[:, 0]
    with np.errstate(divide="ignore", invalid="ignore"):
        ss = np.maximum(q - m.weighted_n * (centre - c) ** 2, 0.0)
        return np.asarray(m.n / (m.n - 1.0) * ss / m.weighted_n)


def _levels(ctx: Context, col: DecodedColumn) -> tuple[list[Any], list[str], Array]:
    """Return the levels, their labels and the weighted sums by bucket and level (nb, L).

    Small whole-number codes (the usual case) take row tiles. When buckets x codes are few,
    one pass checks the codes, marks those observed and sums the weights by (bucket, code);
    otherwise one pass checks and marks, and a second sums by (bucket, level) through a lookup
    table. NaN, a row without a valid value, goes to a discard slot; the temporaries are a
    tile's. Other categories are indexed over the whole column.
    """
    span = _span(col)
    if span is not None:
        lo, size = span[0], int(span[1] - span[0]) + 1
        few = (ctx.sums.n_buckets + 1) * (size + 1) <= _DENSE
        found = (_code_sums if few else _looked_up)(ctx, col, lo, size)
        if found is not None:  # None: a code is not a whole number
            return found
    return _indexed(ctx, col)


def _span(col: DecodedColumn) -> tuple[float, float] | None:
    """Return (min, max) of the valid values if the column is numeric, finite, of small span.

    A non-valid row holds NaN, which ``fmin``/``fmax`` skip.
    """
    if col.values.dtype.kind != "f" or not len(col.values):
        return None
    lo, hi = float(np.fmin.reduce(col.values)), float(np.fmax.reduce(col.values))
    if not (np.isfinite(lo) and np.isfinite(hi)) or hi - lo > _SPAN:
        return None
    return lo, hi


def _tile_codes(col: DecodedColumn, rows: slice, lo: float, size: int
                ) -> npt.NDArray[np.int64] | None:
    """Return the codes v - lo of a tile (*size* where not valid), or None if one is not whole.

    A number column's value is NaN exactly where it is not valid.
    """
    shifted = col.values[rows] - lo
    blank = np.isnan(shifted)
    if not bool(np.all((shifted == np.floor(shifted)) | blank)):
        return None
    codes = _zeroed(shifted, ~blank, out=shifted).astype(np.int64)
    codes += size * blank  # not valid: code `size`
    return codes


def _zeroed(x: Array, ok: Bool, out: Array | None = None) -> Array:
    """Return *x* with 0.0 where *ok* is False, bit for bit ``np.where(ok, x, 0.0)``.

    By a bit mask instead of a masked copy: with NaN rows scattered through a column,
    ``np.where`` and ``np.copyto(where=)`` took 0.23-0.34 ms per 232,000 rows (branches the
    processor mispredicts), the mask 0.1 ms. *out* may be *x* itself.
    """
    keep = np.negative(ok.view(np.int8))  # -1 (all bits set) where ok, 0 elsewhere: 1 byte
    result = np.empty(len(x)) if out is None else out
    np.bitwise_and(x.view(np.int64), keep, out=result.view(np.int64))  # keep widened as read
    return result


def _code_sums(ctx: Context, col: DecodedColumn, lo: float, size: int
               ) -> tuple[list[Any], list[str], Array] | None:
    """One pass: the codes observed and the weights by (bucket, code); then by level.

    None when a code is not whole (then the column takes the general way).
    """
    nb, width = ctx.sums.n_buckets, size + 1  # code `size`: rows without a valid value
    seen = np.zeros(width, dtype=bool)
    by_code = np.zeros((nb + 1) * width)  # bucket nb: rows outside the population domain
    bucket, weights = ctx.sums.bucket, ctx.design.weights
    for tile in row_tiles(len(col.values)):  # loop over row tiles, not rows
        codes = _tile_codes(col, tile, lo, size)
        if codes is None:
            return None
        seen[codes] = True
        key = bucket[tile].astype(np.int64) * width + codes
        by_code += np.bincount(key, weights=weights[tile], minlength=len(by_code))
        del codes, key  # freed before the next tile makes its own
    return _level_columns(col, lo, seen[:size], by_code.reshape(nb + 1, width)[:nb, :size])


def _level_columns(col: DecodedColumn, lo: float, seen: npt.NDArray[np.bool_],
                   by_code: Array) -> tuple[list[Any], list[str], Array]:
    """Return the levels of the observed codes and their columns of the (bucket, code) sums."""
    values, labels = category_levels(col, np.flatnonzero(seen) + lo)
    out = np.zeros((by_code.shape[0], len(values)))
    taken = set()
    for j, v in enumerate(values):  # loop over levels only; the first level of a code wins
        code = float(v) - lo
        if 0 <= code < by_code.shape[1] and code == int(code) and int(code) not in taken:
            taken.add(int(code))
            out[:, j] = by_code[:, int(code)]
    return values, labels, out


def _looked_up(ctx: Context, col: DecodedColumn, lo: float, size: int
               ) -> tuple[list[Any], list[str], Array] | None:
    """Two passes: the codes observed, then the weights by (bucket, level) via a table.

    None when a code is not whole (found in the first pass).
    """
    sums = ctx.sums
    nb = sums.n_buckets
    seen = np.zeros(size + 1, dtype=bool)  # slot `size`: rows without a valid value
    for tile in row_tiles(len(col.values)):  # loop over row tiles, not rows
        codes = _tile_codes(col, tile, lo, size)
        if codes is None:
            return None
        seen[codes] = True
        del codes  # freed before the next tile makes its own
    observed = np.flatnonzero(seen[:size]) + lo
    values, labels = category_levels(col, observed)
    # every valid value is an observed whole number in [lo, lo + size) and one of the levels
    lv = np.asarray(values, dtype=np.float64)
    pos = np.flatnonzero((lv >= lo) & (lv < lo + size) & (lv == np.floor(lv)))[::-1]
    nl = len(values)
    table = np.full(size + 1, nb * nl, dtype=np.int64)  # not valid: past every bucket
    table[(lv[pos] - lo).astype(np.int64)] = pos  # reversed: the first level wins
    by_key = np.zeros(nb * nl + nl + nb * nl + nl)  # slots past nb*nl: rows to discard
    for tile in row_tiles(len(col.values)):
        key = sums.bucket[tile].astype(np.int64) * nl
        codes = _tile_codes(col, tile, lo, size)
        assert codes is not None  # every tile passed in the first pass
        key += table[codes]
        by_key += np.bincount(key, weights=ctx.design.weights[tile], minlength=len(by_key))
        del key, codes
    return values, labels, by_key[: nb * nl].reshape(nb, nl)


def _indexed(ctx: Context, col: DecodedColumn) -> tuple[list[Any], list[str], Array]:
    """Any categories (text, fractions, wide spans): level indexes over the whole column."""
    nb = ctx.sums.n_buckets
    valid = col.valid
    values, labels = category_levels(col)
    index = level_index(col, values, valid)
    key = ctx.sums.bucket.astype(np.int64) * len(values) + index
    key[index < 0] = nb * len(values)  # not valid / no level: the discard slot
    nl = len(values)
    out = np.bincount(key, weights=ctx.design.weights, minlength=nb * nl + 1)[: nb * nl]
    return values, labels, out.reshape(nb, nl).astype(np.float64, copy=False)


def _proportion(ctx: Context, name: str, ci: str) -> _Job:
    """Queue the proportion of every level of *name*, per domain."""
    col = ctx.columns[name]
    sums = ctx.sums
    values, labels, buckets = _levels(ctx, col)
    nl = len(values)
    # every valid value is one of the levels, so the level sums add up to the valid rows'
    # weights (no second pass over the rows)
    valid_b = buckets.sum(axis=1, keepdims=True) if nl else np.zeros((sums.n_buckets, 1))
    by_level = sums.to_pairs(buckets)
    den_pair = sums.to_pairs(valid_b)[:, 0]
    den = sums.bucket_domains(valid_b)[:, 0]
    m = _moments(ctx, col, den)
    nd = sums.n_domains
    with np.errstate(divide="ignore", invalid="ignore"):
        est = (sums.domain_totals(by_level) / den[:, None]) if nl else np.zeros((nd, 0))
        z = (by_level - est[sums.pair_domain] * den_pair[:, None]) / den[sums.pair_domain, None]
    z = np.where(np.isfinite(z), z, 0.0)

    def finish(var: Array) -> Piece:
        return proportion_piece(name, labels, est, var, m, ci)

    return z.reshape(len(z), nl), finish  # no level: zero columns, the Piece is still made


def proportion_piece(name: str, labels: Sequence[str], est: Array, var: Array, m: _Moments,
                     ci: str) -> Piece:
    """Return the Piece of a categorical variable's level proportions (D x L) and variances.

    Shared with the engine that works from summed partitions.
    """
    nd, nl = est.shape
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
