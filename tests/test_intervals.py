"""Tests of wstats.estimation.intervals against published check values, scipy and statsmodels."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats
from statsmodels.stats.proportion import proportion_confint

from wstats.errors import EstimationError, WstatsError
from wstats.estimation.intervals import (
    PROPORTION_INTERVALS,
    clopper_pearson,
    effective_n,
    kg_effective_n,
    korn_graubard_ci,
    logit_ci,
    t_quantile,
    wald_t,
    wilson_ci,
)

INF = float("inf")


# --- t quantile ---------------------------------------------------------------------------


def test_t_quantile_matches_scipy_and_normal_at_inf() -> None:
    # Agreement with scipy.stats.t / norm [C].
    got = t_quantile(np.array([1.0, 7.0, 30.0, INF]), 0.95)
    want = [stats.t.ppf(0.975, 1), stats.t.ppf(0.975, 7), stats.t.ppf(0.975, 30)]
    np.testing.assert_allclose(got, [*want, stats.norm.ppf(0.975)], rtol=1e-12)
    assert float(t_quantile(30, 0.90)) == pytest.approx(stats.t.ppf(0.95, 30), rel=1e-12)


def test_t_quantile_nan_for_nonpositive_or_missing_df() -> None:
    # Convention of this module: no degrees of freedom, no interval.
    assert np.isnan(t_quantile(np.array([0.0, -3.0, np.nan]), 0.95)).all()


@pytest.mark.parametrize("level", [0.0, 1.0, 95.0, -0.5])
def test_level_outside_unit_interval_raises_one_line_error(level: float) -> None:
    with pytest.raises(EstimationError, match=r"outside \(0, 1\); give it as a fraction") as info:
        t_quantile(10, level)
    assert isinstance(info.value, WstatsError) and "\n" not in str(info.value)


# --- Wald and logit -----------------------------------------------------------------------


def test_wald_t_check_value() -> None:
    # REFERENCES.md section 5 [C]: p = .10, SE = .02, df = 30 -> (0.059155, 0.140845).
    low, high = wald_t(0.10, 0.02, 30, 0.95)
    assert (float(low), float(high)) == pytest.approx((0.059155, 0.140845), abs=1e-6)


def test_logit_check_value() -> None:
    # REFERENCES.md section 5 [C]: p = .10, SE = .02, df = 30 -> (0.065924, 0.148883).
    low, high = logit_ci(0.10, 0.02, 30, 0.95)
    assert (float(low), float(high)) == pytest.approx((0.065924, 0.148883), abs=1e-6)


def test_logit_formula_recomputed_with_numpy() -> None:
    # Logit interval expit(logit p +/- t*se/(p(1-p))) recomputed from the formula [C].
    p, se, df = np.array([0.2, 0.5, 0.93]), np.array([0.03, 0.01, 0.02]), np.array([5, 12, INF])
    t = np.where(np.isinf(df), stats.norm.ppf(0.975), stats.t.ppf(0.975, np.minimum(df, 1e9)))
    lg, h = np.log(p / (1 - p)), t * se / (p * (1 - p))
    low, high = logit_ci(p, se, df, 0.95)
    np.testing.assert_allclose(low, 1 / (1 + np.exp(-(lg - h))), rtol=1e-12)
    np.testing.assert_allclose(high, 1 / (1 + np.exp(-(lg + h))), rtol=1e-12)


def test_logit_at_boundary_falls_back_to_korn_graubard() -> None:
    # Our convention (documented): logit p is infinite at 0 and 1.
    p = np.array([0.0, 1.0])
    low, high = logit_ci(p, 0.0, 30, 0.95, n=200)
    kg_low, kg_high = korn_graubard_ci(p, 0.0, 200, 30, 0.95)
    np.testing.assert_array_equal(low, kg_low)
    np.testing.assert_array_equal(high, kg_high)
    assert np.isnan(logit_ci(p, 0.0, 30, 0.95)[0]).all()  # without n there is no fallback


# --- Wilson -------------------------------------------------------------------------------


def test_wilson_check_value() -> None:
    # REFERENCES.md section 5 [C]: p = .1, n_eff = 225 -> (0.067270, 0.146159).
    se = math.sqrt(0.1 * 0.9 / 225)
    low, high = wilson_ci(0.1, se, 1000, INF, 0.95)
    assert (float(low), float(high)) == pytest.approx((0.067270, 0.146159), abs=1e-6)


def test_wilson_equals_statsmodels_on_effective_n_vectorised() -> None:
    # statsmodels proportion_confint(p*n_eff, n_eff, method="wilson") [C]; Kott & Carr (1997)
    # JOS 13:367-383 for the effective-n idea [M].
    rng = np.random.default_rng(7)
    p = rng.uniform(0.02, 0.98, 40)
    n_eff = rng.uniform(5, 3000, 40)
    se = np.sqrt(p * (1 - p) / n_eff)
    low, high = wilson_ci(p, se, n_eff * 2, INF, 0.95)
    want_low, want_high = proportion_confint(p * n_eff, n_eff, alpha=0.05, method="wilson")
    np.testing.assert_allclose(low, want_low, rtol=1e-9)
    np.testing.assert_allclose(high, want_high, rtol=1e-9)


def test_wilson_uses_t_critical_value_and_caps_n_eff() -> None:
    # Wilson (1927) score interval with z replaced by t_df, recomputed with numpy [C].
    p, n, df = 0.3, 80.0, 9.0
    se = 0.01  # p(1-p)/se^2 = 2100 > n, so n_eff is capped at n = 80
    assert float(effective_n(p, se, n)) == n
    t = stats.t.ppf(0.975, df)
    centre = (p + t * t / (2 * n)) / (1 + t * t / n)
    half = t / (1 + t * t / n) * math.sqrt(p * (1 - p) / n + t * t / (4 * n * n))
    low, high = wilson_ci(p, se, n, df, 0.95)
    assert (float(low), float(high)) == pytest.approx((centre - half, centre + half), rel=1e-12)


# --- Clopper-Pearson ----------------------------------------------------------------------


def test_clopper_pearson_five_of_twenty_five() -> None:
    # Clopper & Pearson (1934) exact interval; REFERENCES.md section 5: 5/25 ->
    # (0.068311, 0.407037) [S: printed 0.068-0.407].
    low, high = clopper_pearson(5, 25, 0.95)
    assert (float(low), float(high)) == pytest.approx((0.068311, 0.407037), abs=1e-6)


def test_clopper_pearson_equals_statsmodels_beta_incl_fractional_counts() -> None:
    # statsmodels proportion_confint(method="beta") [C], which also takes float counts.
    x = np.array([0.0, 1.0, 5.5, 12.25, 30.0, 99.9, 100.0])
    n = np.array([10.0, 3.0, 25.3, 40.0, 30.0, 100.0, 100.0])
    low, high = clopper_pearson(x, n, 0.90)
    want_low, want_high = proportion_confint(x, n, alpha=0.10, method="beta")
    np.testing.assert_allclose(low, want_low, rtol=1e-9, atol=1e-15)
    np.testing.assert_allclose(high, want_high, rtol=1e-9, atol=1e-15)


def test_clopper_pearson_zero_successes_has_closed_form() -> None:
    # At x = 0 the upper limit solves (1 - u)^n = alpha/2, i.e. u = 1 - (alpha/2)^(1/n)
    # (Clopper & Pearson 1934; exact algebra) [C].
    low, high = clopper_pearson(0, 37.5, 0.95)
    assert float(low) == 0.0
    assert float(high) == pytest.approx(1 - 0.025 ** (1 / 37.5), rel=1e-12)


def test_clopper_pearson_invalid_cells_are_nan() -> None:
    low, high = clopper_pearson(np.array([1.0, -1.0, 6.0, np.nan]), np.array([0, 5, 5, 5]), 0.95)
    assert np.isnan(low).all() and np.isnan(high).all()


# --- Korn-Graubard ------------------------------------------------------------------------


def test_korn_graubard_effective_n_check_value() -> None:
    # REFERENCES.md section 5 [C]: p=.10, SE=.02, n=400, df=30 -> n*_df = 208.4923.
    assert float(kg_effective_n(0.10, 0.02, 400, 30, 0.95)) == pytest.approx(208.4923, abs=1e-4)


@pytest.mark.parametrize(
    ("p", "se", "n", "df", "want"),
    [
        # Korn & Graubard (1998) Survey Methodology 24(2):193-201 [S idea, M formula];
        # check values from REFERENCES.md section 5 [C].
        (0.10, 0.02, 400, 30, (0.062855, 0.149001)),
        (0.30, 0.03, 1000, 60, (0.240839, 0.364529)),
        (0.50, 0.05, 60, 7, (0.343748, 0.656252)),
    ],
)
def test_korn_graubard_check_values(
    p: float, se: float, n: int, df: int, want: tuple[float, float]
) -> None:
    low, high = korn_graubard_ci(p, se, n, df, 0.95)
    assert (float(low), float(high)) == pytest.approx(want, abs=1e-6)


def test_korn_graubard_vectorised_equals_scalar_check_values() -> None:
    low, high = korn_graubard_ci(
        [0.10, 0.30, 0.50], [0.02, 0.03, 0.05], [400, 1000, 60], [30, 60, 7], 0.95
    )
    np.testing.assert_allclose(low, [0.062855, 0.240839, 0.343748], atol=1e-6)
    np.testing.assert_allclose(high, [0.149001, 0.364529, 0.656252], atol=1e-6)


def test_korn_graubard_reduces_to_clopper_pearson_under_srs() -> None:
    # With SRS variance p(1-p)/n (n* = n) and df = n - 1 the df factor is 1, so the interval
    # is Clopper-Pearson(np, n) exactly (algebra of the KG definition) [C].
    p, n = np.array([0.04, 0.5, 0.8]), np.array([50.0, 120.0, 333.0])
    low, high = korn_graubard_ci(p, np.sqrt(p * (1 - p) / n), n, n - 1, 0.95)
    want_low, want_high = proportion_confint(p * n, n, alpha=0.05, method="beta")
    np.testing.assert_allclose(low, want_low, rtol=1e-9)
    np.testing.assert_allclose(high, want_high, rtol=1e-9)


def test_korn_graubard_with_normal_df_uses_inflated_n() -> None:
    # df = inf: n*_df = n (t_{n-1}/z)^2 > n (no cap on n*_df, REFERENCES.md section 5 formula),
    # hence CP on that n; close to CP(np, n) for large n [C].
    p, n = 0.2, 500.0
    n_df = n * (stats.t.ppf(0.975, n - 1) / stats.norm.ppf(0.975)) ** 2
    low, high = korn_graubard_ci(p, math.sqrt(p * (1 - p) / n), n, INF, 0.95)
    want = proportion_confint(p * n_df, n_df, alpha=0.05, method="beta")
    assert (float(low), float(high)) == pytest.approx(want, rel=1e-9)
    assert (float(low), float(high)) == pytest.approx(
        proportion_confint(p * n, n, method="beta"), abs=2e-4
    )


@pytest.mark.parametrize("se", [0.0, float("nan"), 0.05])
@pytest.mark.parametrize("df", [30.0, INF, float("nan"), 0.0])
def test_korn_graubard_boundaries_are_one_sided_never_nan(se: float, df: float) -> None:
    # p = 0: [0, CP upper with x = 0]; p = 1: [CP lower with x = n, 1]. Uses n* = n.
    n = 80.0
    low, high = korn_graubard_ci(np.array([0.0, 1.0]), se, n, df, 0.95)
    factor = (stats.t.ppf(0.975, n - 1) / stats.t.ppf(0.975, df)) ** 2 if df > 0 else 1.0
    if math.isinf(df):
        factor = (stats.t.ppf(0.975, n - 1) / stats.norm.ppf(0.975)) ** 2
    n_df = n * factor
    upper0 = 1 - 0.025 ** (1 / n_df)  # closed form of CP at x = 0 [C]
    np.testing.assert_allclose(low, [0.0, 1 - upper0], rtol=1e-12)
    np.testing.assert_allclose(high, [upper0, 1.0], rtol=1e-12)


def test_korn_graubard_single_record() -> None:
    # One record: p is 0 or 1 and t_{n-1} = t_0 is undefined, so the df factor is taken as 1
    # (our documented convention): CP with x = 0, n = 1 has upper limit 0.975 [C, closed form].
    low, high = korn_graubard_ci([0.0, 1.0], float("nan"), 1, float("nan"), 0.95)
    np.testing.assert_allclose(low, [0.0, 0.025])
    np.testing.assert_allclose(high, [0.975, 1.0])
    # An interior p cannot come from one record; the interval is undefined there.
    assert np.isnan(korn_graubard_ci(0.5, 0.1, 1, 5, 0.95)[0])


def test_korn_graubard_empty_and_missing_are_nan() -> None:
    low, high = korn_graubard_ci([0.3, np.nan, 0.0], 0.05, [0, 50, 0], 10, 0.95)
    assert np.isnan(low).all() and np.isnan(high).all()
    # An interior p whose SE cannot be estimated has no effective sample size.
    assert np.isnan(korn_graubard_ci(0.3, float("nan"), 50, 10, 0.95)[1])


def test_clopper_pearson_tiny_counts_do_not_overflow() -> None:
    # x = 5e-324 once made the beta quantile overflow; below 1e-4 successes the lower limit
    # is 0 in double precision (it is below 0.025 ** 1e4) [C].
    low, high = clopper_pearson(np.array([5e-324, 1e-5, 84.0 - 1e-300]), 84.0, 0.95)
    assert low.tolist()[:2] == [0.0, 0.0] and high.tolist()[2] == 1.0
    assert float(high[0]) == pytest.approx(1 - 0.025 ** (1 / 84), rel=1e-9)


# --- registry, shapes, properties ---------------------------------------------------------


def test_registry_names_and_empty_domains() -> None:
    assert set(PROPORTION_INTERVALS) == {"korn-graubard", "logit", "wilson", "wald"}
    for name, fn in PROPORTION_INTERVALS.items():
        low, high = fn(np.array([0.2, 0.0]), 0.05, np.array([0, 0]), 12, 0.95)
        assert np.isnan(low).all() and np.isnan(high).all(), name


def test_wald_proportion_is_clipped() -> None:
    low, high = PROPORTION_INTERVALS["wald"](np.array([0.02, 0.99]), 0.05, 100, 30, 0.95)
    assert float(low[0]) == 0.0 and float(high[1]) == 1.0


@pytest.mark.parametrize("name", sorted(PROPORTION_INTERVALS))
def test_shapes_broadcast_and_scalars_give_0d(name: str) -> None:
    fn = PROPORTION_INTERVALS[name]
    p = np.linspace(0.1, 0.9, 4)
    low, high = fn(p, np.full((3, 1), 0.03), 200, 20, 0.95)
    assert low.shape == high.shape == (3, 4)
    low0, high0 = fn(0.4, 0.03, 200, 20, 0.95)
    assert low0.shape == () and high0.shape == ()
    # Each cell of the broadcast result equals the scalar call on that cell.
    assert float(low[1, 2]) == pytest.approx(float(fn(p[2], 0.03, 200, 20, 0.95)[0]), rel=1e-12)


@settings(max_examples=60, deadline=None)
@given(
    p=st.one_of(st.sampled_from([0.0, 1.0]), st.floats(0.0, 1.0)),
    se=st.floats(1e-6, 0.5),
    n=st.floats(2.0, 5000.0),
    df=st.one_of(st.just(INF), st.floats(1.0, 500.0)),
    level=st.floats(0.5, 0.999),
    name=st.sampled_from(sorted(PROPORTION_INTERVALS)),
)
def test_proportion_intervals_contain_p_and_stay_in_unit_interval(
    p: float, se: float, n: float, df: float, level: float, name: str
) -> None:
    low, high = PROPORTION_INTERVALS[name](p, se, n, df, level)
    lo, hi = float(low), float(high)
    assert not (math.isnan(lo) or math.isnan(hi))
    assert 0.0 <= lo <= hi <= 1.0
    assert lo <= p + 1e-9 and p - 1e-9 <= hi


@settings(max_examples=40, deadline=None)
@given(x=st.floats(0.0, 1.0), n=st.floats(0.5, 2000.0), level=st.floats(0.5, 0.999))
def test_clopper_pearson_properties(x: float, n: float, level: float) -> None:
    # Contains x/n, nests with the level (wider at a higher level) [C, monotone beta quantiles].
    low, high = clopper_pearson(x * n, n, level)
    wide_low, wide_high = clopper_pearson(x * n, n, min(level + 0.0005, 0.9999))
    assert 0.0 <= float(low) <= x + 1e-9 and x - 1e-9 <= float(high) <= 1.0
    assert float(wide_low) <= float(low) + 1e-12 and float(high) <= float(wide_high) + 1e-12
