"""Weighted sums by (PSU, domain): the sufficient statistics of every estimator, vectorised.

Every estimate of wstats is a function of weighted sums of per-row values over PSU x domain
cells (and, for replicate designs, over replicate x domain). :class:`WeightedSums` maps every
row to its (PSU, by-cell) bucket once per call and sums value columns by bucket in numpy
(segment sums when the rows are stored in bucket order, weighted counts otherwise); small
group sums take buckets to (PSU, domain) pairs, strata and domains. scipy.sparse is used
only for replicate weights, so a linearization run does not import scipy.

Domains: domain 0 is the whole population (rows satisfying the ``where`` condition); domains 1..C
are the crossed ``by`` cells. A row is in domain 0 and in at most one cell, so it adds to at most
two (PSU, domain) pairs. Only (PSU, domain) pairs that hold rows are stored: a PSU without members
of a domain contributes a zero total there, which the variance adds back exactly (see
:mod:`wstats.estimation.variance`), so nothing the size of PSUs x domains is built.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from functools import cached_property
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.columns import code_type, row_tiles

if TYPE_CHECKING:
    import numpy.typing as npt
    from scipy import sparse

    from wstats.decoding.columns import DecodedColumn
    from wstats.design.bound import BoundDesign
    from wstats.estimation.domains import Domains

    Array = npt.NDArray[np.float64]
    Index = npt.NDArray[np.int64]
    #: per-row codes (PSU index, bucket): int32 unless 2**31 or more distinct values
    Codes = npt.NDArray[np.signedinteger[Any]]
    Bool = npt.NDArray[np.bool_]
    #: makes the value columns of a tile of rows (a slice or row numbers); a number stands
    #: for a constant column
    Parts = Callable[[slice | Index], Sequence[npt.NDArray[Any] | float]]

__all__ = ["GroupSum", "WeightedSums"]

class WeightedSums:
    """Sums of row values by (PSU, domain), by domain, and by (replicate, domain).

    Every row of the population domain falls in exactly one *bucket*: its PSU crossed with
    its by-cell (or with "no cell"). Row-level work is one weighted pass per value column
    into bucket sums, so its cost does not grow with
    the number of domains; (PSU, domain) pairs and domains are then small sums of buckets
    (a row counts in the population pair of its PSU and, with a cell, in that cell's pair).
    """

    def __init__(self, design: BoundDesign, domains: Domains) -> None:
        n, nd = design.n_rows, domains.n_domains
        self.design = design
        self.domains = domains
        self.n_domains = nd
        bucket_key, self.bucket = _buckets(design.psu, domains.cell, domains.inside, nd,
                                             design.n_psu)
        #: number of occupied buckets; ``bucket`` holds each row's (n_buckets: outside)
        nb = self.n_buckets = len(bucket_key)
        self._rows = _RowSums(self.bucket, design.weights, nb, n)
        b_psu, b_slot = bucket_key // nd, bucket_key % nd
        in_cell = np.flatnonzero(b_slot > 0)
        pair_key = np.sort(np.concatenate([b_psu * nd, bucket_key[in_cell]]))
        pair_key = pair_key[np.r_[True, pair_key[1:] != pair_key[:-1]][: len(pair_key)]]  # distinct
        #: PSU and domain of every stored (PSU, domain) pair
        self.pair_psu: Index = (pair_key // nd).astype(np.int64)
        self.pair_domain: Index = (pair_key % nd).astype(np.int64)
        src = np.concatenate([np.arange(nb), in_cell])
        to_pair = np.concatenate([np.searchsorted(pair_key, b_psu * nd),
                                  np.searchsorted(pair_key, bucket_key[in_cell])])
        self._to_pair = GroupSum(to_pair, src, len(pair_key))
        to_domain = np.concatenate([np.zeros(nb, np.int64), b_slot[in_cell]])
        self._to_domain = GroupSum(to_domain, src, nd)
        self._pair_to_domain = GroupSum(self.pair_domain, np.arange(len(pair_key)), nd)

    @property
    def n_rows(self) -> int:
        """Rows used."""
        return self.design.n_rows

    def bucket_sums(self, x: Array | Sequence[Array]) -> Array:
        """Return sum over rows of w * x by bucket: shape (buckets, V)."""
        columns = _columns(x)
        out = np.empty((self.n_buckets, len(columns)))
        for j, col in enumerate(columns):  # loop over value columns only
            out[:, j] = self._rows.weighted(col)
        return out

    def bucket_sums_of(self, parts: Parts, width: int) -> Array:
        """Return sum over rows of w * v by bucket for value columns made tile by tile.

        ``parts(rows)`` returns the *width* value columns of the rows ``rows`` (a slice or an
        array of row numbers); see :meth:`_RowSums.weighted_parts`. Shape (buckets, width).
        """
        return self._rows.weighted_parts(parts, width)

    def pair_sums(self, x: Array | Sequence[Array]) -> Array:
        """Return sum over rows of w * x by (PSU, domain) pair: shape (pairs, V)."""
        return self.to_pairs(self.bucket_sums(x))

    def to_pairs(self, buckets: Array) -> Array:
        """Return bucket sums (buckets, V) added up by (PSU, domain) pair."""
        return np.asarray(self._to_pair @ buckets)

    def bucket_domains(self, buckets: Array) -> Array:
        """Return bucket sums (buckets, V) added up by domain: shape (D, V)."""
        return np.asarray(self._to_domain @ buckets)

    @cached_property
    def _all_weight(self) -> Array:
        """Pair sums of the weights (x = 1), reused for variables valid in every row."""
        return self.to_pairs(self.bucket_sums_of(lambda rows: [1.0], 1))

    @cached_property
    def _all_counts(self) -> Array:
        """Domain counts, sums of w and of w^2 over all rows, as (D, 3)."""
        w = self.design.weights

        def parts(rows: slice | Index) -> list[Any]:
            wr = w[rows]
            return [1.0, wr, wr * wr]

        return self.bucket_domains(self._rows.unweighted_parts(parts, 3))

    def valid_pair_sums(self, valid: Bool) -> Array:
        """Return pair sums of w over valid rows: shape (pairs, 1)."""
        if valid.all():
            return self._all_weight
        return self.to_pairs(self.bucket_sums_of(lambda rows: [valid[rows]], 1))

    def valid_counts(self, valid: Bool) -> Array:
        """Return per domain: valid rows, their sum of w and of w^2: shape (D, 3)."""
        if valid.all():
            return self._all_counts
        w = self.design.weights

        def parts(rows: slice | Index) -> list[Any]:
            ok, wr = valid[rows], w[rows]
            wv = np.where(ok, wr, 0.0)
            return [ok, wv, wv * wr]

        return self.bucket_domains(self._rows.unweighted_parts(parts, 3))

    def invalid_counts(self, col: DecodedColumn, n_reasons: int) -> tuple[Index, Array]:
        """Return counts per domain and reason code, and sums of w^2, of the non-valid rows.

        Costs one pass over the column plus work on the non-valid rows only: the valid rows'
        counts are the domain's rows minus these (see :meth:`domain_rows`).
        """
        nb = self.n_buckets
        cnt = np.zeros((nb + 1) * n_reasons, dtype=np.int64)
        w2 = np.zeros(nb + 1)
        for rows, codes in col.not_valid_rows():  # row tiles: bounded temporaries
            b = self.bucket[rows].astype(np.int64)
            key = b * n_reasons + codes.astype(np.int64)
            cnt += np.bincount(key, minlength=len(cnt))
            w = self.design.weights[rows]
            w2 += np.bincount(b, weights=w * w, minlength=nb + 1)
            del rows, codes, b, key, w  # freed before the next tile makes its own
        by_domain = self.bucket_domains(
            cnt[: nb * n_reasons].reshape(nb, n_reasons).astype(np.float64))
        w2 = w2[:nb]
        return np.rint(by_domain).astype(np.int64), self.bucket_domains(w2)

    @cached_property
    def domain_rows(self) -> Array:
        """Rows per domain and their sums of w^2 (Kish's weighting effect): shape (D, 2)."""
        w = self.design.weights

        def parts(rows: slice | Index) -> list[Any]:
            wr = w[rows]
            return [1.0, wr * wr]

        return self.bucket_domains(self._rows.unweighted_parts(parts, 2))

    def domain_totals(self, pair: Array) -> Array:
        """Return pair sums added up by domain: shape (D, V)."""
        return np.asarray(self._pair_to_domain @ pair)

    def _bucket_counts(self, x: Array | Sequence[Array]) -> Array:
        """Return unweighted sums of x by bucket: shape (buckets, V)."""
        cols = _columns(x)
        return self._rows.unweighted_parts(lambda rows: [c[rows] for c in cols], len(cols))

    def pair_counts(self, x: Array) -> Array:
        """Return unweighted sums of x by (PSU, domain) pair: shape (pairs, V)."""
        return self.to_pairs(self._bucket_counts(x))

    @cached_property
    def strata_cells(self) -> tuple[Index, GroupSum]:
        """Return the (stratum, domain) cell of every pair and the pair -> cell summation."""
        hd = self.design.psu_stratum[self.pair_psu] * self.n_domains + self.pair_domain
        size = self.design.n_strata * self.n_domains
        return hd.astype(np.int64), GroupSum(hd, np.arange(len(hd)), size)

    @cached_property
    def _ind(self) -> sparse.csr_matrix:
        """The domain x row membership matrix (replicate designs only)."""
        from scipy import sparse

        rows = np.arange(self.n_rows)
        pop, incell = rows[self.domains.inside], rows[self.domains.cell >= 0]
        entry_row = np.concatenate([pop, incell])
        entry_dom = np.concatenate([np.zeros(len(pop), np.int64),
                                    self.domains.cell[incell] + 1])
        return sparse.csr_matrix((np.ones(len(entry_row)), (entry_dom, entry_row)),
                                 shape=(self.n_domains, self.n_rows))

    def replicate_sums(self, x: Array) -> Array:
        """Return sums of replicate weight x x by (replicate, domain): shape (R, D, V)."""
        rep = self.design.replicate_weights
        assert rep is not None  # callers check uses_replicates
        x2 = x[:, None] if x.ndim == 1 else x
        out = np.empty((rep.shape[1], self.n_domains, x2.shape[1]))
        for v in range(x2.shape[1]):  # loop over value columns only
            out[:, :, v] = np.asarray(self._ind @ (rep * x2[:, v : v + 1])).T
        return out

    def reason_counts(self, col: DecodedColumn, n_reasons: int) -> Index:
        """Return row counts per non-valid reason code by domain: shape (D, n_reasons).

        The ``valid`` column (code 0) is left at 0: only the rows that are not valid are read.
        """
        return self.invalid_counts(col, n_reasons)[0]


def _buckets(psu: Codes, cell: Index, inside: Bool, nd: int, n_psu: int
             ) -> tuple[Index, Codes]:
    """Return the occupied bucket keys (sorted) and each row's bucket (outside: last+1).

    A row's key is ``psu * nd + cell + 1`` (PSUs 0..n_psu-1). When the key space is small
    the occupied keys are marked and looked up in row tiles (no temporary the size of the
    file); a sort serves otherwise. Buckets are int32 below 2**31 of them. Without by-cells
    and with every row inside, the buckets are the PSUs themselves and the PSU index is
    returned as the bucket column (shared, not copied).
    """
    n, size = len(psu), n_psu * nd
    everyone = bool(inside.all())

    def key(rows: slice) -> Index:
        return psu[rows].astype(np.int64) * nd + (cell[rows] + 1)  # no cell (-1) -> slot 0

    if size > 8 * max(n, 1):
        keys, ids = np.unique(key(slice(None))[inside], return_inverse=True)
        bucket = np.full(n, len(keys), dtype=code_type(len(keys) + 1))
        bucket[inside] = ids.ravel()
        return keys.astype(np.int64), bucket
    seen = np.zeros(size, dtype=bool)
    tiles = row_tiles(n)
    for tile in tiles:  # loop over row tiles, not rows
        k = key(tile)
        seen[k if everyone else k[inside[tile]]] = True
    keys = np.flatnonzero(seen).astype(np.int64)
    if nd == 1 and everyone and len(keys) == size:
        return keys, psu
    kind = code_type(len(keys) + 1)
    position = (np.cumsum(seen) - 1).astype(kind)
    bucket = np.empty(n, dtype=kind)
    for tile in tiles:
        b = position[key(tile)]
        if not everyone:
            b[~inside[tile]] = len(keys)
        bucket[tile] = b
    return keys, bucket


def _columns(x: Array | Sequence[Array]) -> list[Array]:
    """Return the value columns of a 1-D/2-D array or a sequence of 1-D arrays."""
    if isinstance(x, np.ndarray):
        return [x] if x.ndim == 1 else [x[:, j] for j in range(x.shape[1])]
    return list(x)


class GroupSum:
    """Adds rows of a block into groups: ``g @ block`` is ``out[target[k]] += block[source[k]]``.

    The small 0/1 matrices between buckets, (PSU, domain) pairs, strata and domains, applied
    without building a matrix.
    """

    def __init__(self, target: Index, source: Index, n_targets: int) -> None:
        self.target = np.asarray(target, dtype=np.int64)
        self.source = np.asarray(source, dtype=np.int64)
        #: (groups, rows of the blocks it applies to)
        self.shape = (n_targets, int(self.source.max()) + 1 if self.source.size else 0)

    def __matmul__(self, block: npt.ArrayLike) -> Array:
        """Return the group sums of the rows of a 1-D or 2-D *block*."""
        b = np.asarray(block, dtype=np.float64)
        n, picked = self.shape[0], b[self.source]
        if b.ndim == 1:
            return np.asarray(np.bincount(self.target, weights=picked, minlength=n),
                              dtype=np.float64)  # float64 already: for the type checker
        # bincount adds in row order, as np.add.at does (the same sums to the bit), several
        # times faster; one key per (group, column) cell
        width = int(np.prod(b.shape[1:]))
        key = (self.target[:, np.newaxis] * width + np.arange(width)).ravel()
        out = np.bincount(key, weights=picked.ravel(), minlength=n * width)
        return np.asarray(out, dtype=np.float64).reshape(n, *b.shape[1:])


class _RowSums:
    """Weighted sums of row values by bucket (a row's bucket ``n_buckets`` means: outside).

    Rows stored in bucket order (a file sorted by stratum and PSU, without by-cells) are
    summed segment by segment; otherwise a weighted count by bucket does it. Either way one
    pass over the rows per value column, in numpy alone.
    """

    def __init__(self, bucket: Codes, weights: Array, n_buckets: int, n_rows: int) -> None:
        tiles = row_tiles(len(bucket))
        everyone = all(bool((bucket[t] < n_buckets).all()) for t in tiles)
        self.rows: Index | None = None if everyone else np.flatnonzero(bucket < n_buckets)
        self.bucket = bucket if self.rows is None else bucket[self.rows]
        self.weights = np.asarray(weights if self.rows is None else weights[self.rows],
                                  dtype=np.float64)
        self.n_buckets = n_buckets
        in_order = n_rows > 0 and _ascending(self.bucket)
        # every bucket holds rows (they are the occupied keys), so no segment is empty
        # bucket numbers in the bucket column's own type: a mixed-type search would copy it
        numbers = np.arange(n_buckets, dtype=bucket.dtype)
        self.starts = np.searchsorted(self.bucket, numbers) if in_order else None

    def weighted(self, x: Array) -> Array:
        """Return sum of w * x by bucket: shape (buckets,)."""
        return self.weighted_parts(lambda rows: [x[rows]], 1)[:, 0]

    def weighted_parts(self, parts: Parts, width: int) -> Array:
        """Return sums of w * v by bucket for the *width* columns v that *parts* makes.

        Rows are taken in tiles (:func:`wstats.decoding.columns.row_tiles`): ``parts(rows)`` gets a
        tile's rows (a slice or row numbers into the full columns) and returns its value
        columns (or scalars, standing for a constant column), so the temporaries stay the
        size of a tile whatever the file's length.
        """
        return self._sum_parts(parts, width, weighted=True)

    def unweighted_parts(self, parts: Parts, width: int) -> Array:
        """Return sums of v by bucket, as :meth:`weighted_parts` without the weights."""
        return self._sum_parts(parts, width, weighted=False)

    def _sum_parts(self, parts: Parts, width: int, *, weighted: bool) -> Array:
        """Sum the columns *parts* makes by bucket, tile by tile, times w if *weighted*."""
        out = np.zeros((self.n_buckets, width))
        if self.n_buckets == 0:  # no row inside the population domain
            return out
        n = len(self.bucket)
        for tile in row_tiles(n):  # loop over row tiles, not rows
            begin, end = tile.start, tile.stop
            rows = slice(begin, end) if self.rows is None else self.rows[begin:end]
            w = self.weights[begin:end]
            bucket = self.bucket[begin:end]
            for j, part in enumerate(parts(rows)):
                values = np.asarray(part, dtype=np.float64)
                values = w * values if weighted else np.broadcast_to(values, w.shape)
                if self.starts is None:
                    out[:, j] += np.bincount(bucket, weights=values, minlength=self.n_buckets)
                    continue
                first, last = int(bucket[0]), int(bucket[-1])  # sorted: every bucket between
                local = self.starts[first : last + 1] - begin  # them starts inside the tile
                local[0] = 0  # ... except the first, which may have begun in the tile before
                out[first : last + 1, j] += np.add.reduceat(values, local)
        return out


def _ascending(a: Codes) -> bool:
    """Return whether *a* never decreases, checked in row tiles (no mask the size of *a*)."""
    for tile in row_tiles(len(a)):  # loop over row tiles, not rows
        part = a[tile.start : tile.stop + 1]  # one row of overlap links the tiles
        if not bool((part[1:] >= part[:-1]).all()):
            return False
    return True


