"""Proportions, quantiles, domains by level, reasons, and the table layout."""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest
from statsmodels.stats.proportion import proportion_confint

from wstats.decoding.columns import Dataset, DecodedColumn
from wstats.decoding.reasons import DONT_KNOW, REFUSED, SKIPPED, VALID, Reasons
from wstats.design.declared import Design
from wstats.estimation.estimate import estimate
from wstats.estimation.intervals import t_quantile
from wstats.estimation.results import ESTIMATE_COLUMNS


def _ds(**cols: Any) -> Dataset:
    return Dataset.from_arrays({k: np.asarray(v) for k, v in cols.items()})


def _with(ds: Dataset, name: str, **changes: Any) -> Dataset:
    cols = dict(ds.columns)
    cols[name] = cols[name].replace(**changes)
    return Dataset(cols, ds.vocabulary, ds.n_rows, ds.source)


# ---------------------------------------------------------------- proportions


def test_levels_in_label_order_then_unlabelled_and_empty_level_is_zero() -> None:
    x = np.array([2.0, 2.0, 1.0, 5.0, 1.0, 2.0, 1.0, 2.0])
    ds = _with(_ds(x=x, w=np.ones(8)), "x", kind="categorical",
               value_labels={2.0: "No", 1.0: "Yes", 3.0: "Unsure"})
    f = estimate(ds, Design("w"), ["x"]).frame
    assert f.level.tolist() == ["No", "Yes", "Unsure", "5"]
    assert f.estimate.tolist() == pytest.approx([4 / 8, 3 / 8, 0.0, 1 / 8])
    assert f.estimate.sum() == pytest.approx(1.0)
    # a level with no cases: p = 0, one-sided Clopper-Pearson on n (n* = n, df factor 1 since
    # df = n - 1): equals statsmodels proportion_confint(0, n, method="beta") (REFERENCES 5)
    low, high = proportion_confint(0, 8, alpha=0.05, method="beta")
    assert (f.ci_low[2], f.ci_high[2]) == pytest.approx((low, high), abs=1e-12)
    assert "p-at-0-or-1" in f["flags"][2]


def test_korn_graubard_on_srs_equals_clopper_pearson_on_effective_n() -> None:
    # Korn & Graubard (1998) [S idea, M formula], REFERENCES 5: SRS with unit PSUs gives
    # v = p(1-p)/(n-1) so n* = n-1 and, with df = n-1, n*_df = n*: the interval is
    # Clopper-Pearson(p (n-1), n-1) == statsmodels proportion_confint(method="beta")
    x = np.r_[np.ones(11), np.zeros(29)]
    f = estimate(_ds(x=x, w=np.full(40, 3.0)), Design("w"), ["x"], categorical=["x"]).frame
    r = f[f.level == "1"].iloc[0]
    low, high = proportion_confint(11 / 40 * 39, 39, alpha=0.05, method="beta")
    assert (r.ci_low, r.ci_high) == pytest.approx((low, high), rel=1e-9)
    assert r.n_eff == pytest.approx(39.0)
    assert r.deff == pytest.approx(40 / 39)  # v / (p(1-p)/n), documented denominator


def test_other_interval_methods_are_used() -> None:
    x = np.r_[np.ones(11), np.zeros(29)]
    ds = _ds(x=x, w=np.ones(40))
    t = estimate(ds, Design("w"), ["x"], categorical=["x"], proportion_ci="wald")
    r = t.frame.iloc[1]
    half = float(t_quantile(39, 0.95)) * r.se
    assert (r.ci_low, r.ci_high) == pytest.approx((r.estimate - half, r.estimate + half))
    assert t.settings["proportion_ci"] == "wald"


def test_text_variable_proportions() -> None:
    s = np.array(["b", "a", "b", "c", "b", "a"], dtype=object)
    f = estimate(_ds(s=s, w=np.ones(6)), Design("w"), ["s"]).frame
    assert f.level.tolist() == ["a", "b", "c"]
    assert f.estimate.tolist() == pytest.approx([2 / 6, 3 / 6, 1 / 6])


# ---------------------------------------------------------------- quantiles


def test_quantile_check_values() -> None:
    # [C] REFERENCES 6: y = (10,20,30,40), w = (1,2,3,4): Q(.3)=20, Q(.6)=30, Q(.61)=40
    ds = _ds(y=[10.0, 20.0, 30.0, 40.0], w=[1.0, 2.0, 3.0, 4.0])
    f = estimate(ds, Design("w"), ["y"], statistics="quantile", quantiles=(0.3, 0.6, 0.61)).frame
    assert f.estimate.tolist() == [20.0, 30.0, 40.0]
    assert f.p.tolist() == [0.3, 0.6, 0.61]


