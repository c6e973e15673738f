"""The covariance engine: one covariance matrix for many estimates of one design.

Checks: the diagonal is the variance ``estimate`` reports (same design, same domains) for
means, proportions, totals and ratios, under linearization (strata, PSUs, FPC, singleton
treatments) and replicate weights; the SE of a difference from c'Vc equals the SE computed
from the difference's own influence values by the textbook formula (REFERENCES §1, §12);
a delete-one-PSU jackknife done by brute force; linearization and replicate designs agree.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from wstats import Dataset, Design, estimate
from wstats.estimation.contrasts import differences
from wstats.estimation.covariance import Covariance, joint_covariance
from wstats.estimation.influence import (
    domain_sums,
    mean_influence,
    proportion_influence,
    ratio_of_influence,
    total_of_influence,
)


def _data(seed: int, n: int = 240, strata: int = 4) -> dict[str, np.ndarray]:
    """Invented test data: strata, PSUs (some PSUs without a member of a group), groups."""
    rng = np.random.default_rng(seed)
    st_ = rng.integers(0, strata, n)
    psu = rng.integers(0, 3 + st_ % 3, n)
    g = np.where(psu == 0, 1, rng.integers(1, 4, n)).astype(float)
    g[rng.random(n) < 0.05] = np.nan
    y = rng.normal(2.0, 1.0, n) + st_ + 0.5 * g
    y[rng.random(n) < 0.1] = np.nan
    x = rng.uniform(1.0, 3.0, n)
    c = rng.integers(1, 4, n).astype(float)
    c[rng.random(n) < 0.08] = np.nan
    w = rng.uniform(1.0, 6.0, n)
    big_n = np.array([40.0, 50.0, 60.0, 70.0, 80.0, 90.0])[st_ % 6]
    return {"w": w, "st": st_, "psu": psu, "g": g, "y": y, "x": x, "c": c, "N": big_n}


def _grid(d: int, v: int) -> tuple[np.ndarray, np.ndarray]:
    dd, vv = np.meshgrid(np.arange(d), np.arange(v), indexing="ij")
    return dd.ravel(), vv.ravel()


@pytest.mark.parametrize("fpc", [None, "N"])
@pytest.mark.parametrize("singleton", ["fail", "center", "certainty", "collapse"])
def test_diagonal_equals_estimate_variances(fpc: str | None, singleton: str) -> None:
    # [C] the diagonal of V is the variance the estimate table reports, to rounding
    cols = _data(3)
    if singleton != "fail":  # make stratum 3 a one-PSU stratum
        cols["psu"] = np.where(cols["st"] == 3, 0, cols["psu"])
    ds = Dataset.from_arrays(cols)
    design = Design("w", strata="st", psu="psu", fpc=fpc, singleton=singleton)
    eng = domain_sums(ds, design, ["g"])
    sums = eng.sums
    nd = sums.n_domains
    table = estimate(ds, design, ["y", "c"], statistics=["mean", "total"], by=["g"],
                     ratios=[("y", "x")]).frame
    prop = estimate(ds, design, ["c"], statistics="proportion", by=["g"],
                    categorical=["c"]).frame
    y, x, c = (eng.column(ds, k) for k in ("y", "x", "c"))
    labels, pinf = proportion_influence(sums, c)
    checks: list[tuple[Any, Any]] = [
        (mean_influence(sums, y), table.query("variable == 'y' and statistic == 'mean'")),
        (total_of_influence(sums, y), table.query("variable == 'y' and statistic == 'total'")),
        (ratio_of_influence(sums, y, x), table.query("statistic == 'ratio'")),
        (pinf, prop),
    ]
    for inf, rows in checks:
        dom, col = _grid(nd, inf.estimate.shape[1])
        cov = joint_covariance(sums, [(inf, dom, col)])
        assert cov.estimate == pytest.approx(rows["estimate"].to_numpy(), rel=1e-12)
        assert np.diag(cov.matrix) == pytest.approx(rows["se"].to_numpy() ** 2, rel=1e-10,
                                                    abs=1e-300)
    assert labels == ["1", "2", "3"]


def test_diagonal_equals_estimate_variances_replicates() -> None:
    # [C] replicate designs: the diagonal is the variance estimate() gives, both centrings
    cols = _data(5)
    rng = np.random.default_rng(9)
    rep = cols["w"][:, None] * rng.poisson(1.0, (len(cols["w"]), 30))
    cols.update({f"r{k}": rep[:, k] for k in range(30)})
    ds = Dataset.from_arrays(cols)
    for centre in ("full", "mean"):
        design = Design("w", replicates="r*", replicate_method="bootstrap",
                        replicate_center=centre)
        eng = domain_sums(ds, design, ["g"])
        frame = estimate(ds, design, ["y", "c"], by=["g"], categorical=["c"]).frame
        for inf, var in ((mean_influence(eng.sums, eng.column(ds, "y")), "y"),
                         (proportion_influence(eng.sums, eng.column(ds, "c"))[1], "c")):
            dom, col = _grid(eng.sums.n_domains, inf.estimate.shape[1])
            cov = joint_covariance(eng.sums, [(inf, dom, col)])
            se = frame.loc[frame["variable"] == var, "se"].to_numpy()
            assert np.sqrt(np.diag(cov.matrix)) == pytest.approx(se, rel=1e-10)
            assert cov.df == 29.0


def _textbook_variance(u: np.ndarray, w: np.ndarray, stratum: np.ndarray, psu: np.ndarray
                       ) -> float:
    """v = sum_h n_h/(n_h-1) sum_i (z_hi - zbar_h)^2 with z_hi = sum w u (REFERENCES §1)."""
    v = 0.0
    for h in np.unique(stratum):  # a slow, plain reference: loops over strata and PSUs
        ids = np.unique(psu[stratum == h])
        z = np.array([np.sum((w * u)[(stratum == h) & (psu == i)]) for i in ids])
        v += len(z) / (len(z) - 1) * np.sum((z - z.mean()) ** 2)
    return float(v)


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 10_000), a=st.integers(1, 3), b=st.integers(1, 3))
def test_difference_se_from_cvc_equals_own_influence(seed: int, a: int, b: int) -> None:
    # [C] REFERENCES §12: the difference of two domain means has influence u_B - u_A, with
    # u_d = 1[d](y - ybar_d)/N_d (Woodruff 1971; Wolter 2007 ch. 6, from memory); its
    # variance by the §1 formula equals c'Vc from the engine
    cols = _data(seed, n=120)
    ds = Dataset.from_arrays(cols)
    eng = domain_sums(ds, Design("w", strata="st", psu="psu"), ["g"])
    inf = mean_influence(eng.sums, eng.column(ds, "y"))
    cov = joint_covariance(eng.sums, [(inf, np.array([a, b]), np.zeros(2, np.int64))])
    se = differences(cov, [0], [1]).se[0]
    y, w = cols["y"], cols["w"]
    u = np.zeros(len(y))
    for level, sign in ((a, -1.0), (b, 1.0)):
        inside = (cols["g"] == level) & ~np.isnan(y)
        big_n = w[inside].sum()
        mean = (w * np.nan_to_num(y))[inside].sum() / big_n
        u += sign * np.where(inside, np.nan_to_num(y) - mean, 0.0) / big_n
    expected = np.sqrt(_textbook_variance(u, w, cols["st"], cols["psu"]))
    assert se == pytest.approx(expected, rel=1e-9, abs=1e-12)


def _jackknife_difference(cols: dict[str, np.ndarray], stat: str) -> tuple[float, float]:
    """Brute force: drop each PSU in turn, reweight its stratum, recompute the difference.

    Stratified delete-one-PSU jackknife, v = sum_h (n_h-1)/n_h sum_j (theta_hj - theta)^2
    (REFERENCES §8; Wolter 2007 ch. 4, from memory). The difference is group 2 - group 1.
    """
    y, w, g, s, p = (cols[k] for k in ("y", "w", "g", "st", "psu"))
    ok = ~np.isnan(y)

    def theta(weights: np.ndarray) -> float:
        vals = []
        for level in (1.0, 2.0):
            inside = ok & (g == level)
            tot = np.sum((weights * np.nan_to_num(y))[inside])
            vals.append(tot if stat == "total" else tot / np.sum(weights[inside]))
        return vals[1] - vals[0]

    full = theta(w)
    v = 0.0
    for h in np.unique(s):  # one replicate per PSU: loops over PSUs, the point of the test
        ids = np.unique(p[s == h])
        for i in ids:
            wr = w.copy()
            wr[s == h] *= len(ids) / (len(ids) - 1)
            wr[(s == h) & (p == i)] = 0.0
            v += (len(ids) - 1) / len(ids) * (theta(wr) - full) ** 2
    return full, v


@pytest.mark.parametrize("stat", ["total", "mean"])
def test_difference_se_against_brute_force_jackknife(stat: str) -> None:
    # [C] a difference of totals is linear: the jackknife equals linearization exactly; for
    # means (ratios) the two agree to first order (Wolter 2007 ch. 4, from memory): here
    # within 5 % on 30 PSUs
    cols = _data(21, n=600, strata=6)
    ds = Dataset.from_arrays(cols)
    eng = domain_sums(ds, Design("w", strata="st", psu="psu"), ["g"])
    col = eng.column(ds, "y")
    inf = total_of_influence(eng.sums, col) if stat == "total" else mean_influence(eng.sums, col)
    cov = joint_covariance(eng.sums, [(inf, np.array([1, 2]), np.zeros(2, np.int64))])
    diff = differences(cov, [0], [1])
    full, v = _jackknife_difference(cols, stat)
    assert diff.estimate[0] == pytest.approx(full, rel=1e-12)
    if stat == "total":
        assert diff.se[0] ** 2 == pytest.approx(v, rel=1e-10)
    else:
        assert diff.se[0] ** 2 == pytest.approx(v, rel=0.05)


def test_replicate_covariance_equals_brute_force_jackknife() -> None:
    # [C] the same jackknife, given to wstats as replicate weights (method jackknife-strata),
    # gives exactly the brute-force variance of the difference of means
    cols = _data(21, n=600, strata=6)
    s, p, w = cols["st"], cols["psu"], cols["w"]
    reps = []
    for h in np.unique(s):  # one replicate per PSU
        ids = np.unique(p[s == h])
        for i in ids:
            wr = w.copy()
            wr[s == h] *= len(ids) / (len(ids) - 1)
            wr[(s == h) & (p == i)] = 0.0
            reps.append(wr)
    cols.update({f"j{k:03d}": r for k, r in enumerate(reps)})
    ds = Dataset.from_arrays(cols)
    design = Design("w", strata="st", psu="psu", replicates="j*",
                    replicate_method="jackknife-strata")
    eng = domain_sums(ds, design, ["g"])
    inf = mean_influence(eng.sums, eng.column(ds, "y"))
    cov = joint_covariance(eng.sums, [(inf, np.array([1, 2]), np.zeros(2, np.int64))])
    _, v = _jackknife_difference(cols, "mean")
    assert differences(cov, [0], [1]).se[0] ** 2 == pytest.approx(v, rel=1e-10)


def test_covariance_of_overlapping_domains_is_not_zero() -> None:
    # [C] REFERENCES §12: domains sharing PSUs covary; population vs a cell covary positively
    cols = _data(8)
    ds = Dataset.from_arrays(cols)
    eng = domain_sums(ds, Design("w", strata="st", psu="psu"), ["g"])
    inf = mean_influence(eng.sums, eng.column(ds, "y"))
    cov = joint_covariance(eng.sums, [(inf, np.arange(4), np.zeros(4, np.int64))])
    assert cov.matrix[0, 1] > 0
    assert np.allclose(cov.matrix, cov.matrix.T, rtol=1e-12)
    assert np.linalg.eigvalsh(cov.matrix).min() > -1e-12 * np.abs(cov.matrix).max()


def test_combine_and_transform_agree() -> None:
    # [C] c'(A V A')c == (A'c)' V (A'c): age adjustment then differences is one contrast
    v = np.array([[4.0, 1.0, 0.5], [1.0, 3.0, -0.2], [0.5, -0.2, 2.0]])
    cov = Covariance(np.array([1.0, 2.0, 4.0]), v, 10.0)
    a = np.array([[0.5, 0.5, 0.0], [0.0, 0.3, 0.7]])
    c = np.array([-1.0, 1.0])
    est, se = cov.transform(a).combine(c)
    assert float(est) == pytest.approx(float(c @ a @ cov.estimate))
    assert float(se) ** 2 == pytest.approx(float((c @ a) @ v @ (c @ a)))


def test_domain_without_valid_values_gives_nan_row_and_column() -> None:
    # common practice, no source: an estimate that cannot be made has no covariance
    cols = _data(4)
    cols["y"] = np.where(cols["g"] == 3, np.nan, cols["y"])
    ds = Dataset.from_arrays(cols)
    eng = domain_sums(ds, Design("w", strata="st", psu="psu"), ["g"])
    inf = mean_influence(eng.sums, eng.column(ds, "y"))
    cov = joint_covariance(eng.sums, [(inf, np.array([1, 2, 3]), np.zeros(3, np.int64))])
    assert np.isnan(cov.estimate[2])
    assert np.isnan(cov.matrix[2]).all() and np.isnan(cov.matrix[:, 2]).all()
    assert np.isfinite(cov.matrix[:2, :2]).all()


def test_row_tiles_give_the_same_covariance(monkeypatch: pytest.MonkeyPatch) -> None:
    # common practice, no source: a pass in tiles of a few rows equals one pass
    from wstats.decoding import columns

    cols = _data(12)
    ds = Dataset.from_arrays(cols)
    design = Design("w", strata="st", psu="psu")

    def run() -> np.ndarray:
        eng = domain_sums(ds, design, ["g"])
        _, inf = proportion_influence(eng.sums, eng.column(ds, "c"))
        dom, col = _grid(eng.sums.n_domains, inf.estimate.shape[1])
        return joint_covariance(eng.sums, [(inf, dom, col)]).matrix

    whole = run()
    monkeypatch.setattr(columns, "ROW_TILE", 7)
    assert run() == pytest.approx(whole, rel=1e-12, abs=1e-15)


def test_psu_tiles_give_the_same_covariance(monkeypatch: pytest.MonkeyPatch) -> None:
    # common practice, no source: the dense PSU block made a few PSUs at a time
    from wstats.estimation import covariance

    cols = _data(13)
    ds = Dataset.from_arrays(cols)
    eng = domain_sums(ds, Design("w", strata="st", psu="psu", singleton="center"), ["g"])
    inf = mean_influence(eng.sums, eng.column(ds, "y"))
    picks = [(inf, np.arange(4), np.zeros(4, np.int64))]
    whole = joint_covariance(eng.sums, picks).matrix
    monkeypatch.setattr(covariance, "_CELLS", 8)
    assert joint_covariance(eng.sums, picks).matrix == pytest.approx(whole, rel=1e-12)
