"""Estimates from summed partitions: means, totals, proportions and ratios without the rows.

The sums of :mod:`wstats.estimation.partition_sums`, added over every partition, are grouped
by (file, stratum, PSU, domain key). Each group becomes one row of a small synthetic design
(weight 1, its PSU, its domain), so the in-memory engine's own machinery (WeightedSums,
linearized_variance, the Piece assembly) gives the estimates: a weighted sum over the rows
of a group is the group's sum. The formulas are those of :mod:`wstats.estimation.statistics`
and :mod:`wstats.estimation.many_variables`; only the order of the additions differs, so
results agree to rounding (tests hold them to 1e-10).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.columns import DecodedColumn
from wstats.decoding.reasons import Reasons
from wstats.estimation.domain_setup import cross, levels_of
from wstats.estimation.domains import Domains
from wstats.estimation.levels import level_index
from wstats.estimation.partition_sums import KEYS, PartSums, by_key
from wstats.estimation.statistics import Context, Piece, _Moments, _piece
from wstats.estimation.sums import WeightedSums
from wstats.estimation.variance import linearized_variance

if TYPE_CHECKING:
    import numpy.typing as npt
    import pandas as pd

    from wstats.design.bound import BoundDesign
    from wstats.design.declared import Design

    Array = npt.NDArray[np.float64]
    Index = npt.NDArray[np.int64]

__all__ = ["Summed", "pieces_from_sums"]


@dataclass(frozen=True, eq=False)
class Summed:
    """The synthetic design of the summed groups and what every statistic shares.

    Attributes
    ----------
    sums : weighted sums over the groups (weight 1), domains as the in-memory engine has them.
    lam : each group's pool factor (1 for one file).
    by_levels : per by-variable, its (values, display values).
    vocabulary : the reasons met, core ones first.
    replicates : for replicate designs: (R, coefficients per block column, files, file of
        each replicate-sum row, domain membership of each replicate-sum row).
    """

    sums: WeightedSums
    lam: Array
    by_levels: list[tuple[list[Any], list[Any]]]
    vocabulary: Reasons
    frame: pd.DataFrame
    level: float


def domains_of(frame: pd.DataFrame, by: Sequence[str], labels: dict[str, dict[float, str]],
               text: dict[str, bool]) -> tuple[Domains, list[tuple[list[Any], list[Any]]]]:
    """Return the domains of the groups of *frame* and the by-variables' levels."""
    inside = frame["_in"].to_numpy(dtype=bool)
    parts = [levels_of(_column(name, frame[by_key(j)].to_numpy(), labels.get(name, {}),
                               text.get(name, False))) for j, name in enumerate(by)]
    levels = [lv for _, lv in parts]
    return cross(inside, [c for c, _ in parts], levels, by), levels


def _column(name: str, values: npt.NDArray[Any], labels: dict[float, str], text: bool
            ) -> DecodedColumn:
    """Return a column of group key values (NaN/None where no value) for the level helpers."""
    vocab = Reasons()
    if text:
        blank = np.array([v is None or (isinstance(v, float) and np.isnan(v)) for v in values],
                         dtype=bool)
        vals = np.where(blank, "", values).astype(object)
        return DecodedColumn.of_codes(name, vals, np.where(blank, 5, 0).astype(np.int8), vocab,
                                      kind="text")
    vals = np.asarray(values, dtype=np.float64)
    missing = np.full(int(np.isnan(vals).sum()), 5, dtype=np.int8)
    return DecodedColumn.of_codes(name, vals, missing, vocab, kind="categorical",
                                  value_labels=labels)


def moments(s: Summed, j: int | str) -> _Moments:
    """Return n, weighted n, Kish deff_w, df and reason counts of variable (or ratio) *j*."""
    f, ws = s.frame, s.sums
    cols = [f[f"n{j}"].to_numpy(float), f[f"w{j}"].to_numpy(float) * s.lam,
            f[f"s{j}"].to_numpy(float) * s.lam * s.lam]
    tot = ws.bucket_domains(ws.bucket_sums(cols))
    n, wn, w2 = tot[:, 0], tot[:, 1], tot[:, 2]
    with np.errstate(divide="ignore", invalid="ignore"):
        kish = np.where(wn > 0, n * w2 / (wn * wn), np.nan)
    names = s.vocabulary.names
    counts = np.zeros((ws.n_domains, len(names)), dtype=np.int64)
    for code, reason in enumerate(names):  # loop over reasons only
        key = f"r{j}:{reason}"
        if key in f.columns:
            col = np.nan_to_num(f[key].to_numpy(float))
            counts[:, code] = np.rint(ws.bucket_domains(ws.bucket_sums([col]))[:, 0])
    return _Moments(n, wn, kish, np.full(len(n), ws.design.df), counts)


