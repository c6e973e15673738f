"""Contrasts of estimates that share one covariance: differences, Wald F, trends, p-values.

Everything takes a :class:`~wstats.estimation.covariance.Covariance` (estimates theta and
their full design covariance V), so no contrast assumes independent groups (REFERENCES §13).

- Difference D = theta_b - theta_a, SE = sqrt(c'Vc) with c = e_b - e_a, t = D/SE on the
  design df; two-sided p from Student's t.
- Equality of G estimates: C the (G-1) x G differences from the first, q = G - 1,
  X2 = (C theta)'(C V C')^-1 (C theta), and the small-df adjusted F = (d - q + 1)/(d q) X2 on
  (q, d - q + 1), i.e. df2 = d - G + 2 (Fellegi 1980, JASA 75:261-268; Korn & Graubard 1990,
  Am Stat 44:270-276).
- Trend: orthogonal polynomial contrasts of the ordered levels' scores; unequal spacing is
  kept by orthogonalising the actual scores. The linear contrast is scaled to the least-squares
  slope of the estimates on the score (per unit of score); the quadratic one to the least-
  squares coefficient of the squared score made orthogonal to 1 and the score.
- Multiplicity: Holm (1979, Scand J Stat 6:65-70) step-down and Benjamini & Hochberg (1995,
  JRSS B 57:289-300) step-up adjusted p-values.

Distribution functions come from the regularized incomplete beta of
:mod:`wstats.estimation.distributions` (numpy only): P(|T| > t) = I_{d/(d+t^2)}(d/2, 1/2);
P(F > f) = I_{d2/(d2+d1 f)}(d2/2, d1/2).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from wstats.errors import EstimationError, did_you_mean
from wstats.estimation.distributions import betainc

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.estimation.covariance import Covariance

    Array = npt.NDArray[np.float64]

__all__ = ["ADJUSTMENTS", "Contrast", "WaldTest", "adjust_p", "contrast", "differences",
           "f_sf", "t_two_sided", "trend_coefficients", "wald_equal"]

#: multiplicity adjustments of p-values
ADJUSTMENTS = ("none", "holm", "bh")


def t_two_sided(t: npt.ArrayLike, df: npt.ArrayLike) -> Array:
    """Return P(|T| >= |t|) for Student's T on *df* (inf: normal); NaN where t is NaN."""
    tt = np.abs(np.asarray(t, dtype=np.float64))
    d = np.broadcast_to(np.asarray(df, dtype=np.float64), tt.shape)
    out = np.full(tt.shape, np.nan)
    big = np.isfinite(tt) & np.isfinite(d) & (d > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        x = d[big] / (d[big] + tt[big] ** 2)
    out[big] = betainc(d[big] / 2.0, 0.5, x)
    normal = np.isfinite(tt) & np.isposinf(d)
    if normal.any():  # infinite df: the normal tail, 2 P(Z > |t|) = erfc(|t|/sqrt 2)
        from math import erfc, sqrt

        out[normal] = [erfc(v / sqrt(2.0)) for v in tt[normal].tolist()]
    out[np.isposinf(tt) & (d > 0)] = 0.0
    return out


def f_sf(f: npt.ArrayLike, d1: npt.ArrayLike, d2: npt.ArrayLike) -> Array:
    """Return P(F >= f) for F on (d1, d2) degrees of freedom; NaN where undefined."""
    ff = np.asarray(f, dtype=np.float64)
    a = np.broadcast_to(np.asarray(d1, dtype=np.float64), ff.shape)
    b = np.broadcast_to(np.asarray(d2, dtype=np.float64), ff.shape)
    out = np.full(ff.shape, np.nan)
    ok = np.isfinite(ff) & (ff >= 0) & (a > 0) & (b > 0) & np.isfinite(a) & np.isfinite(b)
    out[ok] = betainc(b[ok] / 2.0, a[ok] / 2.0, b[ok] / (b[ok] + a[ok] * ff[ok]))
    out[np.isposinf(ff) & (a > 0) & (b > 0)] = 0.0
    return out


@dataclass(frozen=True)
class Contrast:
    """Linear combinations L = C theta of estimates with their design-based tests.

    Attributes
    ----------
    estimate, se : (M,) L and sqrt(c'Vc).
    t, p : (M,) L/SE and the two-sided p on ``df`` (NaN when SE is 0 or NaN).
    df : design degrees of freedom.
    """

    estimate: Array
    se: Array
    t: Array
    p: Array
    df: float


def contrast(cov: Covariance, c: npt.ArrayLike) -> Contrast:
    """Return the contrasts C theta (C: (M, K)) with SE, t and two-sided p."""
    cm = np.atleast_2d(np.asarray(c, dtype=np.float64))
    est, se = cov.combine(cm)
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(se > 0, est / se, np.nan)
    return Contrast(est, se, t, t_two_sided(t, cov.df), cov.df)


def differences(cov: Covariance, first: npt.ArrayLike, second: npt.ArrayLike) -> Contrast:
    """Return theta[second] - theta[first] for paired index arrays, with SE, t and p."""
    a = np.asarray(first, dtype=np.int64)
    b = np.asarray(second, dtype=np.int64)
    c = np.zeros((len(a), len(cov.estimate)))
    rows = np.arange(len(a))
    c[rows, b] += 1.0
    c[rows, a] -= 1.0
    return contrast(cov, c)


@dataclass(frozen=True)
class WaldTest:
    """A design-based Wald test that q contrasts are all 0.

    Attributes
    ----------
    chisq : X2 = (C theta)'(C V C')^-1 (C theta).
    f : the adjusted F = (d - q + 1)/(d q) X2 (NaN when d - q + 1 <= 0).
    df1, df2 : q and d - q + 1.
    p : P(F(df1, df2) >= f).
    """

    chisq: float
    f: float
    df1: float
    df2: float
    p: float


def wald_equal(cov: Covariance) -> WaldTest:
    """Return the adjusted Wald F that every estimate of *cov* is equal (G >= 2).

    Estimates that could not be made (NaN: an empty group) are left out and q reduced.
    """
    made = np.flatnonzero(np.isfinite(cov.estimate))
    if len(made) < len(cov.estimate):
        cov = cov.subset(made)
    g = len(cov.estimate)
    if g < 2:
        return WaldTest(np.nan, np.nan, float(max(g - 1, 0)), np.nan, np.nan)
    c = np.hstack([-np.ones((g - 1, 1)), np.eye(g - 1)])
    return wald_test(cov, c)


def wald_test(cov: Covariance, c: Array) -> WaldTest:
    """Return the adjusted Wald F that the contrasts C theta are all 0 (C of full row rank)."""
    q, d = float(c.shape[0]), float(cov.df)
    theta = c @ cov.estimate
    vc = c @ cov.matrix @ c.T
    if not (np.isfinite(theta).all() and np.isfinite(vc).all()):
        return WaldTest(np.nan, np.nan, q, d - q + 1.0, np.nan)
    x2 = float(theta @ np.linalg.lstsq(vc, theta, rcond=None)[0])
    df2 = d - q + 1.0
    f = (df2 / (d * q)) * x2 if df2 > 0 else np.nan
    return WaldTest(x2, f, q, df2, float(f_sf(f, q, df2)))


def trend_coefficients(scores: npt.ArrayLike) -> tuple[Array, Array | None]:
    """Return the linear and (4 or more levels) quadratic contrast coefficients of *scores*.

    Orthogonal polynomials of the actual scores (so unequal spacing is kept); the linear one
    gives the least-squares slope, the quadratic one the coefficient of the squared score
    orthogonalised against 1 and the score. Equally spaced scores give coefficients
    proportional to the standard tables (e.g. -3, -1, 1, 3 and 1, -1, -1, 1).
    """
    x = np.asarray(scores, dtype=np.float64)
    if len(x) < 2 or len(np.unique(x)) != len(x):
        raise EstimationError("a trend needs at least 2 ordered levels with distinct scores")
    xc = x - x.mean()
    linear = xc / float(xc @ xc)
    if len(x) < 4:
        return linear, None
    basis = np.column_stack([np.ones_like(x), xc])
    sq = xc * xc
    resid = sq - basis @ np.linalg.lstsq(basis, sq, rcond=None)[0]
    return linear, resid / float(resid @ resid)


def adjust_p(p: npt.ArrayLike, method: str) -> Array:
    """Return multiplicity-adjusted p-values (``holm``, ``bh`` or ``none``); NaN stays NaN.

    The adjustment runs over the non-NaN p-values given together (one family).
    """
    if method not in ADJUSTMENTS:
        raise EstimationError(
            f"p-value adjustment '{method}' is not one of {', '.join(ADJUSTMENTS)}"
            f"{did_you_mean(method, ADJUSTMENTS)}")
    pv = np.asarray(p, dtype=np.float64)
    out = pv.copy()
    ok = np.flatnonzero(np.isfinite(pv))
    m = len(ok)
    if method == "none" or m == 0:
        return out
    order = ok[np.argsort(pv[ok], kind="stable")]
    ranked = pv[order]
    if method == "holm":
        adj = np.maximum.accumulate((m - np.arange(m)) * ranked)
    else:
        adj = np.minimum.accumulate((m / np.arange(m, 0, -1) * ranked[::-1]))[::-1]
    out[order] = np.minimum(adj, 1.0)
    return out
