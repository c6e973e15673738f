"""The design of summed groups, and replicate variances from replicate sums by domain.

The groups of :mod:`wstats.estimation.partition_sums` carry raw stratum and PSU values; here
they are coded as binding codes them (sorted values; strata keyed by file for pooled files
unless PSUs are shared; PSUs nested in strata; singleton strata treated), giving a
:class:`~wstats.design.bound.BoundDesign` whose rows are the groups (weight 1).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.design.binding import _psu_index
from wstats.design.bound import BoundDesign
from wstats.design.pooling import (
    PeriodFiles,
    file_df,
    file_strata,
    pool_factors,
    pool_summary,
    stratum_breaks,
)
from wstats.design.replicates import replicate_df, replicate_scale, replicate_variance
from wstats.design.singletons import treat_singletons
from wstats.errors import DesignError

if TYPE_CHECKING:
    import numpy.typing as npt
    import pandas as pd

    from wstats.design.declared import Design
    from wstats.estimation.domains import Domains

    Array = npt.NDArray[np.float64]
    Index = npt.NDArray[np.int64]

__all__ = ["domain_sums", "replicate_theta_variance", "summed_design"]


def _sorted_codes(values: npt.NDArray[Any]) -> tuple[npt.NDArray[np.int32], list[str]]:
    """Return codes 0..K-1 in sorted value order and the values as labels."""
    uniq, inverse = np.unique(values, return_inverse=True)
    labels = [str(int(v)) if isinstance(v, float) and float(v).is_integer() else str(v)
              for v in uniq.tolist()]
    return inverse.astype(np.int32).ravel(), labels


def summed_design(frame: pd.DataFrame, design: Design, files: PeriodFiles | None,
                  n_replicates: int) -> tuple[BoundDesign, Array]:
    """Return the BoundDesign of the groups and each group's pool factor."""
    file = frame["_file"].to_numpy(np.int64)
    lam, summary = _pool(frame, design, files)
    stratum, labels = _sorted_codes(frame["_s"].to_numpy())
    if files is not None and not design.shared_psus:
        stratum, labels = file_strata(stratum, labels, file, files.stems)
    psu_codes, _ = _sorted_codes(frame["_p"].to_numpy())
    psu, psu_stratum = _psu_index(stratum, psu_codes)
    n_h = np.bincount(psu_stratum, minlength=len(labels)).astype(np.int64)
    singles = int((n_h == 1).sum())
    f_h = np.zeros(len(n_h))
    if not n_replicates:
        breaks = (stratum_breaks(psu, psu_stratum, file)
                  if files is not None and not design.shared_psus else None)
        psu_stratum, n_h, f_h, labels = treat_singletons(design.singleton, psu_stratum, n_h, f_h,
                                                    labels, breaks)
    df = _df(design, files, n_replicates, float(len(psu_stratum)), len(n_h),
             float(frame["rows"].sum()))
    zero = int(frame["zero_w"].sum())
    if summary is not None and not (n_replicates or design.shared_psus):
        assert files is not None
        summary = pool_summary(files, design.pool, np.asarray(list(summary["factors"].values())),
                               False, file_df(psu, psu_stratum, file, files.n_files))
    bound = BoundDesign(design, None, np.ones(len(frame)), psu, psu_stratum, n_h, f_h,
                        tuple(labels), singles, None, (), 1.0, None, df, 0, zero, summary)
    return bound, lam


def _pool(frame: pd.DataFrame, design: Design, files: PeriodFiles | None
          ) -> tuple[Array, dict[str, Any] | None]:
    """Return each group's pool factor and the pooling summary (ones and None: one file)."""
    if files is None:
        return np.ones(len(frame)), None
    file = frame["_file"].to_numpy(np.int64)
    per_file = np.bincount(file, weights=frame["rows"].to_numpy(float),
                           minlength=files.n_files)
    factors = pool_factors(design.pool, [int(round(r)) for r in per_file])
    return factors[file], pool_summary(files, design.pool, factors, design.shared_psus)


def _df(design: Design, files: PeriodFiles | None, n_replicates: int, n_psu: float,
        n_strata: int, n_rows: float) -> float:
    """Return the design df as binding gives it (replicate df add up over pooled files)."""
    df = (n_psu if design.psu is not None else n_rows) - n_strata  # no PSU: rows are PSUs
    if not n_replicates:
        return df
    named = design.strata is not None or design.psu is not None
    k = 1 if files is None or named else files.n_files
    return k * replicate_df(design.replicate_method or "", n_replicates, df if named else None)


