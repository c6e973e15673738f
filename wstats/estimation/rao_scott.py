"""Rao-Scott tests of independence in an r x c table of weighted shares (REFERENCES §14).

n = records in the table (unweighted), p_ij the weighted cell shares, p0_ij = p_i+ p_+j (the
independence fit), nu = (r-1)(c-1), Pearson X2 = n sum (p_ij - p0_ij)^2 / p0_ij.
The residual contrasts theta_ij = p_ij - p_i+ p_+j (i < r, j < c) have the Jacobian H,
evaluated at p0 (it depends only on the margins); P0 = (diag(p0) - p0 p0')/n is their
multinomial covariance at p0 and V the design covariance of the cell shares. The generalised
design effects are the eigenvalues of D = (H P0 H')^-1 (H V H'); delta_bar = tr(D)/nu and
a2 = tr(D^2)/(nu delta_bar^2) - 1 (their squared coefficient of variation).

- first order: F1 = X2/(nu delta_bar) on (nu, d nu);
- second order (Satterthwaite): the same F on (nu/(1+a2), d nu/(1+a2)).

Rao & Scott (1981), JASA 76:221-230; (1984), Ann Stat 12:46-60; Thomas & Rao (1987), JASA
82:630-636 (from memory). The design effects are evaluated at the independence fit p0 (the
hypothesis), not at the observed shares. A row or column whose margin is 0 is dropped (and
nu reduced).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from wstats.estimation.contrasts import f_sf

if TYPE_CHECKING:
    import numpy.typing as npt

    Array = npt.NDArray[np.float64]

__all__ = ["RaoScott", "independence_jacobian", "rao_scott"]


@dataclass(frozen=True)
class RaoScott:
    """The Rao-Scott test of one r x c table.

    Attributes
    ----------
    pearson : Pearson X2 of the weighted shares scaled to the n records.
    first_f : first-order corrected F = X2/(nu delta_bar), on (nu, d nu).
    f, df1, df2, p : the second-order corrected F, its degrees of freedom and p-value.
    mean_deff : delta_bar, the mean generalised design effect.
    deff_cv2 : a2, the squared coefficient of variation of the design effects.
    nu : (r-1)(c-1) after dropping zero margins.
    """

    pearson: float
    first_f: float
    first_p: float
    f: float
    df1: float
    df2: float
    p: float
    mean_deff: float
    deff_cv2: float
    nu: int


def independence_jacobian(row: Array, col: Array) -> Array:
    """Return H, d theta_ij / d p_kl for theta_ij = p_ij - p_i+ p_+j, i < r, j < c.

    Rows ordered (i, j) row-major over i < r, j < c; columns over all r x c cells row-major.
    """
    r, c = len(row), len(col)
    ii, jj = np.meshgrid(np.arange(r - 1), np.arange(c - 1), indexing="ij")
    kk, ll = np.meshgrid(np.arange(r), np.arange(c), indexing="ij")
    i, j = ii.ravel()[:, None], jj.ravel()[:, None]
    k, m = kk.ravel()[None, :], ll.ravel()[None, :]
    same_row, same_col = (i == k), (j == m)
    h = (same_row & same_col).astype(np.float64)
    return np.asarray(h - same_row * col[j] - same_col * row[i])


def rao_scott(shares: npt.ArrayLike, cov: npt.ArrayLike, n: float, df: float) -> RaoScott:
    """Return the Rao-Scott test of independence of an r x c table.

    Parameters
    ----------
    shares : (r, c) weighted cell shares (summing to 1).
    cov : (r c, r c) design covariance of the cell shares, cells row-major.
    n : records in the table.
    df : design degrees of freedom d.
    """
    p = np.asarray(shares, dtype=np.float64)
    v = np.asarray(cov, dtype=np.float64)
    keep_r, keep_c = p.sum(axis=1) > 0, p.sum(axis=0) > 0
    cells = np.outer(keep_r, keep_c).ravel()
    p = p[keep_r][:, keep_c]
    v = v[np.ix_(cells, cells)]
    r, c = p.shape
    nu = (r - 1) * (c - 1)
    if nu < 1 or not n > 0 or not (np.isfinite(p).all() and np.isfinite(v).all()):
        nan = float("nan")
        return RaoScott(nan, nan, nan, nan, nan, nan, nan, nan, nan, max(nu, 0))
    row, col = p.sum(axis=1), p.sum(axis=0)
    p0 = np.outer(row, col).ravel()
    pearson = float(n * np.sum((p.ravel() - p0) ** 2 / p0))
    h = independence_jacobian(row, col)
    p0_cov = (np.diag(p0) - np.outer(p0, p0)) / n
    deff = np.linalg.solve(h @ p0_cov @ h.T, h @ v @ h.T)
    return _corrected(pearson, deff, nu, df)


def _corrected(pearson: float, deff: Array, nu: int, df: float) -> RaoScott:
    """Return the first- and second-order corrections of X2 from the design-effect matrix."""
    mean = float(np.trace(deff)) / nu
    cv2 = float(np.trace(deff @ deff)) / (nu * mean * mean) - 1.0 if mean > 0 else np.nan
    first = pearson / (nu * mean) if mean > 0 else float("nan")  # no design variance: no test
    first_p = float(f_sf(first, nu, df * nu))
    df1, df2 = nu / (1.0 + cv2), df * nu / (1.0 + cv2)
    return RaoScott(pearson, first, first_p, first, df1, df2, float(f_sf(first, df1, df2)),
                    mean, cv2, nu)
