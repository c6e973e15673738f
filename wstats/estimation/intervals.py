"""Confidence intervals: t-based Wald, logit, Wilson, Clopper-Pearson and Korn-Graubard.

Every function is vectorised: arguments are numpy arrays (or scalars) broadcast against each
other, and the limits come back as float64 arrays of the broadcast shape (0-d for scalars).
Bad cells give NaN limits rather than errors; only a confidence level outside (0, 1) raises.

Conventions (each changes numbers; see ``docs/reliability.md``):

- ``df = inf`` means the normal quantile; ``df <= 0`` or NaN gives NaN limits.
- Wilson uses the t quantile with ``df`` as its critical value; with ``df = inf`` it is the
  classical Wilson score interval on the effective sample size.
- Korn-Graubard caps ``n* = p(1-p)/se^2`` at ``n`` but does *not* cap the df-adjusted
  ``n*_df``. Where the df factor is undefined (``n <= 1`` or ``df`` not positive) a proportion
  of exactly 0 or 1 keeps factor 1, anything else gets NaN.
- Proportion intervals are clipped to [0, 1]; a proportion of exactly 0 (1) gets the one-sided
  Clopper-Pearson interval [0, upper] ([lower, 1]) on the Korn-Graubard sample size.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from wstats.errors import EstimationError

if TYPE_CHECKING:
    from collections.abc import Callable

    import numpy.typing as npt

    Array = npt.NDArray[np.float64]
    ProportionInterval = Callable[
        [npt.ArrayLike, npt.ArrayLike, npt.ArrayLike, npt.ArrayLike, float], tuple[Array, Array]
    ]

__all__ = [
    "PROPORTION_INTERVALS",
    "clopper_pearson",
    "effective_n",
    "kg_effective_n",
    "korn_graubard_ci",
    "logit_ci",
    "t_quantile",
    "wald_t",
    "wilson_ci",
]


_TINY = 1e-4


def _alpha(level: float) -> float:
    """Return 1 - level after checking that the level lies strictly between 0 and 1."""
    lv = float(level)
    if not 0.0 < lv < 1.0:
        raise EstimationError(
            f"confidence level {level!r} is outside (0, 1); give it as a fraction such as 0.95"
        )
    return 1.0 - lv


def _f(x: npt.ArrayLike) -> Array:
    """Return *x* as a float64 array."""
    return np.asarray(x, dtype=np.float64)


def t_quantile(df: npt.ArrayLike, level: float) -> Array:
    """Two-sided critical value t_{df, 1 - (1 - level)/2}.

    Parameters
    ----------
    df : degrees of freedom; ``inf`` gives the normal quantile, ``<= 0`` or NaN gives NaN.
    level : confidence level, e.g. 0.95.

    Returns
    -------
    numpy.ndarray of the critical values, shaped like *df*.

    Examples
    --------
    >>> round(float(t_quantile(30, 0.95)), 6)
    2.042272
    """
    from wstats.estimation.distributions import t_ppf

    return t_ppf(1.0 - _alpha(level) / 2.0, df)


def wald_t(
    est: npt.ArrayLike, se: npt.ArrayLike, df: npt.ArrayLike, level: float
) -> tuple[Array, Array]:
    """Symmetric interval est -/+ t_{df} * se (no clipping).

    Parameters
    ----------
    est, se, df : estimates, standard errors and degrees of freedom (broadcast).
    level : confidence level.

    Returns
    -------
    (low, high) arrays.

    Examples
    --------
    >>> low, high = wald_t(0.10, 0.02, 30, 0.95)
    >>> round(float(low), 6), round(float(high), 6)
    (0.059155, 0.140845)
    """
    half = t_quantile(df, level) * _f(se)
    e = _f(est)
    return e - half, e + half


def logit_ci(
    p: npt.ArrayLike,
    se: npt.ArrayLike,
    df: npt.ArrayLike,
    level: float,
    n: npt.ArrayLike | None = None,
) -> tuple[Array, Array]:
    """Interval built on the logit scale: expit(logit p -/+ t_{df} * se / (p(1-p))).

    Parameters
    ----------
    p, se, df : proportions (0-1), their standard errors and degrees of freedom.
    level : confidence level.
    n : record counts. The logit is infinite at p = 0 or 1; when *n* is given those cells
        take the Korn-Graubard interval (one-sided Clopper-Pearson), otherwise they are NaN.

    Returns
    -------
    (low, high) arrays within [0, 1].

    Examples
    --------
    >>> low, high = logit_ci(0.10, 0.02, 30, 0.95)
    >>> round(float(low), 6), round(float(high), 6)
    (0.065924, 0.148883)
    """
    pp = _f(p)
    inside = (pp > 0) & (pp < 1)
    safe = np.where(inside, pp, 0.5)
    with np.errstate(over="ignore"):  # an infinite half-width still gives limits 0 and 1
        half = t_quantile(df, level) * _f(se) / (safe * (1.0 - safe))
    centre = np.log(safe / (1.0 - safe))
    low = np.where(inside, _expit(centre - half), np.nan)
    high = np.where(inside, _expit(centre + half), np.nan)
    if n is not None:
        kg_low, kg_high = korn_graubard_ci(pp, se, n, df, level)
        low, high = np.where(inside, low, kg_low), np.where(inside, high, kg_high)
    return _f(low), _f(high)


def _expit(x: Array) -> Array:
    """Return the logistic function of *x*."""
    from wstats.estimation.distributions import expit

    return expit(x)


def effective_n(p: npt.ArrayLike, se: npt.ArrayLike, n: npt.ArrayLike) -> Array:
    """Return p(1-p)/se^2 capped at n, or n where p is 0 or 1 or se is 0 (NaN where n <= 0).

    This is n* of Korn and Graubard (1998) and n_eff of the NCHS proportion standards.
    """
    p, se, n = _f(p), _f(se), _f(n)
    var = se * se
    use_n = (p == 0) | (p == 1) | (var == 0)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        raw = np.where(use_n, n, p * (1.0 - p) / np.where(use_n, 1.0, var))
    return _f(np.where(n > 0, np.minimum(raw, n), np.nan))


def wilson_ci(
    p: npt.ArrayLike, se: npt.ArrayLike, n: npt.ArrayLike, df: npt.ArrayLike, level: float
) -> tuple[Array, Array]:
    """Wilson score interval on the effective sample size n_eff = p(1-p)/se^2 (capped at n).

    The critical value is t_{df}; with ``df = inf`` the result equals the classical Wilson
    interval for ``p * n_eff`` successes out of ``n_eff`` trials. n_eff is n where p is 0 or
    1 or se is 0.

    Parameters
    ----------
    p, se, n, df : proportions, standard errors, record counts and degrees of freedom.
    level : confidence level.

    Returns
    -------
    (low, high) arrays within [0, 1]; NaN where n <= 0.

    Examples
    --------
    >>> low, high = wilson_ci(0.1, (0.1 * 0.9 / 225) ** 0.5, 1000, float("inf"), 0.95)
    >>> round(float(low), 6), round(float(high), 6)
    (0.06727, 0.146159)
    """
    pp = _f(p)
    m = effective_n(pp, _f(se), _f(n))
    z2 = t_quantile(df, level) ** 2
    # The score interval multiplied through by n_eff, so a tiny n_eff gives [0, 1], no overflow.
    denom = m + z2
    centre = (pp * m + z2 / 2.0) / denom
    half = np.sqrt(z2) / denom * np.sqrt(pp * (1.0 - pp) * m + z2 / 4.0)
    return _clip01(centre - half), _clip01(centre + half)


def _clip01(x: Array) -> Array:
    """Clip to [0, 1], keeping NaN."""
    return _f(np.clip(x, 0.0, 1.0))


def clopper_pearson(x: npt.ArrayLike, n: npt.ArrayLike, level: float) -> tuple[Array, Array]:
    """Exact binomial interval [B(a/2; x, n-x+1), B(1-a/2; x+1, n-x)], with 0 / 1 at the ends.

    Works for non-integer *x* and *n* (beta quantiles). Cells with n <= 0, x < 0, x > n or
    NaN inputs give NaN. Fewer than 1e-4 successes (failures) count as 0 (as n): the
    limit then underflows to 0 (1) in double precision anyway.

    Parameters
    ----------
    x : successes (may be fractional).
    n : trials (may be fractional).
    level : confidence level.

    Returns
    -------
    (low, high) arrays.

    Examples
    --------
    >>> low, high = clopper_pearson(5, 25, 0.95)
    >>> round(float(low), 6), round(float(high), 6)
    (0.068311, 0.407037)
    """
    from wstats.estimation.distributions import beta_ppf

    a = _alpha(level)
    xx, nn = np.broadcast_arrays(_f(x), _f(n))
    ok = (nn > 0) & (xx >= 0) & (xx <= nn)
    # Below 1e-4 successes (failures) the limit is below q^(1/1e-4): zero in double precision;
    # the beta quantile is inaccurate or overflows for such tiny shape parameters.
    has_low, has_high = ok & (xx >= _TINY), ok & (nn - xx >= _TINY)
    # both limits in one call: the solver's steps are shared by all cells
    k = xx.size
    shape_a = [np.where(has_low, xx, 1.0), np.where(has_high, xx + 1, 1.0)]
    shape_b = [np.where(has_low, nn - xx + 1, 1.0), np.where(has_high, nn - xx, 1.0)]
    both = beta_ppf(np.repeat([a / 2.0, 1.0 - a / 2.0], k),
                    np.concatenate([s.ravel() for s in shape_a]),
                    np.concatenate([s.ravel() for s in shape_b]))
    low_q, high_q = both[:k].reshape(xx.shape), both[k:].reshape(xx.shape)
    low = np.where(has_low, low_q, np.where(ok, 0.0, np.nan))
    high = np.where(has_high, high_q, np.where(ok, 1.0, np.nan))
    return _f(low), _f(high)


def korn_graubard_ci(
    p: npt.ArrayLike, se: npt.ArrayLike, n: npt.ArrayLike, df: npt.ArrayLike, level: float
) -> tuple[Array, Array]:
    """Korn-Graubard interval: Clopper-Pearson on the df-adjusted effective sample size.

    ``n* = p(1-p)/se^2`` capped at ``n`` (``n* = n`` when p is 0 or 1 or se is 0);
    ``n*_df = n* (t_{n-1} / t_{df})^2``; ``x* = p n*_df``; the interval is
    Clopper-Pearson(x*, n*_df). Korn & Graubard (1998), Survey Methodology 24(2):193-201.

    Parameters
    ----------
    p, se, n, df : proportions, standard errors, record counts and degrees of freedom.
    level : confidence level.

    Returns
    -------
    (low, high) arrays within [0, 1]; NaN where n <= 0 or p is NaN. A proportion of exactly
    0 or 1 always gets a one-sided interval (its standard error is not used).

    Examples
    --------
    >>> low, high = korn_graubard_ci(0.10, 0.02, 400, 30, 0.95)
    >>> round(float(low), 6), round(float(high), 6)
    (0.062855, 0.149001)
    """
    pp, nn = _f(p), _f(n)
    n_df = kg_effective_n(pp, se, nn, df, level)
    return clopper_pearson(pp * n_df, n_df, level)


def kg_effective_n(
    p: npt.ArrayLike, se: npt.ArrayLike, n: npt.ArrayLike, df: npt.ArrayLike, level: float
) -> Array:
    """Return the df-adjusted effective sample size n*_df of the Korn-Graubard interval."""
    pp, nn = _f(p), _f(n)
    n_star = effective_n(pp, _f(se), nn)
    factor = (t_quantile(nn - 1.0, level) / t_quantile(df, level)) ** 2
    at_edge = (pp == 0) | (pp == 1)
    factor = np.where(np.isnan(factor) & at_edge, 1.0, factor)
    return _f(n_star * factor)


def _wald_proportion(
    p: npt.ArrayLike, se: npt.ArrayLike, n: npt.ArrayLike, df: npt.ArrayLike, level: float
) -> tuple[Array, Array]:
    """Wald-t interval for a proportion, clipped to [0, 1] (NaN where n <= 0)."""
    low, high = wald_t(p, se, df, level)
    empty = ~(_f(n) > 0)
    return _clip01(np.where(empty, np.nan, low)), _clip01(np.where(empty, np.nan, high))


def _logit_proportion(
    p: npt.ArrayLike, se: npt.ArrayLike, n: npt.ArrayLike, df: npt.ArrayLike, level: float
) -> tuple[Array, Array]:
    """Logit interval; p at 0 or 1 falls back to Korn-Graubard (NaN where n <= 0)."""
    low, high = logit_ci(p, se, df, level, n=n)
    empty = ~(_f(n) > 0)
    return _f(np.where(empty, np.nan, low)), _f(np.where(empty, np.nan, high))


#: Interval methods for proportions, by name; each takes ``(p, se, n, df, level)``.
PROPORTION_INTERVALS: dict[str, ProportionInterval] = {
    "korn-graubard": korn_graubard_ci,
    "logit": _logit_proportion,
    "wilson": wilson_ci,
    "wald": _wald_proportion,
}