def domain_sums(values: Array, inside: npt.NDArray[np.bool_], cell: Index, n_cells: int
                ) -> Array:
    """Return sums of the rows of *values* (rows, ...) per domain: population, then cells."""
    out = np.zeros((n_cells + 1, *values.shape[1:]))
    out[0] = values[inside].sum(axis=0)
    hit = cell >= 0
    np.add.at(out, cell[hit] + 1, values[hit])
    return out


def replicate_theta_variance(
        num: Array, den: Array | None, theta: Array, full: tuple[Array, Array | None] | None,
        file: Index, design: Design, files: PeriodFiles | None, lam_file: Array) -> Array:
    """Return the replicate variance of *theta* (D, L) from replicate sums.

    *num*, *den* are (K files, R, D, L) and (K, R, D, 1) replicate sums (already times each
    file's pool factor); *full* the full-sample sums by file (K, D, L) and (K, D, 1), for the
    blocks of pooled files (a record outside a block keeps its full-sample weight).
    """
    n_files, n_rep = num.shape[0], num.shape[1]
    scale = replicate_scale(design.replicate_method or "", n_rep, design.fay_rho,
                            design.replicate_scale)
    factors = (np.asarray(design.replicate_factors, dtype=np.float64)
               if design.replicate_factors is not None else np.ones(n_rep))
    if files is None:
        top = num.sum(axis=0)
        bottom = None if den is None else den.sum(axis=0)
        with np.errstate(divide="ignore", invalid="ignore"):
            theta_r = top if bottom is None else top / bottom
        return replicate_variance(theta_r, theta, scale, factors, design.replicate_center)
    assert full is not None
    blocks = []
    for k in range(n_files):  # loop over files (blocks), not rows
        others = full[0].sum(axis=0) - full[0][k]
        top = num[k] + others[None]
        if den is None:
            blocks.append(top)
            continue
        assert full[1] is not None
        bottom = den[k] + (full[1].sum(axis=0) - full[1][k])[None]
        with np.errstate(divide="ignore", invalid="ignore"):
            blocks.append(top / bottom)
    theta_r = np.concatenate(blocks, axis=0)
    return replicate_variance(theta_r, theta, 1.0, np.tile(scale * factors, n_files), "full")


def check_summable(design: Design, statistics: Sequence[str]) -> None:
    """Refuse what the summed engine cannot compute exactly, naming what is missing."""
    refused = {
        "fpc": design.fpc is not None,
        "drop_incomplete": design.drop_incomplete,
        "domain_df='domain'": design.domain_df == "domain",
        "replicate_method 'jackknife-strata' without replicate_factors":
            design.replicate_method == "jackknife-strata" and design.replicate_factors is None,
        "a linearization design without a PSU column":
            design.replicates is None and design.psu is None,
    }
    for what, hit in refused.items():
        if hit:
            raise DesignError(f"the Dask engine does not support {what} yet; run without "
                              "--engine dask (in memory)")
    if "quantile" in statistics and design.replicates is not None:
        raise DesignError("quantiles of a replicate design are not available on the Dask "
                          "engine (each replicate's weight below the quantile needs a second "
                          "pass over the data); run them without --engine dask")


def cells_of(frame: pd.DataFrame, by: Sequence[str], by_levels: list[tuple[list[Any], Any]],
             domains: Domains, text: dict[str, bool], labels: dict[str, dict[float, str]]
             ) -> Index:
    """Return the by-cell of each row of a replicate-sum frame (-1 outside every cell)."""
    from wstats.estimation.from_sums import _column
    from wstats.estimation.levels import level_index
    from wstats.estimation.partition_sums import by_key

    inside = frame["_in"].to_numpy(dtype=bool)
    if not domains.n_cells:
        return np.full(len(frame), -1, dtype=np.int64)
    codes = []
    for j, name in enumerate(by):
        col = _column(name, frame[by_key(j)].to_numpy(), labels.get(name, {}),
                      text.get(name, False))
        codes.append(level_index(col, by_levels[j][0], col.valid))
    ok = inside & np.logical_and.reduce([c >= 0 for c in codes])
    safe = [np.where(ok, c, 0) for c in codes]
    cell = np.ravel_multi_index(safe, [len(v) for v, _ in by_levels])
    return np.where(ok, cell, -1).astype(np.int64)