def test_quantiles_by_domain_equal_numpy_inverted_cdf() -> None:
    # [C] REFERENCES 6 (Hyndman & Fan 1996): Q(p) = min{y : F(y) >= p} ==
    # numpy.quantile(y, p, weights=w, method="inverted_cdf")
    rng = np.random.default_rng(7)
    n = 300
    y = np.round(rng.gamma(2, 5, n), 1)  # ties on purpose
    w, g = rng.uniform(0.5, 3, n), rng.integers(0, 3, n).astype(float)
    probs = (0.1, 0.25, 0.5, 0.9)
    f = estimate(_ds(y=y, w=w, g=g), Design("w"), ["y"], statistics="quantile", by=["g"],
                 quantiles=probs).frame
    for _, r in f.iterrows():
        dom = np.ones(n, bool) if r.g is None else g == r.g
        expect = np.quantile(y[dom], r.p, weights=w[dom], method="inverted_cdf")
        assert r.estimate == expect


def test_woodruff_interval_by_hand() -> None:
    # Woodruff (1952) [S], REFERENCES 6: SE_F from the proportion 1(y <= q) (SRS: sqrt(F(1-F)
    # /(n-1)), REFERENCES 1), [p -/+ t SE_F] mapped back through numpy inverted_cdf quantiles
    rng = np.random.default_rng(8)
    n = 200
    y = rng.normal(50, 10, n)
    w = np.ones(n)
    r = estimate(_ds(y=y, w=w), Design("w"), ["y"], statistics="quantile").frame.iloc[0]
    q = np.quantile(y, 0.5, method="inverted_cdf")
    big_f = np.mean(y <= q)
    se_f = np.sqrt(big_f * (1 - big_f) / (n - 1))
    t = float(t_quantile(n - 1, 0.95))
    low = np.quantile(y, 0.5 - t * se_f, method="inverted_cdf")
    high = np.quantile(y, 0.5 + t * se_f, method="inverted_cdf")
    assert r.estimate == q
    assert (r.ci_low, r.ci_high) == (low, high)
    assert r.se == pytest.approx((high - low) / (2 * t))


# ---------------------------------------------------------------- domains, reasons, layout


def _survey() -> Dataset:
    vocab = Reasons()
    y = np.array([1.0, np.nan, 3.0, np.nan, 5.0, 6.0, np.nan, 8.0])
    reasons = np.array([VALID, DONT_KNOW, VALID, REFUSED, VALID, VALID, SKIPPED, VALID], np.int8)
    g = np.array([1.0, 1.0, 1.0, 2.0, 2.0, 2.0, 1.0, 2.0])
    cols = {
        "y": DecodedColumn("y", y, reasons, vocab),
        "g": DecodedColumn("g", g, np.zeros(8, np.int8), vocab, kind="categorical",
                           value_labels={1.0: "North", 2.0: "South", 3.0: "West"}),
        "w": DecodedColumn("w", np.ones(8), np.zeros(8, np.int8), vocab),
    }
    return Dataset(cols, vocab, 8, "survey.sav")


def test_table_layout_by_levels_reasons_and_empty_cells() -> None:
    t = estimate(_survey(), Design("w"), ["y"], by=["g"])
    f = t.frame
    assert list(f.columns) == [*ESTIMATE_COLUMNS[:4], "g", *ESTIMATE_COLUMNS[4:]]
    assert f.g.tolist() == [None, "North", "South", "West"]
    assert f.n.tolist() == [5, 2, 3, 0]
    assert f.reasons[0] == {"skipped": 1, "dont_know": 1, "refused": 1}
    assert f.reasons[1] == {"skipped": 1, "dont_know": 1}
    assert f.reasons[3] == {}
    assert np.isnan(f.estimate[3]) and f.suppress[3]
    assert f.estimate[1] == pytest.approx(2.0)
    assert t.by == ("g",)
    assert t.settings["mean_ci"] == "wald-t" and t.settings["level"] == 0.95
    assert t.design["weight"] == "w"


def test_crossed_by_variables_give_full_product() -> None:
    rng = np.random.default_rng(9)
    ds = _ds(y=rng.normal(0, 1, 40), w=np.ones(40), a=rng.integers(0, 2, 40).astype(float),
             b=np.r_[np.zeros(20), np.ones(20)])
    f = estimate(ds, Design("w"), ["y"], by=["a", "b"]).frame
    assert list(zip(f.a, f.b, strict=True)) == [(None, None), (0, 0), (0, 1), (1, 0), (1, 1)]
    assert f.n.tolist()[1:] == [np.sum((ds["a"].values == a) & (ds["b"].values == b))
                               for a in (0, 1) for b in (0, 1)]


def test_ratio_needs_both_valid() -> None:
    y = np.array([2.0, 4.0, np.nan, 6.0])
    x = np.array([1.0, 2.0, 3.0, np.nan])
    w = np.array([1.0, 2.0, 1.0, 1.0])
    f = estimate(_ds(y=y, x=x, w=w), Design("w"), [], ratios=[("y", "x")]).frame
    assert f.variable[0] == "y/x"
    assert f.estimate[0] == pytest.approx((2 + 8) / (1 + 4))
    assert f.n[0] == 2
    assert f.reasons[0] == {"missing": 2}