def mean_or_total(s: Summed, name: str, j: int, stat: str,
                  replicate: Array | None) -> Piece:
    """Return the Piece of a domain mean or total from the summed groups."""
    f, ws = s.frame, s.sums
    y = f[f"y{j}"].to_numpy(float) * s.lam
    w = f[f"w{j}"].to_numpy(float) * s.lam
    q = f[f"q{j}"].to_numpy(float) * s.lam
    buckets = ws.bucket_sums([y, w, q])
    pair, tot = ws.to_pairs(buckets), ws.bucket_domains(buckets)
    m = moments(s, j)
    wn = tot[:, 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        mean = tot[:, 0] / wn
        c = mean[0] if np.isfinite(mean[0]) else 0.0
        ss = np.maximum(tot[:, 2] - 2 * c * tot[:, 0] + c * c * wn - wn * (mean - c) ** 2, 0.0)
        s2 = m.n / (m.n - 1.0) * ss / wn
        z = ((pair[:, 0] - mean[ws.pair_domain] * pair[:, 1]) / wn[ws.pair_domain]
             if stat == "mean" else pair[:, 0])
    est = mean if stat == "mean" else tot[:, 0]
    if replicate is not None:
        var = replicate
    else:
        var = linearized_variance(np.where(np.isfinite(z), z, 0.0)[:, None], ws)[:, 0]
    ctx = Context(ws, {}, s.vocabulary, s.level)
    if stat == "mean":
        return _piece(name, stat, ctx, m, est, np.where(np.isfinite(est), var, np.nan),
                      s2 / m.n)
    return _piece(name, stat, ctx, m, est, var, m.weighted_n**2 * s2 / m.n)


def ratio(s: Summed, name: str, key: str, replicate: Array | None) -> Piece:
    """Return the Piece of a domain ratio Y/X over rows where both are valid.

    As :class:`wstats.estimation.statistics.Ratio`: linearized totals (y - R x)/X, and the
    SRS variance of e = y - R_d x from sum w y^2, w x y and w x^2 of the domain.
    """
    f, ws = s.frame, s.sums
    cols = [f[f"{c}{key}"].to_numpy(float) * s.lam for c in ("y", "x", "yy", "xy", "xx")]
    buckets = ws.bucket_sums(cols)
    pair, tot = ws.to_pairs(buckets), ws.bucket_domains(buckets)
    m = moments(s, key)
    with np.errstate(divide="ignore", invalid="ignore"):
        est = tot[:, 0] / tot[:, 1]
        z = (pair[:, 0] - est[ws.pair_domain] * pair[:, 1]) / tot[ws.pair_domain, 1]
        q = tot[:, 2] - 2 * est * tot[:, 3] + est * est * tot[:, 4]
        s2 = m.n / (m.n - 1.0) * np.maximum(q, 0.0) / m.weighted_n
        xbar = tot[:, 1] / m.weighted_n
        v_srs = s2 / (m.n * xbar * xbar)
    if replicate is None:
        var = linearized_variance(np.where(np.isfinite(z), z, 0.0)[:, None], ws)[:, 0]
        var = np.where(np.isfinite(est), var, np.nan)
    else:
        var = replicate
    return _piece(name, "ratio", Context(ws, {}, s.vocabulary, s.level), m, est, var, v_srs)


def group_rows(s: Summed, levels: pd.DataFrame) -> npt.NDArray[np.int64]:
    """Return, for each row of a (group, value) sums frame, its group's row in ``s.frame``."""
    keys = [c for c in s.frame.columns if c in KEYS or (c[0] == "b" and c[1:].isdigit())]
    index = s.frame[keys].reset_index().rename(columns={"index": "_row"})
    hit = levels[keys].merge(index, on=keys, how="left")  # a left merge keeps the order
    return hit["_row"].to_numpy(np.int64)


def level_matrix(s: Summed, levels: pd.DataFrame, values: list[Any], col: DecodedColumn
                 ) -> Array:
    """Return sums of w by group row and level (groups x levels) from the level sums."""
    row = group_rows(s, levels)
    vals = levels["value"].to_numpy()
    probe = col.replace(values=np.asarray(vals, dtype=col.values.dtype),
                        missing_codes=np.zeros(0 if col.numeric else len(vals), np.int8))
    lv = level_index(probe, values, np.ones(len(vals), dtype=bool))
    out = np.zeros((len(s.frame), len(values)))
    np.add.at(out, (row, lv), levels["w"].to_numpy(float))
    return out * s.lam[:, None]


def proportion(s: Summed, name: str, j: int, ci: str, by_level: Array, values_labels:
               tuple[list[Any], list[str]], replicate: Array | None) -> Piece:
    """Return the Piece of the proportions of every level of a categorical variable."""
    from wstats.estimation.many_variables import proportion_piece

    ws = s.sums
    values, labels = values_labels
    nl = len(values)
    buckets = ws.bucket_sums([by_level[:, k] for k in range(nl)]) if nl else np.zeros(
        (ws.n_buckets, 0))
    valid_b = buckets.sum(axis=1, keepdims=True)
    pair_l, den_pair = ws.to_pairs(buckets), ws.to_pairs(valid_b)[:, 0]
    den = ws.bucket_domains(valid_b)[:, 0]
    m = moments(s, j)
    nd = ws.n_domains
    with np.errstate(divide="ignore", invalid="ignore"):
        est = ws.domain_totals(pair_l) / den[:, None] if nl else np.zeros((nd, 0))
        z = (pair_l - est[ws.pair_domain] * den_pair[:, None]) / den[ws.pair_domain, None]
    var = (replicate if replicate is not None
           else linearized_variance(np.where(np.isfinite(z), z, 0.0), ws))
    return proportion_piece(name, labels, est, var, m, ci)


def pieces_from_sums(total: PartSums, bound: BoundDesign, design: Design, lam: Array,
                     by: Sequence[str], level: float) -> Summed:
    """Return the Summed view of the added sums (domains built, vocabulary unified)."""
    vocab = Reasons()
    for reason in total.reasons:
        if reason not in vocab.names:
            vocab.add(reason)
    text = {n: k[1] for n, k in total.kinds.items()}
    domains, by_levels = domains_of(total.main, by, total.labels, text)
    return Summed(WeightedSums(bound, domains), lam, by_levels, vocab, total.main, level)
