"""Replicate-weight variances: exact identities with linearization and published examples."""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest
from scipy.linalg import hadamard

from wstats.decoding.columns import Dataset
from wstats.design.declared import Design
from wstats.design.replicates import replicate_variance
from wstats.estimation.estimate import estimate


def _ds(**cols: Any) -> Dataset:
    return Dataset.from_arrays({k: np.asarray(v) for k, v in cols.items()})


def _two_psu_design(seed: int, n_strata: int = 5) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    rows = 4  # rows per PSU
    st = np.repeat(np.arange(n_strata), 2 * rows)
    psu = np.tile(np.repeat([0, 1], rows), n_strata)
    w = rng.uniform(1, 5, len(st))
    y = rng.normal(3, 2, len(st)) + st
    return {"st": st, "psu": psu, "w": w, "y": y}


def _half_samples(c: dict[str, np.ndarray], rho: float) -> dict[str, np.ndarray]:
    # Hadamard matrix of order 8 (Sylvester, scipy.linalg.hadamard): replicate r keeps PSU 0 of
    # stratum h when H[r, h] = +1. Chosen PSU x (2 - rho), other x rho (REFERENCES 8).
    h = hadamard(8)
    out = {}
    for r in range(8):
        chosen = np.where(h[r, c["st"]] > 0, c["psu"] == 0, c["psu"] == 1)
        out[f"rep{r + 1}"] = c["w"] * np.where(chosen, 2.0 - rho, rho)
    return out


def _taylor_total(c: dict[str, np.ndarray]) -> float:
    t = estimate(_ds(**c), Design("w", strata="st", psu="psu"), ["y"], statistics="total")
    return float(t.frame.se[0])


def test_brr_equals_taylor_for_a_total_with_two_psus_per_stratum() -> None:
    # [C] REFERENCES 8: with 2 PSUs per stratum and a full Hadamard matrix, BRR = Taylor for a
    # total (Wolter 2007 ch. 3 [M]; Rust & Rao 1996)
    c = _two_psu_design(1)
    c.update(_half_samples(c, 0.0))
    t = estimate(_ds(**c), Design("w", replicates="rep*", replicate_method="brr"), ["y"],
                 statistics="total")
    assert t.frame.se[0] == pytest.approx(_taylor_total(c), rel=1e-12)
    assert t.design["n_replicates"] == 8
    assert t.design["variance_method"] == "replicates"
    assert t.frame.df[0] == 8  # R for BRR without strata named (documented)


@pytest.mark.parametrize("rho", [0.0, 0.3, 0.5])
def test_fay_equals_taylor_for_a_total_and_brr_at_rho_zero(rho: float) -> None:
    # [C] REFERENCES 8: BRR = Fay (any rho) = Taylor for a total (Fay & Train 1995; Judkins 1990)
    c = _two_psu_design(2)
    c.update(_half_samples(c, rho))
    d = Design("w", replicates="rep*", replicate_method="fay", fay_rho=rho)
    se = estimate(_ds(**c), d, ["y"], statistics="total").frame.se[0]
    assert se == pytest.approx(_taylor_total(c), rel=1e-12)
    if rho == 0.0:
        brr = Design("w", replicates="rep*", replicate_method="brr")
        assert se == pytest.approx(estimate(_ds(**c), brr, ["y"], statistics="total").frame.se[0],
                                   rel=1e-14)


def test_unstratified_jackknife_reproduces_linearization_of_a_total() -> None:
    # [C] delete-one jackknife, others x R/(R-1), variance (R-1)/R sum (.)^2 (REFERENCES 8)
    # equals n/(n-1) sum (z_i - zbar)^2 for a total (one stratum, unit PSUs)
    rng = np.random.default_rng(3)
    n = 12
    y, w = rng.normal(5, 2, n), rng.uniform(1, 3, n)
    reps = {f"jk{r}": np.where(np.arange(n) == r, 0.0, w * n / (n - 1)) for r in range(n)}
    ds = _ds(y=y, w=w, **reps)
    jk = estimate(ds, Design("w", replicates="jk*", replicate_method="jackknife"), ["y"],
                  statistics="total")
    lin = estimate(ds, Design("w"), ["y"], statistics="total")
    assert jk.frame.se[0] == pytest.approx(lin.frame.se[0], rel=1e-12)
    assert jk.frame.df[0] == n - 1  # R - 1 (REFERENCES 3, ABS)


