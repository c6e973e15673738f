"""The normal, t and beta quantiles of wstats.estimation.distributions against scipy.special and
tables.

scipy.special (cephes / Boost based) is the general-purpose reference here; wstats computes
the same functions in numpy so that a quick run does not import scipy.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import special

from _imports import modules_loaded_by
from wstats.estimation.distributions import beta_ppf, betainc, expit, norm_ppf, t_ppf

LEVELS = (0.0005, 0.005, 0.025, 0.05, 0.1, 0.5, 0.9, 0.95, 0.975, 0.995, 0.9995)


def _log_grid(lo: float, hi: float, size: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return np.exp(rng.uniform(math.log(lo), math.log(hi), size))


def _rel(got: np.ndarray, ref: np.ndarray) -> float:
    """Largest relative difference (absolute where the reference is 0)."""
    scale = np.where(ref == 0, 1.0, np.abs(ref))
    return float(np.max(np.abs(got - ref) / scale))


def test_t_quantiles_match_printed_table() -> None:
    # Abramowitz & Stegun 1964, Handbook of Mathematical Functions, Table 26.10 (t, Q = 0.025
    # and 0.005), to the 3 decimals printed
    assert t_ppf(0.975, [1.0, 2.0, 10.0, 30.0, 120.0]).round(3).tolist() == [
        12.706, 4.303, 2.228, 2.042, 1.980]
    assert t_ppf(0.995, [1.0, 5.0, 60.0]).round(3).tolist() == [63.657, 4.032, 2.660]


@pytest.mark.parametrize("q", LEVELS)
def test_t_quantiles_equal_scipy(q: float) -> None:
    # scipy.special.stdtrit; df from 1 to 1e8, both sides of the Fisher-expansion switch
    df = np.concatenate([_log_grid(1.0, 1e8, 400, 1), [1.0, 2.0, 2999.0, 3000.0, 1e8]])
    assert _rel(t_ppf(q, df), special.stdtrit(df, q)) < 2e-13


def test_remembered_t_quantiles_equal_solved_ones(monkeypatch: pytest.MonkeyPatch) -> None:
    # scipy.special.stdtrit: a df met again (both tails, mixed with new ones) gives the value
    # solved the first time; the memo starts afresh past its size
    from wstats.estimation import distributions as _special
    monkeypatch.setattr(_special, "_T_SOLVED", {})
    monkeypatch.setattr(_special, "_T_SOLVED_MAX", 5)
    df = np.array([3.0, 30.0, 7.5, 30.0, 2999.0, 1e5])
    first = t_ppf(0.975, df)
    assert len(_special._T_SOLVED) == 4  # distinct df below the Fisher switch
    again = t_ppf(0.975, np.array([30.0, 12.0, 3.0]))
    assert again.tolist() == [first[1], t_ppf(0.975, [12.0])[0], first[0]]
    lower = t_ppf(0.025, df)  # the lower tail shares the memo (Fisher's df: not memoised)
    assert lower[:5].tolist() == (-first[:5]).tolist()
    assert lower[5] == pytest.approx(-first[5], rel=1e-15)
    assert _rel(again, special.stdtrit([30.0, 12.0, 3.0], 0.975)) < 2e-13
    t_ppf(0.9, np.arange(1.0, 9.0))  # past the size: cleared, then filled again
    assert len(_special._T_SOLVED) <= 5 + 8


def test_t_quantile_edges() -> None:
    # common practice, no source: df = inf is the normal quantile; bad df give NaN
    out = t_ppf(0.975, [math.inf, 0.0, -1.0, math.nan])
    assert out[0] == pytest.approx(1.959963984540054, rel=1e-15)
    assert np.isnan(out[1:]).all()
    assert t_ppf(0.5, [3.0]).tolist() == [0.0]
    assert t_ppf(0.025, [7.0])[0] == pytest.approx(-special.stdtrit(7.0, 0.975), rel=1e-14)
    assert np.isnan(t_ppf(1.0, [5.0])).all()


def test_normal_quantile_equals_scipy() -> None:
    # scipy.special.ndtri
    q = np.array([1e-12, 1e-6, 0.001, 0.025, 0.3, 0.5, 0.8, 0.975, 0.999999])
    assert np.allclose(norm_ppf(q), special.ndtri(q), rtol=1e-15, atol=0)
    assert norm_ppf([0.0, 1.0, 2.0]).tolist()[:2] == [-math.inf, math.inf]


@pytest.mark.parametrize(("lo", "hi", "tol"), [
    (1e-4, 1.0, 5e-11),  # tiny shapes (a fraction of one success): the quantiles are tiny too
    (1e-2, 10.0, 2e-12),
    (1.0, 100.0, 1e-13),
    (8.0, 1e4, 1e-13),
    (1e3, 1e7, 2e-12),  # effective sample sizes of large surveys
])
def test_beta_quantiles_equal_scipy(lo: float, hi: float, tol: float) -> None:
    # scipy.special.betaincinv on log-uniform shape parameters
    a, b = _log_grid(lo, hi, 300, 2), _log_grid(lo, hi, 300, 3)
    for q in (0.0005, 0.005, 0.025, 0.5, 0.975, 0.995):
        ref = special.betaincinv(a, b, q)
        keep = ref > 1e-280  # below that, both underflow differently
        assert _rel(beta_ppf(q, a, b)[keep], ref[keep]) < tol, q


@settings(max_examples=200, deadline=None)
@given(a=st.floats(0.01, 1e6), b=st.floats(0.01, 1e6), q=st.floats(1e-6, 1 - 1e-6))
def test_beta_quantile_inverts_incomplete_beta(a: float, b: float, q: float) -> None:
    # common practice, no source: scipy agrees, and the root is bracketed within 1e-9 of x
    # (I_x(a, b) itself may jump by more than q's precision between neighbouring doubles);
    # quantiles below 1e-300 count as 0
    x = float(beta_ppf(q, a, b))
    ref = float(special.betaincinv(a, b, q))
    assert x == pytest.approx(ref, rel=1e-9, abs=1e-300)
    if 1e-300 < x < 1.0:
        assert float(special.betainc(a, b, x * (1 - 1e-9))) <= q * (1 + 1e-12)
        assert float(special.betainc(a, b, min(1.0, x * (1 + 1e-9)))) >= q * (1 - 1e-12)


def test_incomplete_beta_equals_scipy_and_closed_forms() -> None:
    # scipy.special.betainc, around each distribution's bulk; and I_x(1, b) = 1 - (1-x)^b,
    # I_x(a, 1) = x^a (Abramowitz & Stegun 1964, 26.5.1 with integer shapes)
    rng = np.random.default_rng(4)
    a, b = _log_grid(0.05, 1e6, 2000, 5), _log_grid(0.05, 1e6, 2000, 6)
    mean, sd = a / (a + b), np.sqrt(a * b / ((a + b) ** 2 * (a + b + 1)))
    x = np.clip(mean + sd * rng.normal(0, 2, a.size), 1e-12, 1 - 1e-12)
    ref = special.betainc(a, b, x)
    keep = ref > 1e-200
    assert _rel(betainc(a, b, x)[keep], ref[keep]) < 1e-10
    xs = np.linspace(0.01, 0.99, 50)
    assert np.allclose(betainc(1.0, 7.5, xs), 1 - (1 - xs) ** 7.5, rtol=1e-14)
    assert np.allclose(betainc(3.25, 1.0, xs), xs**3.25, rtol=1e-13)
    assert betainc(2.0, 3.0, [0.0, 1.0]).tolist() == [0.0, 1.0]
    assert np.isnan(betainc([-1.0, 2.0], [2.0, 0.0], 0.5)).all()


def test_beta_quantile_edges() -> None:
    # common practice, no source: p = 0 and 1 are the ends of the support; bad shapes give NaN
    assert beta_ppf([0.0, 1.0], 2.0, 3.0).tolist() == [0.0, 1.0]
    assert np.isnan(beta_ppf(0.5, [0.0, -1.0, math.nan, math.inf], 2.0)).all()
    assert np.isnan(beta_ppf([1.5, -0.1, math.nan], 2.0, 3.0)).all()
    assert beta_ppf(0.5, 2.0, 2.0) == pytest.approx(0.5, rel=1e-15)  # symmetric


def test_expit_equals_scipy_without_overflow() -> None:
    # scipy.special.expit
    x = np.array([-800.0, -30.0, -1.0, 0.0, 2.5, 40.0, 800.0])
    assert np.allclose(expit(x), special.expit(x), rtol=1e-15, atol=0)


def test_a_linearization_run_imports_no_scipy() -> None:
    # the point of wstats.estimation.distributions: a Taylor-linearization estimate leaves
    # scipy unimported
    code = (
        "from wstats.decoding.columns import Dataset\n"
        "from wstats.design.declared import Design\n"
        "from wstats.estimation.estimate import estimate\n"
        "ds = Dataset.from_arrays({'y': [1.0, 0.0, 1.0, 1.0, 0.0, 1.0], 'w': [1.0, 2, 1, 3, 1, 2],"
        " 'h': [1.0, 1, 1, 2, 2, 2], 'c': [1.0, 2, 2, 3, 4, 4]})\n"
        "estimate(ds, Design('w', strata='h', psu='c'), ['y'], categorical=['y'])"
    )
    assert modules_loaded_by(code, "scipy", "pandas") == []
