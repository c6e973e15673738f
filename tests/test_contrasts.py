"""Comparison math: p-values, differences, Wald F, trend contrasts, multiplicity, Rao-Scott."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from wstats import Dataset, Design
from wstats.errors import EstimationError
from wstats.estimation.contrasts import (
    adjust_p,
    contrast,
    differences,
    f_sf,
    t_two_sided,
    trend_coefficients,
    wald_equal,
)
from wstats.estimation.covariance import Covariance, joint_covariance
from wstats.estimation.influence import domain_sums, indicator_influence
from wstats.estimation.rao_scott import independence_jacobian, rao_scott


def test_p_values_equal_scipy() -> None:
    # [C] scipy.stats.t.sf and scipy.stats.f.sf (general library)
    t = np.array([0.0, 0.5, 1.96, 3.2, -2.5, 40.0])
    for df in (1.0, 4.0, 15.0, 120.0, 5000.0):
        assert t_two_sided(t, df) == pytest.approx(2 * stats.t.sf(np.abs(t), df), rel=1e-9,
                                                   abs=1e-300)
    assert t_two_sided([1.96], np.inf)[0] == pytest.approx(2 * stats.norm.sf(1.96), rel=1e-12)
    f = np.array([0.0, 0.3, 1.0, 2.7, 9.0])
    for d1, d2 in ((1.0, 10.0), (3.0, 29.0), (2.4, 55.3), (8.0, 4.0)):
        assert f_sf(f, d1, d2) == pytest.approx(stats.f.sf(f, d1, d2), rel=1e-9)
    assert np.isnan(t_two_sided([np.nan], 5.0)[0]) and np.isnan(f_sf(1.0, 2.0, 0.0))


def test_nces_worked_comparison_independent_samples() -> None:
    # [S] NCES 2006-075, Appendix A (REFERENCES §13): 60 % (SE 0.9) vs 59 % (SE 1.2),
    # independent samples: t = 1 / sqrt(0.81 + 1.44) = 0.67; 39 % (0.9) vs 39 % (0.9): 0.00
    cov = Covariance(np.array([60.0, 59.0]), np.diag([0.9**2, 1.2**2]), np.inf)
    d = differences(cov, [1], [0])
    assert round(float(d.t[0]), 2) == 0.67
    cov2 = Covariance(np.array([39.0, 39.0]), np.diag([0.81, 0.81]), np.inf)
    assert round(float(differences(cov2, [0], [1]).t[0]), 2) == 0.0


def test_covariance_changes_the_se_of_a_difference() -> None:
    # [C] REFERENCES §12: v(D) = v_a + v_b - 2 c_ab; a positive covariance shrinks the SE
    cov = Covariance(np.array([1.0, 2.0]), np.array([[1.0, 0.6], [0.6, 1.0]]), 30.0)
    assert differences(cov, [0], [1]).se[0] == pytest.approx(np.sqrt(2 - 1.2))


@settings(max_examples=50, deadline=None)
@given(st.lists(st.floats(-5, 5), min_size=2, max_size=2), st.floats(0.1, 3), st.floats(0.1, 3),
       st.floats(-0.9, 0.9), st.integers(2, 200))
def test_wald_f_of_two_groups_is_the_squared_t(est: list[float], s1: float, s2: float,
                                               rho: float, df: int) -> None:
    # [C] q = 1: F = (d - 1 + 1)/(d * 1) X2 = t^2 on (1, d), same p as the two-sided t
    v = np.array([[s1 * s1, rho * s1 * s2], [rho * s1 * s2, s2 * s2]])
    cov = Covariance(np.array(est), v, float(df))
    w = wald_equal(cov)
    d = differences(cov, [0], [1])
    assert w.f == pytest.approx(d.t[0] ** 2, rel=1e-9, abs=1e-12)
    assert (w.df1, w.df2) == (1.0, float(df))
    assert w.p == pytest.approx(d.p[0], rel=1e-8, abs=1e-12)


def test_wald_f_adjustment_matches_formula() -> None:
    # [M] Fellegi (1980); Korn & Graubard (1990): F = (d - q + 1)/(d q) X2 on (q, d - q + 1)
    rng = np.random.default_rng(1)
    a = rng.normal(size=(4, 4))
    v = a @ a.T + np.eye(4)
    th = np.array([1.0, 1.5, 0.2, 2.0])
    cov = Covariance(th, v, 20.0)
    c = np.hstack([-np.ones((3, 1)), np.eye(3)])
    x2 = (c @ th) @ np.linalg.solve(c @ v @ c.T, c @ th)
    w = wald_equal(cov)
    assert w.chisq == pytest.approx(x2, rel=1e-12)
    assert w.f == pytest.approx((20 - 3 + 1) / (20 * 3) * x2, rel=1e-12)
    assert (w.df1, w.df2) == (3.0, 18.0)  # df2 = d - k + 2 with k = 4 groups
    assert w.p == pytest.approx(stats.f.sf(w.f, 3, 18), rel=1e-9)
    # the F does not depend on which level is the reference of the contrasts
    perm = [2, 0, 3, 1]
    w2 = wald_equal(Covariance(th[perm], v[np.ix_(perm, perm)], 20.0))
    assert w2.f == pytest.approx(w.f, rel=1e-10)


def test_wald_f_undefined_when_df_too_small() -> None:
    # [M] Korn & Graubard (1990): d - q + 1 must be positive
    cov = Covariance(np.arange(5.0), np.eye(5), 3.0)
    assert np.isnan(wald_equal(cov).f)


@pytest.mark.parametrize(("k", "linear", "quadratic"), [
    (3, [-1, 0, 1], None),
    (4, [-3, -1, 1, 3], [1, -1, -1, 1]),
    (5, [-2, -1, 0, 1, 2], [2, -1, -2, -1, 2]),
])
def test_trend_coefficients_equal_standard_tables(k: int, linear: list[int],
                                                  quadratic: list[int] | None) -> None:
    # [S] REFERENCES §13, orthogonal polynomial coefficients for equally spaced levels
    lin, quad = trend_coefficients(np.arange(1.0, k + 1))
    assert lin / lin[-1] * linear[-1] == pytest.approx(np.array(linear, float), abs=1e-12)
    if quadratic is None:
        assert quad is None
    else:
        assert quad is not None
        assert quad / quad[0] * quadratic[0] == pytest.approx(np.array(quadratic, float),
                                                              abs=1e-12)


def test_trend_unequal_spacing_orthogonalises_the_scores() -> None:
    # [C] contrasts sum to 0, are orthogonal, the linear one is the least-squares slope
    x = np.array([20.0, 35.0, 50.0, 70.0])
    lin, quad = trend_coefficients(x)
    assert quad is not None
    assert lin.sum() == pytest.approx(0, abs=1e-15) and quad.sum() == pytest.approx(0, abs=1e-12)
    assert lin @ quad == pytest.approx(0, abs=1e-12)
    y = np.array([1.0, 2.5, 2.0, 4.0])
    assert lin @ y == pytest.approx(np.polyfit(x, y, 1)[0], rel=1e-12)
    assert quad @ (x * x) == pytest.approx(1.0, rel=1e-12)  # x^2 has quadratic coefficient 1
    with pytest.raises(EstimationError, match="distinct scores"):
        trend_coefficients([1.0, 1.0, 2.0])


def test_trend_contrast_t_and_p() -> None:
    # [C] L = c'theta, SE = sqrt(c'Vc), t = L/SE on the design df (REFERENCES §13)
    v = np.diag([0.04, 0.09, 0.01])
    cov = Covariance(np.array([0.2, 0.3, 0.5]), v, 12.0)
    lin, _ = trend_coefficients([1.0, 2.0, 3.0])
    c = contrast(cov, lin)
    assert c.estimate[0] == pytest.approx(0.15)
    assert c.se[0] == pytest.approx(np.sqrt(0.25 * 0.04 + 0.25 * 0.01))
    assert c.p[0] == pytest.approx(2 * stats.t.sf(abs(c.t[0]), 12), rel=1e-9)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(0.0, 1.0), min_size=1, max_size=12))
def test_holm_and_bh_equal_statsmodels(p: list[float]) -> None:
    # [C] statsmodels.stats.multitest.multipletests (general library); Holm (1979),
    # Benjamini & Hochberg (1995)
    from statsmodels.stats.multitest import multipletests

    arr = np.array(p)
    for ours, theirs in (("holm", "holm"), ("bh", "fdr_bh")):
        expected = multipletests(arr, method=theirs)[1]
        assert adjust_p(arr, ours) == pytest.approx(expected, rel=1e-12, abs=1e-15)
    assert adjust_p(arr, "none") == pytest.approx(arr)


def test_adjust_p_keeps_nan_and_checks_name() -> None:
    # common practice, no source: an untested row takes no part in the family
    out = adjust_p([0.01, np.nan, 0.04], "holm")
    assert np.isnan(out[1]) and out[0] == pytest.approx(0.02) and out[2] == pytest.approx(0.04)
    with pytest.raises(EstimationError, match="holm"):
        adjust_p([0.1], "bonf")


# ---------------------------------------------------------------- Rao-Scott


def _unweighted_table(counts: np.ndarray) -> tuple[Dataset, Design]:
    """One row per record, equal weights, each row its own PSU (SRS)."""
    r, c = counts.shape
    rows = np.repeat(np.arange(r * c), counts.ravel())
    return (Dataset.from_arrays({"a": (rows // c + 1).astype(float),
                                 "b": (rows % c + 1).astype(float),
                                 "w": np.ones(len(rows))}), Design("w"))


def _table_test(ds: Dataset, design: Design) -> tuple[np.ndarray, np.ndarray, int, float]:
    """Return the cell shares, their covariance, n and df of the a x b table."""
    eng = domain_sums(ds, design, [])
    a = ds["a"].values.astype(np.int64) - 1
    b = ds["b"].values.astype(np.int64) - 1
    r, c = int(a.max()) + 1, int(b.max()) + 1
    inf = indicator_influence(eng.sums, a * c + b, r * c)
    cov = joint_covariance(eng.sums, [(inf, np.zeros(r * c, np.int64), np.arange(r * c))])
    return cov.estimate.reshape(r, c), cov.matrix, len(a), cov.df


def test_pearson_equals_scipy_on_lohr_table_10_1() -> None:
    # [S] Lohr (2010) Sampling: Design and Analysis, 2nd ed., Table 10.1 (cable TV x computer,
    # 119 / 188 / 88 / 105, n = 500): X2 = 2.281, p = 0.131, as
    # scipy.stats.chi2_contingency(correction=False) gives [C]
    counts = np.array([[119, 188], [88, 105]])
    p, v, n, df = _table_test(*_unweighted_table(counts))
    rs = rao_scott(p, v, n, df)
    chi2, pval, _, _ = stats.chi2_contingency(counts, correction=False)
    assert rs.pearson == pytest.approx(chi2, rel=1e-12)
    assert round(rs.pearson, 3) == 2.281 and round(pval, 3) == 0.131
    # SRS with each record its own PSU: V = (diag(p) - pp')/(n-1), so the design effects are
    # about n/(n-1) (common practice, no source)
    assert rs.mean_deff == pytest.approx(1.0, abs=0.02)
    assert rs.p == pytest.approx(pval, abs=0.01)


@settings(max_examples=30, deadline=None)
@given(st.lists(st.integers(1, 40), min_size=4, max_size=4), st.integers(0, 1000))
def test_first_order_equals_design_wald_in_2x2(counts: list[int], seed: int) -> None:
    # [M] REFERENCES §14 (Rao & Scott 1984): in a 2x2 table X2/delta_bar equals the design
    # Wald statistic theta'(H V H')^-1 theta; and X2 equals theta'(H P0 H')^-1 theta
    rng = np.random.default_rng(seed)
    ds, _ = _unweighted_table(np.array(counts).reshape(2, 2))
    n = len(ds["a"].values)
    cols = {k: ds[k].values for k in ("a", "b")}
    cols.update({"w": rng.uniform(0.5, 3.0, n), "psu": rng.integers(0, 6, n).astype(float)})
    ds = Dataset.from_arrays(cols)
    p, v, n, df = _table_test(ds, Design("w", psu="psu"))
    rs = rao_scott(p, v, n, df)
    row, col = p.sum(1), p.sum(0)
    theta = p[0, 0] - row[0] * col[0]
    h = independence_jacobian(row, col)
    p0 = np.outer(row, col).ravel()
    hvh = (h @ v @ h.T).item()
    assert rs.pearson == pytest.approx(theta**2 / (h @ ((np.diag(p0) - np.outer(p0, p0))
                                                        / n) @ h.T).item(), rel=1e-9)
    assert rs.first_f * rs.nu == pytest.approx(theta**2 / hvh, rel=1e-9)
    assert rs.deff_cv2 == pytest.approx(0.0, abs=1e-12)  # one design effect


@settings(max_examples=20, deadline=None)
@given(st.integers(0, 10_000), st.integers(2, 4), st.integers(2, 4))
def test_equal_weights_unit_psus_rao_scott_tends_to_pearson(seed: int, r: int, c: int) -> None:
    # [M] Rao & Scott (1981): under SRS the design effects are near 1 and the corrected
    # statistic near Pearson's X2/nu; with unit PSUs V = (diag(p) - pp')/(n-1)
    rng = np.random.default_rng(seed)
    n = 3000
    ds = Dataset.from_arrays({"a": rng.integers(1, r + 1, n).astype(float),
                              "b": rng.integers(1, c + 1, n).astype(float), "w": np.ones(n)})
    p, v, n_, df = _table_test(ds, Design("w"))
    rs = rao_scott(p, v, n_, df)
    assert rs.mean_deff == pytest.approx(1.0, abs=0.1)
    assert rs.deff_cv2 < 0.05
    assert rs.first_f == pytest.approx(rs.pearson / rs.nu, rel=0.1)


def test_exact_independence_gives_deff_n_over_n_minus_1() -> None:
    # [C] counts n_i m_j (p = p0 exactly): V = (diag(p0) - p0 p0')/(n-1), so D = n/(n-1) I
    counts = np.outer([3, 5, 2], [4, 1, 5])
    p, v, n, df = _table_test(*_unweighted_table(counts))
    rs = rao_scott(p, v, n, df)
    assert rs.pearson == pytest.approx(0.0, abs=1e-9)
    assert rs.mean_deff == pytest.approx(n / (n - 1), rel=1e-10)
    assert rs.deff_cv2 == pytest.approx(0.0, abs=1e-10)
    assert (rs.nu, rs.df1) == (4, pytest.approx(4.0))


def test_zero_margin_is_dropped() -> None:
    # [S] REFERENCES §14: a zero margin drops its category and reduces nu
    counts = np.array([[10, 0, 20], [15, 0, 5]])
    p, v, n, df = _table_test(*_unweighted_table(np.array([[10, 20], [15, 5]])))
    rs2 = rao_scott(p, v, n, df)
    big_p = np.insert(p, 1, 0.0, axis=1)
    idx = np.array([0, 2, 3, 5])
    big_v = np.zeros((6, 6))
    big_v[np.ix_(idx, idx)] = v
    rs3 = rao_scott(big_p, big_v, counts.sum(), df)
    assert rs3.nu == 1
    assert rs3.pearson == pytest.approx(rs2.pearson) and rs3.p == pytest.approx(rs2.p)