def test_stratified_jackknife_factors_from_the_design() -> None:
    # [C] delete-one-PSU stratified jackknife replicate weights built here; factors
    # (n_h-1)/n_h found from the design equal linearization for a total (REFERENCES 8)
    rng = np.random.default_rng(4)
    st = np.repeat([0, 0, 0, 1, 1, 2, 2, 2, 2], 3)
    psu = np.repeat([0, 1, 2, 0, 1, 0, 1, 2, 3], 3)
    w, y = rng.uniform(1, 4, len(st)), rng.normal(0, 1, len(st))
    n_h = np.array([3, 2, 4])
    reps = {}
    for r, (h, j) in enumerate(sorted(set(zip(st.tolist(), psu.tolist(), strict=True)))):
        scale = np.where(st == h, n_h[st] / (n_h[st] - 1.0), 1.0)
        reps[f"jk{r:02d}"] = np.where((st == h) & (psu == j), 0.0, w * scale)
    ds = _ds(y=y, w=w, st=st, psu=psu, **reps)
    d = Design("w", strata="st", psu="psu", replicates="jk*", replicate_method="jackknife-strata")
    b = d.bind(ds)
    assert b.factors is not None
    assert b.factors.tolist() == pytest.approx([2 / 3] * 3 + [1 / 2] * 2 + [3 / 4] * 4)
    assert b.df == 9 - 3
    jk = estimate(ds, d, ["y"], statistics="total")
    lin = estimate(ds, Design("w", strata="st", psu="psu"), ["y"], statistics="total")
    assert jk.frame.se[0] == pytest.approx(lin.frame.se[0], rel=1e-12)


def test_abs_delete_a_group_example() -> None:
    # Australian Bureau of Statistics delete-a-group jackknife example (REFERENCES 8 [S]):
    # G = 5, estimate 500, replicates 510, 490, 505, 503, 498 -> SE sqrt(4/5 * 238) = 13.7986
    theta_r = np.array([510.0, 490.0, 505.0, 503.0, 498.0])
    v = replicate_variance(theta_r, np.array(500.0), 4 / 5, np.ones(5), "full")
    assert np.sqrt(v) == pytest.approx(13.7986, abs=5e-5)


def test_centring_on_replicate_mean() -> None:
    # variance formula of REFERENCES 8 with the mean of the replicates as centre
    theta_r = np.array([510.0, 490.0, 505.0, 503.0, 498.0])
    v = replicate_variance(theta_r, np.array(500.0), 4 / 5, np.ones(5), "mean")
    assert v == pytest.approx(4 / 5 * np.sum((theta_r - theta_r.mean()) ** 2))


@pytest.mark.parametrize(
    ("method", "scale", "extra"),
    [
        ("bootstrap", lambda r: 1 / r, {}),  # Rao & Wu (1988): 1/B (REFERENCES 8)
        ("sdr", lambda r: 4 / r, {}),  # successive difference (REFERENCES 8): 4/R
        ("custom", lambda r: 0.25, {"replicate_scale": 0.25,
                                    "replicate_factors": [1, 2, 1, 2, 1, 2]}),
    ],
)
def test_scale_rules_against_the_formula(method: str, scale: Any, extra: dict[str, Any]) -> None:
    rng = np.random.default_rng(5)
    n = 30
    y, w = rng.normal(10, 3, n), rng.uniform(1, 2, n)
    reps = {f"b{r}": w * rng.poisson(1.0, n) for r in range(6)}
    ds = _ds(y=y, w=w, **reps)
    t = estimate(ds, Design("w", replicates="b*", replicate_method=method, **extra), ["y"])
    mean = np.average(y, weights=w)
    theta_r = np.array([np.sum(reps[f"b{r}"] * y) / np.sum(reps[f"b{r}"]) for r in range(6)])
    factors = np.asarray(extra.get("replicate_factors", np.ones(6)), dtype=float)
    v = scale(6) * np.sum(factors * (theta_r - mean) ** 2)
    assert t.frame.se[0] == pytest.approx(np.sqrt(v), rel=1e-12)


def test_replicate_domain_estimates_use_replicate_domain_sums() -> None:
    # each replicate's domain mean recomputed here with numpy; BRR variance 1/R sum (.)^2
    c = _two_psu_design(6)
    c.update(_half_samples(c, 0.0))
    c["g"] = (c["y"] > 4).astype(float)
    t = estimate(_ds(**c), Design("w", replicates="rep*", replicate_method="brr"), ["y"],
                 by=["g"])
    row = t.frame[t.frame.g == 1].iloc[0]
    dom = c["g"] == 1
    theta = np.average(c["y"][dom], weights=c["w"][dom])
    theta_r = np.array([np.average(c["y"][dom], weights=c[f"rep{r}"][dom]) for r in range(1, 9)])
    assert row.estimate == pytest.approx(theta, rel=1e-13)
    assert row.se == pytest.approx(np.sqrt(np.mean((theta_r - theta) ** 2)), rel=1e-12)