def test_proportions_in_row_tiles_equal_one_pass(monkeypatch: pytest.MonkeyPatch) -> None:
    # common practice, no source: a categorical variable's passes run on row tiles; tiles of
    # 5 rows (cutting through PSUs, domains, missing rows and rows outside `where`) give what
    # one tile over all rows gives, and the levels' proportions add up to 1 in every domain
    from wstats.decoding import columns as _column
    rng = np.random.default_rng(8)
    n = 300
    y = rng.integers(1, 5, n).astype(float)
    y[rng.random(n) < 0.15] = np.nan
    ds = _ds(y=y, w=rng.uniform(1, 4, n), st=rng.integers(0, 3, n).astype(float),
             psu=rng.integers(0, 4, n).astype(float), g=rng.integers(1, 3, n).astype(float),
             x=rng.normal(size=n))
    design = Design("w", strata="st", psu="psu")

    def run() -> Any:
        return estimate(ds, design, ["y", "x"], categorical=["y"], by=["g"],
                        where="x > -1").frame

    whole = run()
    monkeypatch.setattr(_column, "ROW_TILE", 5)
    tiled = run()
    for col in ("estimate", "se", "n", "weighted_n", "deff"):
        np.testing.assert_allclose(tiled[col].to_numpy(float), whole[col].to_numpy(float),
                                   rtol=1e-12, atol=1e-15)
    props = whole[whole.statistic == "proportion"]
    sums = props.groupby(props["g"].astype(str))["estimate"].sum()
    np.testing.assert_allclose(sums.to_numpy(float), 1.0, rtol=1e-12)


@pytest.mark.parametrize("tile", [262_144, 7])
def test_level_sums_agree_on_every_path(tile: int, monkeypatch: pytest.MonkeyPatch) -> None:
    # common practice, no source: a categorical variable's weighted sums by (bucket, level)
    # come from one pass over (bucket, code) cells, from a code -> level lookup table, or
    # from level indexes over the whole column; all three give the same table (labelled
    # levels first, one unobserved and one outside the codes' span, then unlabelled codes)
    from wstats.decoding import columns as _column
    from wstats.estimation import many_variables as _batch
    monkeypatch.setattr(_column, "ROW_TILE", tile)
    rng = np.random.default_rng(21)
    n = 400
    y = rng.integers(3, 9, n).astype(float)
    y[rng.random(n) < 0.2] = np.nan
    ds = _with(_ds(y=y, w=rng.uniform(0.5, 3, n), st=rng.integers(0, 3, n).astype(float),
                   psu=rng.integers(0, 5, n).astype(float),
                   g=rng.integers(1, 4, n).astype(float), x=rng.normal(size=n)),
               "y", kind="categorical",
               value_labels={5.0: "five", 3.0: "three", 4.5: "odd", 20.0: "far"})
    design = Design("w", strata="st", psu="psu")

    def run() -> Any:
        return estimate(ds, design, ["y"], by=["g"], where="x > -1.2").frame

    one_pass = run()
    monkeypatch.setattr(_batch, "_DENSE", 0)  # too many cells: the lookup table
    looked_up = run()
    monkeypatch.setattr(_batch, "_SPAN", -1)  # no span is small: level indexes
    indexed = run()
    assert one_pass.level.tolist()[:7] == ["five", "three", "odd", "far", "4", "6", "7"]
    for other in (looked_up, indexed):
        assert other.level.tolist() == one_pass.level.tolist()
        for col in ("estimate", "se", "n", "weighted_n", "deff"):
            np.testing.assert_allclose(other[col].to_numpy(float),
                                       one_pass[col].to_numpy(float), rtol=1e-12, atol=1e-15)
    empty = one_pass[one_pass.level.isin(["odd", "far"])]
    assert (empty.estimate == 0).all()


@pytest.mark.parametrize("dense", [1 << 19, 0])
def test_a_fractional_code_sends_the_column_to_level_indexes(
        dense: int, monkeypatch: pytest.MonkeyPatch) -> None:
    # common practice, no source: a value like 2.5 among whole codes is a level of its own;
    # the tiled paths find it (in the last tile) and leave the column to the general way
    from wstats.decoding import columns as _column
    from wstats.estimation import many_variables as _batch
    monkeypatch.setattr(_column, "ROW_TILE", 4)
    monkeypatch.setattr(_batch, "_DENSE", dense)
    x = np.array([1.0, 2.0, 2.0, 3.0, 1.0, 2.0, 3.0, 3.0, 2.5, 1.0])
    w = np.array([1.0, 2.0, 1.0, 1.0, 3.0, 1.0, 2.0, 1.0, 2.0, 1.0])
    f = estimate(_ds(x=x, w=w), Design("w"), ["x"], categorical=["x"]).frame
    assert f.level.tolist() == ["1", "2", "2.5", "3"]
    # weighted shares by hand: weights 5, 4, 2, 4 of 15
    assert f.estimate.tolist() == pytest.approx([5 / 15, 4 / 15, 2 / 15, 4 / 15], rel=1e-14)
