"""Pooling several survey files (periods) into one design.

Rules (REFERENCES §16; NCHS tutorial on combining survey cycles; Botman & Jack 1995):

- **Weights** are rescaled per file by a factor lambda_k, the factors summing to 1:
  ``equal`` (1/K each, the NCHS rule for K equal cycles: totals are totals of an average
  period, the population at the midpoint of the pooled span), ``rows`` (n_k / n: files weigh
  by their size) or explicit factors (e.g. an agency's own multi-year factors). A pooled mean
  is then sum_k lambda_k N_k ybar_k / sum_k lambda_k N_k (the stacked-file estimator), not
  the simple average of the period means.
- **Strata** are distinct per file: the stratum key is (file, stratum) and, PSUs being
  nested in strata, the PSU key is (file, stratum, PSU). Independent periods then contribute
  independent variance terms, so the covariance of two periods' estimates is 0 and the
  degrees of freedom add up. ``shared_psus`` keeps the codes shared across files (the same
  codes are the same clusters), so the between-period covariance is estimated.
- **Replicate weights**: each file's replicates are one block; a record outside the block
  keeps its full-sample weight in that block's replicates, and each block has its own
  coefficient: v = sum_k scale_k sum_r f_kr (theta_kr - theta)^2.

Everything here is arrays in, arrays out; binding calls it (:mod:`wstats.design.binding`).
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.stacking import FILE_COLUMN, NOT_IN_FILE, PeriodFiles
from wstats.errors import DesignError, WstatsWarning

if TYPE_CHECKING:
    import numpy.typing as npt

    Array = npt.NDArray[np.float64]
    Codes = npt.NDArray[np.signedinteger[Any]]
    Index = npt.NDArray[np.int64]

__all__ = [
    "FILE_COLUMN",
    "NOT_IN_FILE",
    "PERIOD_DF_RULES",
    "POOL_RULES",
    "PeriodFiles",
    "change_df",
    "check_pool_rule",
    "file_df",
    "file_strata",
    "parse_pool",
    "pool_factors",
    "pool_summary",
    "replicate_blocks",
    "satterthwaite_df",
    "stratum_breaks",
    "warn_weight_sums",
]

POOL_RULES = ("equal", "rows")
_SUM_TOL = 1e-9  # explicit factors must sum to 1 within this
_WEIGHT_SPREAD = 2.0  # weight sums of two files differing more than this get a warning


def parse_pool(text: str) -> str | tuple[float, ...]:
    """Return a pool rule from its command-line form: ``equal``, ``rows`` or ``f1,f2,...``.

    Examples
    --------
    >>> parse_pool("0.5,0.25,0.25")
    (0.5, 0.25, 0.25)
    """
    if text in POOL_RULES:
        return text
    try:
        return tuple(float(x) for x in text.split(","))
    except ValueError:
        raise DesignError(
            f"pool rule '{text}' is not equal, rows or comma-separated factors (e.g. 0.5,0.5)"
        ) from None


def check_pool_rule(rule: str | Sequence[float]) -> None:
    """Raise DesignError unless *rule* is ``equal``, ``rows`` or factors > 0 summing to 1."""
    if isinstance(rule, str):
        if rule not in POOL_RULES:
            raise DesignError(f"pool rule '{rule}' is not one of equal, rows, or a list of "
                              "factors summing to 1")
        return
    f = np.asarray(rule, dtype=np.float64)
    if f.ndim != 1 or not len(f) or not (np.isfinite(f).all() and (f > 0).all()):
        raise DesignError("pool factors must be positive numbers, one per file")
    if abs(float(f.sum()) - 1.0) > _SUM_TOL:
        raise DesignError(f"pool factors {', '.join(f'{x:g}' for x in f)} sum to "
                          f"{float(f.sum()):g}, not 1; rescale them (e.g. 0.5,0.25,0.25)")


def pool_factors(rule: str | Sequence[float], rows: Sequence[int]) -> Array:
    """Return the weight factor lambda_k of each file (they sum to 1).

    Examples
    --------
    >>> pool_factors("rows", [100, 300]).tolist()
    [0.25, 0.75]
    """
    check_pool_rule(rule)
    k = len(rows)
    if isinstance(rule, str):
        if rule == "equal":
            return np.full(k, 1.0 / k)
        n = np.asarray(rows, dtype=np.float64)
        return np.asarray(n / n.sum(), dtype=np.float64)
    f = np.asarray(rule, dtype=np.float64)
    if len(f) != k:
        raise DesignError(f"{len(f)} pool factors were given for {k} files; give one per file "
                          "in file order")
    return f


def file_strata(stratum: Codes, labels: Sequence[str], file_index: Codes,
                stems: Sequence[str]) -> tuple[Codes, list[str]]:
    """Return stratum codes keyed by (file, stratum) and their labels ``stem:label``.

    Codes are numbered file by file, then stratum by stratum, and only pairs that hold rows
    get one (a file without some stratum code adds no empty stratum).
    """
    h = max(len(labels), 1)
    key = file_index.astype(np.int64) * h + stratum.astype(np.int64)
    uniq, inverse = np.unique(key, return_inverse=True)
    codes = inverse.astype(stratum.dtype if stratum.dtype == np.int64 else np.int32)
    names = [f"{stems[int(u // h)]}:{labels[int(u % h)]}" for u in uniq.tolist()]
    return codes.ravel(), names


def replicate_blocks(rep: Array, weights: Array, file_index: Codes, coefficients: Array,
                     n_files: int) -> tuple[Array, Array]:
    """Return the block replicate matrix (n, K R) and the coefficient of each column.

    Block k holds file k's replicate weights on its rows and the full-sample weight on every
    other row; *coefficients* (K, R) are scale_k * factor_kr, so that the variance is
    sum over all columns of coefficient * (theta_r - theta)^2.
    """
    n, r = rep.shape
    out = np.empty((n, n_files * r))
    for k in range(n_files):  # loop over files, not rows
        inside = (file_index == k)[:, None]
        out[:, k * r : (k + 1) * r] = np.where(inside, rep, weights[:, None])
    return out, np.asarray(coefficients, dtype=np.float64).ravel()


#: how the df of a change between two independent periods is found (``change_df``)
PERIOD_DF_RULES = ("sum", "satterthwaite")


def stratum_breaks(psu: Codes, psu_stratum: Index, file_index: Codes
                   ) -> npt.NDArray[np.bool_]:
    """Return, per stratum keyed by file, whether it begins another file (collapsing stops).

    Examples
    --------
    >>> stratum_breaks(np.array([0, 1, 2]), np.array([0, 1, 2]), np.array([0, 0, 1])).tolist()
    [False, False, True]
    """
    psu_file = np.zeros(len(psu_stratum), dtype=np.int64)
    psu_file[psu] = file_index
    stratum_file = np.zeros(int(psu_stratum.max(initial=-1)) + 1, dtype=np.int64)
    stratum_file[psu_stratum] = psu_file
    return np.asarray(np.r_[False, np.diff(stratum_file) != 0], dtype=bool)


def file_df(psu: Codes, psu_stratum: Index, file_index: Codes, n_files: int) -> Array:
    """Return each file's design df (its PSUs minus its strata) when strata are per file.

    Examples
    --------
    >>> file_df(np.array([0, 1, 2, 3]), np.array([0, 0, 1, 1]), np.array([0, 0, 1, 1]), 2)
    array([1., 1.])
    """
    psu_file = np.zeros(len(psu_stratum), dtype=np.int64)
    psu_file[psu] = file_index  # every row of a PSU is in one file (strata keyed by file)
    n_psu = np.bincount(psu_file, minlength=n_files)
    stratum_file = np.zeros(int(psu_stratum.max(initial=-1)) + 1, dtype=np.int64)
    stratum_file[psu_stratum] = psu_file
    n_strata = np.bincount(stratum_file, minlength=n_files)
    return np.asarray(n_psu - n_strata, dtype=np.float64)


def change_df(variances: Sequence[float], dfs: Sequence[float], rule: str = "sum") -> float:
    """Return the df of a change between independent periods: ``sum`` or ``satterthwaite``.

    ``sum`` (default) is d1 + d2 (the pooled design's df); ``satterthwaite`` is
    (v1+v2)^2/(v1^2/d1 + v2^2/d2) (REFERENCES §16).

    Examples
    --------
    >>> change_df([1.0, 1.0], [10.0, 20.0])
    30.0
    """
    if rule not in PERIOD_DF_RULES:
        raise DesignError(f"period df rule '{rule}' is not one of {', '.join(PERIOD_DF_RULES)}")
    return float(np.sum(dfs)) if rule == "sum" else satterthwaite_df(variances, dfs)


def satterthwaite_df(variances: Sequence[float], dfs: Sequence[float]) -> float:
    """Return Satterthwaite's df of a sum of independent variance terms.

    (sum v_k)^2 / sum (v_k^2 / d_k) (REFERENCES §16; Satterthwaite 1946). NaN when every
    variance is 0.

    Examples
    --------
    >>> round(satterthwaite_df([1.0, 1.0], [10.0, 10.0]), 6)
    20.0
    """
    v = np.asarray(variances, dtype=np.float64)
    d = np.asarray(dfs, dtype=np.float64)
    den = float(np.sum(v * v / d))
    return float(v.sum() ** 2 / den) if den > 0 else float("nan")


def warn_weight_sums(weights: Array, file_index: Codes, files: PeriodFiles) -> Array:
    """Return each file's sum of (unscaled) weights; warn when two differ more than 2-fold."""
    sums = np.bincount(file_index.astype(np.int64), weights=weights, minlength=files.n_files)
    lo, hi = int(np.argmin(sums)), int(np.argmax(sums))
    if sums[lo] > 0 and sums[hi] / sums[lo] > _WEIGHT_SPREAD:
        warnings.warn(
            f"weights of {files.names[hi]} sum to {sums[hi]:.6g} but those of "
            f"{files.names[lo]} to {sums[lo]:.6g} (more than {_WEIGHT_SPREAD:g}-fold); check "
            "that every file's weights estimate the same population",
            WstatsWarning, stacklevel=2)
    return np.asarray(sums, dtype=np.float64)


def pool_summary(files: PeriodFiles, rule: str | Sequence[float], factors: Array,
                 shared_psus: bool, dfs: Array | None = None) -> dict[str, Any]:
    """Return the JSON-ready description of the pooling used (provenance, methods text).

    *dfs*: each file's design df (strata per file, linearization), shown as ``df_per_file``.
    """
    extra = {} if dfs is None else {
        "df_per_file": {s: float(d) for s, d in zip(files.stems, dfs, strict=True)}}
    return {**extra,
        "files": list(files.paths),
        "periods": list(files.labels),
        "rule": rule if isinstance(rule, str) else "factors",
        "factors": {s: float(f) for s, f in zip(files.stems, factors, strict=True)},
        "totals": "per period (average of the pooled periods)",
        "strata": "shared across files" if shared_psus else "distinct per file",
    }
