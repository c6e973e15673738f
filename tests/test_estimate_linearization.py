"""Taylor-linearization estimates checked against libraries, published formulas and examples.

Every expected value is recomputed here from an outside source: scipy/numpy/statsmodels,
Cochran (1977), Lohr (2010) worked examples, or a slow per-formula reference written below.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from wstats.decoding.columns import Dataset
from wstats.design.declared import Design
from wstats.errors import SingletonStratumError
from wstats.estimation.estimate import estimate

DATA = Path(__file__).parent / "data"


def _ds(**cols: Any) -> Dataset:
    return Dataset.from_arrays({k: np.asarray(v) for k, v in cols.items()})


def _row(table: Any, i: int = 0, **where: Any) -> pd.Series:
    f = table.frame
    for k, v in where.items():
        f = f[f[k].isna()] if v is None else f[f[k] == v]
    return f.iloc[i]


# ---------------------------------------------------------------- reductions to libraries


def test_equal_weights_srs_se_equals_scipy_sem() -> None:
    # [C] REFERENCES 1: one stratum, unit PSUs, equal weights -> SE(mean) == scipy.stats.sem
    y = np.random.default_rng(1).gamma(2.0, 3.0, 57)
    t = estimate(_ds(y=y, w=np.full(57, 4.0)), Design("w"), ["y"])
    r = _row(t)
    assert r.estimate == pytest.approx(y.mean(), rel=1e-13)
    assert r.se == pytest.approx(stats.sem(y), rel=1e-12)
    assert r.df == 56
    # with-replacement SRS deff of an equal-weight SRS is exactly 1 (our s^2 convention)
    assert r.deff == pytest.approx(1.0, rel=1e-12)
    assert r.deff_weight == pytest.approx(1.0)


def test_weighted_mean_equals_numpy_average() -> None:
    rng = np.random.default_rng(2)
    y, w = rng.normal(10, 3, 40), rng.uniform(0.5, 4, 40)
    t = estimate(_ds(y=y, w=w), Design("w"), ["y"], statistics=["mean", "total"])
    assert t.frame.estimate[0] == pytest.approx(np.average(y, weights=w), rel=1e-13)
    assert t.frame.estimate[1] == pytest.approx(np.sum(w * y), rel=1e-13)
    assert t.frame.weighted_n[0] == pytest.approx(w.sum())


def test_unit_psus_unequal_weights_equal_wls_hc1() -> None:
    # [C] REFERENCES 1: statsmodels WLS(y, 1, weights=w) HC1 standard error of the intercept
    import statsmodels.api as sm

    rng = np.random.default_rng(3)
    y, w = rng.normal(5, 2, 80), rng.uniform(1, 9, 80)
    bse = sm.WLS(y, np.ones(80), weights=w).fit(cov_type="HC1").bse[0]
    assert _row(estimate(_ds(y=y, w=w), Design("w"), ["y"])).se == pytest.approx(bse, rel=1e-10)


def test_one_stratum_clusters_equal_wls_cluster_robust() -> None:
    # [C] REFERENCES 1: cluster-robust WLS with G/(G-1) correction (K = 1 makes (N-1)/(N-K) = 1)
    import statsmodels.api as sm

    rng = np.random.default_rng(4)
    g = rng.integers(0, 12, 150)
    y, w = rng.normal(0, 1, 150) + g * 0.3, rng.uniform(1, 3, 150)
    fit = sm.WLS(y, np.ones(150), weights=w).fit(cov_type="cluster", cov_kwds={"groups": g})
    t = estimate(_ds(y=y, w=w, g=g), Design("w", psu="g"), ["y"])
    assert _row(t).se == pytest.approx(fit.bse[0], rel=1e-10)
    assert _row(t).df == 11


def test_stratified_srs_with_fpc_equals_cochran_theorem_5_3() -> None:
    # Cochran (1977) Sampling Techniques, 3rd ed., Theorem 5.3:
    # V(ybar_st) = sum W_h^2 (1 - f_h) s_h^2 / n_h
    rng = np.random.default_rng(5)
    n_h, N_h = np.array([6, 10, 4]), np.array([60.0, 400.0, 20.0])
    st = np.repeat([0, 1, 2], n_h)
    y = rng.normal(st * 2.0, 1.0 + st)
    w = (N_h / n_h)[st]
    big_w = N_h / N_h.sum()
    s2 = np.array([y[st == h].var(ddof=1) for h in range(3)])
    v = np.sum(big_w**2 * (1 - n_h / N_h) * s2 / n_h)
    t = estimate(_ds(y=y, w=w, st=st, N=N_h[st]), Design("w", strata="st", fpc="N"), ["y"])
    assert _row(t).se == pytest.approx(np.sqrt(v), rel=1e-12)


def test_srs_proportion_se_uses_n_minus_1() -> None:
    # [C] REFERENCES 1: SRS proportion under the formula: SE = sqrt(p(1-p)/(n-1))
    x = np.r_[np.ones(13), np.zeros(27)]
    t = estimate(_ds(x=x, w=np.ones(40)), Design("w"), ["x"], categorical=["x"])
    r = _row(t, level="1")
    assert r.estimate == pytest.approx(13 / 40)
    assert r.se == pytest.approx(np.sqrt(13 / 40 * 27 / 40 / 39), rel=1e-12)


def test_kish_weighting_effect() -> None:
    # [C] REFERENCES 7: w = (1, 1, 2, 4) -> deff_w = n sum w^2 / (sum w)^2 = 1.375
    t = estimate(_ds(y=[1.0, 2.0, 3.0, 5.0], w=[1.0, 1.0, 2.0, 4.0]), Design("w"), ["y"])
    assert _row(t).deff_weight == pytest.approx(1.375)


# ---------------------------------------------------------------- Lohr (2010) worked examples


def test_lohr_agsrs_mean_total_proportion() -> None:
    # Lohr (2010) Sampling: Design and Analysis, 2nd ed., ch. 2 [M] from memory, reproduced
    # exactly from data (REFERENCES section 9)
    a = pd.read_csv(DATA / "agsrs.csv")
    ds = _ds(acres92=a.acres92, w=np.full(300, 3078 / 300), N=np.full(300, 3078.0),
             small=(a.acres92 < 200_000).astype(float))
    t = estimate(ds, Design("w", fpc="N"), ["acres92"], statistics=["mean", "total"])
    assert t.frame.estimate[0] == pytest.approx(297_897.05, abs=0.005)
    assert t.frame.se[0] == pytest.approx(18_898.434, abs=0.001)
    assert t.frame.estimate[1] == pytest.approx(916_927_110, abs=1)
    assert t.frame.se[1] == pytest.approx(58_169_381, abs=1)
    p = estimate(ds, Design("w", fpc="N"), ["small"], categorical=["small"])
    assert _row(p, level="1").estimate == pytest.approx(0.51)
    assert _row(p, level="1").se == pytest.approx(0.02746, abs=5e-6)


def _agstrat() -> Dataset:
    s = pd.read_csv(DATA / "agstrat.csv")
    big_n = s.region.map({"NC": 1054, "NE": 220, "S": 1382, "W": 422}).to_numpy(float)
    return _ds(acres92=s.acres92, w=s.strwt, N=big_n, region=s.region.to_numpy(object))


def test_lohr_agstrat_stratified() -> None:
    # Lohr (2010) ch. 3 [M] from memory, reproduced exactly from data (REFERENCES section 9)
    t = estimate(_agstrat(), Design("w", strata="region", fpc="N"), ["acres92"],
                 statistics=["total", "mean"])
    assert t.frame.estimate[0] == pytest.approx(909_736_035, abs=1)
    assert t.frame.se[0] == pytest.approx(50_417_248, abs=1)
    assert t.frame.estimate[1] == pytest.approx(295_560.77, abs=0.005)
    assert t.frame.se[1] == pytest.approx(16_379.87, abs=0.005)
    t2 = estimate(_agstrat(), Design("w", strata="region"), ["acres92"], statistics="total")
    assert t2.frame.se[0] == pytest.approx(53_066_442, abs=1)  # [C] without fpc


def test_lohr_gpa_cluster() -> None:
    # Lohr (2010) ch. 5 [M] from memory, reproduced exactly from data (REFERENCES section 9)
    g = pd.read_csv(DATA / "gpa.csv")
    ds = _ds(gpa=g.gpa, wt=g.wt, suite=g.suite, N=np.full(len(g), 100.0))
    t = estimate(ds, Design("wt", psu="suite", fpc="N"), ["gpa"], statistics=["mean", "total"])
    assert t.frame.estimate[0] == pytest.approx(2.826)
    assert t.frame.se[0] == pytest.approx(0.163665, abs=5e-7)
    assert t.frame.df[0] == 4
    assert t.frame.estimate[1] == pytest.approx(1130.4)
    assert t.frame.se[1] == pytest.approx(65.466, abs=5e-4)
    t2 = estimate(ds, Design("wt", psu="suite"), ["gpa"])
    assert t2.frame.se[0] == pytest.approx(0.167917, abs=5e-7)


# ---------------------------------------------------------------- slow reference implementation


def _reference(y: np.ndarray, ok: np.ndarray, w: np.ndarray, st: np.ndarray, psu: np.ndarray,
               f: dict[int, float], total: bool) -> tuple[float, float]:
    """Mean or total and its variance by the textbook formula, one loop per stratum and PSU.

    REFERENCES section 1 (Woodruff 1971; Wolter 2007 ch. 6): u = y (total) or (y - ybar)/N,
    zero outside the domain; v = sum_h (1-f_h) n_h/(n_h-1) sum_i (z_hi - zbar_h)^2.
    """
    big_n = sum(w[k] for k in range(len(y)) if ok[k])
    if big_n == 0:
        return float("nan"), float("nan")
    t = sum(w[k] * y[k] for k in range(len(y)) if ok[k])
    est = t if total else t / big_n
    u = [(y[k] if total else (y[k] - est) / big_n) if ok[k] else 0.0 for k in range(len(y))]
    v = 0.0
    for h in sorted(set(st.tolist())):
        psus = sorted({int(psu[k]) for k in range(len(y)) if st[k] == h})
        z = [sum(w[k] * u[k] for k in range(len(y)) if st[k] == h and psu[k] == i) for i in psus]
        zbar = sum(z) / len(z)
        v += (1 - f[h]) * len(z) / (len(z) - 1) * sum((zi - zbar) ** 2 for zi in z)
    return est, v


def _design_data(seed: int) -> tuple[Dataset, dict[str, np.ndarray]]:
    rng = np.random.default_rng(seed)
    n = 240
    st = rng.integers(0, 4, n)
    psu = rng.integers(0, 3 + st, n)  # 3..6 PSUs per stratum, ids repeat across strata
    # domain 'g' concentrated so that some PSUs hold no member of a cell
    g = np.where(psu == 0, 1, rng.integers(1, 4, n)).astype(float)
    g[rng.random(n) < 0.05] = np.nan
    w = rng.uniform(1, 6, n)
    big_n = np.array([40.0, 50.0, 60.0, 70.0])[st]
    cols: dict[str, np.ndarray] = {"w": w, "st": st, "psu": psu, "g": g, "N": big_n}
    for j in range(5):
        y = rng.normal(j, 1 + j, n) + st
        y[rng.random(n) < 0.1 * j] = np.nan
        cols[f"y{j}"] = y
    return _ds(**cols), cols


@pytest.mark.parametrize("fpc", [None, "N"])
def test_many_variables_many_domains_equal_reference(fpc: str | None) -> None:
    # [C] one vectorised pass == the per-formula reference to 1e-12 relative
    ds, c = _design_data(11)
    t = estimate(ds, Design("w", strata="st", psu="psu", fpc=fpc), [f"y{j}" for j in range(5)],
                 statistics=["mean", "total"], by=["g"])
    st, psu = c["st"], c["psu"]
    f = {h: (0.0 if fpc is None else float(len(set(psu[st == h])) / c["N"][st == h][0]))
         for h in range(4)}
    assert len(t.frame) == 5 * 2 * 4
    for _, r in t.frame.iterrows():
        y = c[r.variable]
        dom = np.ones(len(y), bool) if r.g is None else (c["g"] == r.g)
        ok = dom & ~np.isnan(y)
        est, v = _reference(np.nan_to_num(y), ok, c["w"], st, psu, f, r.statistic == "total")
        assert r.estimate == pytest.approx(est, rel=1e-12)
        assert r.se**2 == pytest.approx(v, rel=1e-12)
        assert r.n == ok.sum()


@pytest.mark.parametrize("where", [None, "y1 > 0"])
def test_rows_stored_in_psu_order_equal_reference(where: str | None) -> None:
    # [C] rows sorted by stratum and PSU are summed segment by segment (the other path of the
    # row pass); same reference, 1e-12 relative; with `where`, the rows outside are skipped
    ds0, c0 = _design_data(12)
    order = np.lexsort((c0["psu"], c0["st"]))
    c = {k: v[order] for k, v in c0.items()}
    ds = _ds(**c)
    t = estimate(ds, Design("w", strata="st", psu="psu"), [f"y{j}" for j in range(5)],
                 statistics=["mean", "total"], where=where)
    inside = np.ones(len(c["w"]), bool) if where is None else np.nan_to_num(c["y1"]) > 0
    inside &= ~np.isnan(c["y1"]) if where is not None else True
    f = dict.fromkeys(range(4), 0.0)
    assert len(t.frame) == 5 * 2
    for _, r in t.frame.iterrows():
        y = c[r.variable]
        ok = inside & ~np.isnan(y)
        est, v = _reference(np.nan_to_num(y), ok, c["w"], c["st"], c["psu"], f,
                            r.statistic == "total")
        assert r.estimate == pytest.approx(est, rel=1e-12)
        assert r.se**2 == pytest.approx(v, rel=1e-12)


@pytest.mark.parametrize("tile", [65_536, 37, 1])
def test_row_sums_and_group_sums_equal_dense_products(tile: int,
                                                      monkeypatch: pytest.MonkeyPatch) -> None:
    # common practice, no source: both row-pass paths (whole, and in row tiles that split
    # buckets) and the group sums against dense matrix products built from their definitions
    from wstats.decoding import columns as _column
    from wstats.estimation.sums import GroupSum, _RowSums

    monkeypatch.setattr(_column, "ROW_TILE", tile)
    rng = np.random.default_rng(5)
    n, nb = 500, 7
    w, x = rng.uniform(1, 3, n), rng.normal(size=n)
    for inside in (np.sort(rng.integers(0, nb, n)), rng.integers(0, nb, n)):
        for outside in (rng.random(n) < 0.2, np.zeros(n, bool)):
            bucket = np.where(outside, nb, inside)  # n_buckets marks rows outside
            dense = np.zeros((nb, n))
            dense[bucket[~outside], np.flatnonzero(~outside)] = w[~outside]
            got = _RowSums(bucket, w, nb, n).weighted(x)
            assert np.allclose(got, dense @ x, rtol=1e-13)
    inside = np.sort(rng.integers(0, nb, n))
    rows = _RowSums(inside, w, nb, n)
    assert rows.starts is not None  # sorted: the segment path was taken
    target, source = rng.integers(0, 4, 30), rng.integers(0, 9, 30)
    m = np.zeros((4, 9))
    np.add.at(m, (target, source), 1.0)
    block = rng.normal(size=(9, 3))
    g = GroupSum(target, source, 4)
    assert np.allclose(g @ block, m @ block, rtol=1e-13)
    assert np.allclose(g @ block[:, 0], m @ block[:, 0], rtol=1e-13)


@pytest.mark.parametrize("tile", [262_144, 13, 1])
def test_buckets_are_ranks_of_occupied_psu_cell_keys(tile: int,
                                                     monkeypatch: pytest.MonkeyPatch) -> None:
    # common practice, no source: a row's bucket is the rank of its (PSU, cell) key among the
    # keys of rows inside the population domain; rows outside get one past the last bucket
    from wstats.decoding import columns as _column
    from wstats.estimation.domains import no_cell
    from wstats.estimation.sums import _buckets

    monkeypatch.setattr(_column, "ROW_TILE", tile)
    rng = np.random.default_rng(8)
    n, n_psu = 400, 9
    psu = rng.integers(0, n_psu, n).astype(np.int32)
    for cell, n_cells in ((rng.integers(-1, 4, n), 4), (no_cell(n), 0)):
        nd = n_cells + 1
        for inside in (rng.random(n) < 0.8, np.ones(n, bool)):
            keys, bucket = _buckets(psu, cell, inside, nd, n_psu)
            key = psu.astype(np.int64) * nd + cell + 1
            want_keys = np.unique(key[inside])
            want = np.where(inside, np.searchsorted(want_keys, key), len(want_keys))
            assert keys.tolist() == want_keys.tolist()
            assert bucket.tolist() == want.tolist()
            shared = nd == 1 and inside.all()
            assert np.shares_memory(bucket, psu) == shared  # no by, all inside: the PSU index


@pytest.mark.parametrize("tile", [262_144, 37, 1])
def test_order_check_sees_a_step_down_at_a_tile_boundary(tile: int,
                                                         monkeypatch: pytest.MonkeyPatch) -> None:
    # common practice, no source: the segment-sum path needs rows in bucket order; the check
    # runs in tiles that overlap by a row, so a step down between two tiles is not missed
    from wstats.decoding import columns as _column
    from wstats.estimation.sums import _ascending

    monkeypatch.setattr(_column, "ROW_TILE", tile)
    a = np.repeat(np.arange(10, dtype=np.int32), 10)
    assert _ascending(a)
    for at in (1, 36, 37, 38, 99):
        b = a.copy()
        b[at] = b[at - 1] - 1
        assert not _ascending(b)
    assert _ascending(a[:0]) and _ascending(a[:1])


@settings(max_examples=80, deadline=None)
@given(rows=st.lists(st.tuples(st.integers(0, 5), st.integers(-1, 3), st.booleans()),
                     min_size=1, max_size=60))
def test_buckets_property_every_inside_row_in_the_bucket_of_its_key(
        rows: list[tuple[int, int, bool]]) -> None:
    # common practice, no source: rows share a bucket exactly when they share (PSU, cell);
    # buckets are numbered in key order; rows outside the population domain are in none
    from wstats.estimation.sums import _buckets

    psu = np.array([p for p, _, _ in rows], dtype=np.int32)
    cell = np.array([c for _, c, _ in rows])
    inside = np.array([i for _, _, i in rows])
    keys, bucket = _buckets(psu, cell, inside, 5, 6)
    occupied = sorted({p * 5 + c + 1 for p, c, i in rows if i})
    assert keys.tolist() == occupied
    for (p, c, i), b in zip(rows, bucket.tolist(), strict=True):
        assert b == (occupied.index(p * 5 + c + 1) if i else len(occupied))


def test_bucket_keys_do_not_overflow_int32_psu_codes() -> None:
    # common practice, no source: PSU x domain keys past 2**31 are computed in int64
    from wstats.estimation.sums import _buckets

    psu = np.array([2**30, 5], dtype=np.int32)
    keys, bucket = _buckets(psu, np.array([2, -1]), np.ones(2, bool), 4, 2**30 + 1)
    assert keys.tolist() == [5 * 4, 2**30 * 4 + 3]
    assert bucket.tolist() == [1, 0]


def test_domain_keeps_full_design_unlike_subsetting() -> None:
    # REFERENCES 2 (NCHS tutorial; Graubard & Korn 1996): u = 0 outside the domain, all PSUs
    # kept. Subsetting drops PSUs without domain members and gives a different (smaller) SE.
    ds, c = _design_data(12)
    design = Design("w", strata="st", psu="psu")
    full = _row(estimate(ds, design, ["y1"], by=["g"]), g=2)
    keep = c["g"] == 2  # PSU 0 of every stratum holds no member of this domain
    sub = _ds(**{k: v[keep] for k, v in c.items()})
    naive = _row(estimate(sub, design, ["y1"]))
    f0 = {h: 0.0 for h in range(4)}
    ok = keep & ~np.isnan(c["y1"])
    est, v = _reference(np.nan_to_num(c["y1"]), ok, c["w"], c["st"], c["psu"], f0, False)
    assert full.estimate == pytest.approx(naive.estimate, rel=1e-12)  # same point estimate
    assert full.se == pytest.approx(np.sqrt(v), rel=1e-12)
    assert abs(full.se - naive.se) > 1e-3 * full.se
    n_psu = len(set(zip(c["st"].tolist(), c["psu"].tolist(), strict=True)))
    assert full.df == n_psu - 4 == 14  # full-design df (PSUs - strata) by default


def test_where_condition_equals_by_cell() -> None:
    ds, _ = _design_data(13)
    design = Design("w", strata="st", psu="psu")
    by = _row(estimate(ds, design, ["y2"], by=["g"]), g=2)
    wh = _row(estimate(ds, design, ["y2"], where="g == 2"))
    assert wh.estimate == pytest.approx(by.estimate, rel=1e-13)
    assert wh.se == pytest.approx(by.se, rel=1e-12)


def test_domain_df_counts_only_strata_and_psus_with_members() -> None:
    # REFERENCES 3: agencies count only strata/PSUs with domain observations (option)
    ds, c = _design_data(14)
    t = estimate(ds, Design("w", strata="st", psu="psu", domain_df="domain"), ["y0"], by=["g"])
    for _, r in t.frame.iterrows():
        dom = np.ones(240, bool) if r.g is None else (c["g"] == r.g)
        ok = dom & ~np.isnan(c["y0"])
        pairs = {(int(s), int(p)) for s, p in zip(c["st"][ok], c["psu"][ok], strict=True)}
        assert r.df == len(pairs) - len({s for s, _ in pairs})
    assert t.settings["df_rule"] == "domain"


# ---------------------------------------------------------------- singleton strata by hand


def _singleton_data() -> tuple[Dataset, np.ndarray, np.ndarray]:
    # strata A: 2 PSUs, B: 1 PSU, C: 3 PSUs; one row per PSU, weight 2 -> z = 2 y
    y = np.array([1.0, 4.0, 10.0, 2.0, 3.0, 7.0])
    st = np.array(["A", "A", "B", "C", "C", "C"], dtype=object)
    return _ds(y=y, w=np.full(6, 2.0), st=st, psu=np.arange(6)), 2 * y, st


def _ss(z: np.ndarray) -> float:
    return float(len(z) / (len(z) - 1) * np.sum((z - z.mean()) ** 2))


def test_singleton_treatments_by_hand() -> None:
    ds, z, st = _singleton_data()
    za, zb, zc = z[st == "A"], z[st == "B"], z[st == "C"]

    def se(treatment: str) -> float:
        d = Design("w", strata="st", psu="psu", singleton=treatment)
        return float(estimate(ds, d, ["y"], statistics="total").frame.se[0])

    with pytest.raises(SingletonStratumError, match=r"\('B'\)"):
        se("fail")
    # certainty: the singleton stratum contributes nothing (REFERENCES 4)
    assert se("certainty") ** 2 == pytest.approx(_ss(za) + _ss(zc), rel=1e-12)
    # center: (z_B - mean of all PSU totals)^2, an ad hoc heuristic (REFERENCES 4)
    center = _ss(za) + _ss(zc) + (zb[0] - z.mean()) ** 2
    assert se("center") ** 2 == pytest.approx(center, rel=1e-12)
    # collapse: B pooled with the next stratum in sort order (C) -> strata A, {B, C}
    assert se("collapse") ** 2 == pytest.approx(_ss(za) + _ss(np.r_[zb, zc]), rel=1e-12)


# ---------------------------------------------------------------- jackknife identity for totals


def test_total_equals_brute_force_stratified_jackknife() -> None:
    # [C] for a total the delete-one-PSU stratified jackknife equals linearization exactly for
    # any n_h (the total is linear): theta_(hj) - theta = n_h/(n_h-1) (zbar_h - z_hj).
    # Jackknife variance per REFERENCES 8 (Wolter 2007 ch. 4 [M]).
    ds, c = _design_data(15)
    y = np.nan_to_num(c["y3"])
    st, psu, w = c["st"], c["psu"], c["w"]
    theta = np.sum(w * y)
    v = 0.0
    for h in range(4):
        ids = sorted(set(psu[st == h].tolist()))
        for j in ids:
            rw = w.copy()
            rw[(st == h) & (psu == j)] = 0.0
            rw[(st == h) & (psu != j)] *= len(ids) / (len(ids) - 1)
            v += (len(ids) - 1) / len(ids) * (np.sum(rw * y) - theta) ** 2
    t = estimate(ds, Design("w", strata="st", psu="psu"), ["y3"], statistics="total")
    assert t.frame.estimate[0] == pytest.approx(theta, rel=1e-12)
    assert t.frame.se[0] ** 2 == pytest.approx(v, rel=1e-10)


# ---------------------------------------------------------------- degenerate inputs


def test_all_missing_and_constant_variables_do_not_crash() -> None:
    d = _ds(y=np.full(6, np.nan), c=np.full(6, 3.0), w=np.ones(6))
    t = estimate(d, Design("w"), ["y", "c"])
    miss, const = t.frame.iloc[0], t.frame.iloc[1]
    assert miss.n == 0 and np.isnan(miss.estimate)
    assert "empty" in miss["flags"] and miss.suppress
    assert const.estimate == 3.0 and const.se == 0.0
    assert "se-zero" in const["flags"]
