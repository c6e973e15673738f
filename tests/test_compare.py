"""wstats.compare and direct age adjustment: numbers against sources, options, messages."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import demo
from _demo_helpers import demo_codebook, raw_table
from wstats import Dataset, Design, estimate
from wstats.errors import EstimationError, UsageError
from wstats.estimation.covariance import Covariance
from wstats.estimation.standards import STANDARDS, adjustment_weights, load_standard
from wstats.reports.compare import compare

# ---------------------------------------------------------------- standard populations


def test_age_adjustment_reproduces_published_adult_obesity() -> None:
    # [S] NCHS Data Brief 288 (Hales et al. 2017): 2015-2016 adult obesity by age 35.7 / 42.8
    # / 41.0 %; age-adjusted with the 20-39 / 40-59 / 60+ weights of the 2000 U.S. standard
    # (REFERENCES §15; 20-39 share 0.396579 [S], the others [M]): 39.567, printed 39.6
    c = adjustment_weights(STANDARDS["us2000-adults20"], [1.0, 2.0, 3.0],
                           ["20-39", "40-59", "60+"], "AGE")
    assert c == pytest.approx([0.396579, 0.371795, 0.231626], abs=5e-7)
    value = float(c @ np.array([35.7, 42.8, 41.0]))
    assert value == pytest.approx(39.567, abs=5e-4)
    assert round(value, 1) == 39.6
    # [M] NCHS Data Brief 219 (Ogden et al. 2015): 32.3 / 40.2 / 37.0 -> 36.3 ("just over 36")
    assert round(float(c @ np.array([32.3, 40.2, 37.0])), 1) == 36.3


def test_built_in_standards_match_their_sources() -> None:
    # [S] Anderson & Rosenberg (1998), NVSR 47(3), Table I: printed weights total 1; the
    # 75-84 weight is printed 0.044842 though 12,315 / 274,634 thousand is 0.044841
    us = STANDARDS["us2000-11"]
    assert sum(us.population) == pytest.approx(1.0, abs=1e-12)
    assert us.population[9] == 0.044842
    assert round(12_315 / 274_634, 6) == 0.044841
    # [M] K&S (2001) adult groups 18-44 / 45-64 / 65+ (REFERENCES §15, computed)
    assert STANDARDS["us2000-adults18"].shares == pytest.approx(
        [0.530535, 0.299194, 0.170271], abs=5e-7)


def test_weights_renormalise_over_the_groups_present(tmp_path: Path) -> None:
    # [S] REFERENCES §15: c_a = P_a / sum_b P_b over the age groups analysed
    f = tmp_path / "basin.toml"
    f.write_text('name = "basin"\nsource = "invented for a test"\n'
                 '[population]\n"1" = 300\n"2" = 100\n')
    std = load_standard(str(f))
    c = adjustment_weights(std, [1.0, 2.0, 3.0], ["a", "b", "c"], "AGE")
    assert c == pytest.approx([0.75, 0.25, 0.0])
    with pytest.raises(EstimationError, match="group '2'.*not a code of AGE"):
        adjustment_weights(std, [1.0, 3.0], ["a", "c"], "AGE")
    with pytest.raises(EstimationError, match="3 age groups"):
        adjustment_weights(STANDARDS["us2000-adults20"], [1.0, 2.0], ["a", "b"], "AGE")
    with pytest.raises(UsageError, match="us2000-11"):
        load_standard("us2000")
    (tmp_path / "bad.toml").write_text('name = "x"\nsource = "y"\n[population]\n"1" = -3\n')
    with pytest.raises(UsageError, match="positive"):
        load_standard(str(tmp_path / "bad.toml"))


def test_adjusted_variance_uses_the_full_covariance() -> None:
    # [S] REFERENCES §15: v = c'Vc; sum c_a^2 v_a is right only for independent groups
    v = np.array([[1.0, 0.5], [0.5, 2.0]])
    cov = Covariance(np.array([10.0, 20.0]), v, 30.0)
    c = np.array([0.6, 0.4])
    _, se = cov.combine(c)
    assert float(se) ** 2 == pytest.approx(0.36 + 0.32 + 2 * 0.24 * 0.5)


# ---------------------------------------------------------------- compare on invented data


def _data(seed: int = 1, n: int = 400) -> Dataset:
    """Invented data: strata, PSUs, group g (3 levels), age (3 levels), y, a binary b."""
    rng = np.random.default_rng(seed)
    st = rng.integers(0, 5, n)
    psu = rng.integers(0, 4, n)
    g = rng.integers(1, 4, n).astype(float)
    age = rng.integers(1, 4, n).astype(float)
    y = rng.normal(10 + g + 2 * age, 3.0, n)
    b = (rng.random(n) < 0.2 + 0.1 * g).astype(float)
    return Dataset.from_arrays({"w": rng.uniform(1, 4, n), "st": st, "psu": psu, "g": g,
                                "age": age, "y": y, "b": b})


DESIGN = Design("w", strata="st", psu="psu")


def test_difference_rows_agree_with_estimate_and_covariance() -> None:
    # [C] estimates equal estimate()'s domain means; SE^2 = v_a + v_b - 2 c_ab
    ds = _data()
    r = compare(ds, DESIGN, ["y"], by="g")
    rows = r.differences.to_pandas()
    means = estimate(ds, DESIGN, ["y"], by=["g"]).frame.iloc[1:]
    assert list(rows["group_a"]) == ["1", "1"] and list(rows["group_b"]) == ["2", "3"]
    assert rows["estimate_b"].to_numpy() == pytest.approx(means["estimate"].to_numpy()[1:])
    assert rows["difference"].to_numpy() == pytest.approx(
        rows["estimate_b"].to_numpy() - rows["estimate_a"].to_numpy())
    assert rows["se"].iloc[0] == pytest.approx(_textbook_difference_se(ds, 1.0, 2.0), rel=1e-9)
    t = rows["difference"] / rows["se"]
    assert rows["t"].to_numpy() == pytest.approx(t.to_numpy())
    tests = r.tests.to_pandas()
    assert list(tests["test"]) == ["wald"]
    assert (tests["df1"].iloc[0], tests["df2"].iloc[0]) == (2.0, float(r.differences.rows[0]
                                                                          ["df"]) - 1.0)


def _textbook_difference_se(ds: Dataset, a: float, b: float) -> float:
    """SE of mean_b - mean_a from the difference's influence values (REFERENCES §1, §12).

    u = 1[b](y - ybar_b)/N_b - 1[a](y - ybar_a)/N_a; v = sum_h n_h/(n_h-1) sum_i (z_hi -
    zbar_h)^2 (Woodruff 1971; Wolter 2007 ch. 6, from memory), strata and PSUs looped.
    """
    y, g, w = ds["y"].values, ds["g"].values, ds["w"].values
    st, psu = ds["st"].values, ds["psu"].values
    u = np.zeros(len(y))
    for level, sign in ((a, -1.0), (b, 1.0)):
        inside = g == level
        big_n = w[inside].sum()
        u += sign * np.where(inside, y - (w * y)[inside].sum() / big_n, 0.0) / big_n
    v = 0.0
    for h in np.unique(st):
        z = np.array([(w * u)[(st == h) & (psu == i)].sum() for i in np.unique(psu[st == h])])
        v += len(z) / (len(z) - 1) * ((z - z.mean()) ** 2).sum()
    return float(np.sqrt(v))


def test_pairs_reference_and_adjustment() -> None:
    # [C] every pair; Holm adjusted p equals statsmodels' multipletests (general library)
    from statsmodels.stats.multitest import multipletests

    ds = _data()
    r = compare(ds, DESIGN, ["y", "b"], by="g", pairs="all", adjust_p="holm",
                categorical=["b"])
    rows = r.differences.to_pandas()
    assert len(rows) == 3 + 3 * 2  # y: 3 pairs; b: 2 levels x 3 pairs
    assert rows["p_adjusted"].to_numpy() == pytest.approx(
        multipletests(rows["p"].to_numpy(), method="holm")[1])
    r2 = compare(ds, DESIGN, ["y"], by="g", reference="3")
    assert [x["group_a"] for x in r2.differences.rows] == ["3", "3"]
    assert [x["group_b"] for x in r2.differences.rows] == ["1", "2"]


def test_categorical_gets_rao_scott_and_trend() -> None:
    # [C] Rao-Scott row fields of the output contract; trend rows with t and p
    ds = _data()
    r = compare(ds, DESIGN, ["b"], by="g", categorical=["b"], trend=True)
    tests = r.tests.records()
    kinds = [t["test"] for t in tests]
    assert kinds.count("trend-linear") == 2 and "trend-quadratic" not in kinds  # 3 groups
    rs = [t for t in tests if t["test"] == "rao-scott"][0]
    for key in ("statistic", "df1", "df2", "p", "pearson_chisq", "first_order_f",
                "mean_deff", "deff_cv2"):
        assert isinstance(rs[key], float)
    assert rs["statistic"] == pytest.approx(rs["first_order_f"])  # same F, other df
    assert rs["df1"] == pytest.approx(2.0 / (1.0 + rs["deff_cv2"]))


def test_part_versus_whole_is_refused() -> None:
    # [S] REFERENCES §13: a subgroup against its own total needs the part-whole formula
    with pytest.raises(UsageError, match="part-versus-whole"):
        compare(_data(), DESIGN, ["y"], by="g", reference="all")
    with pytest.raises(UsageError, match="not a level of g"):
        compare(_data(), DESIGN, ["y"], by="g", reference="7")


def test_age_adjusted_comparison_equals_weighted_age_specific_estimates() -> None:
    # [S] REFERENCES §15: theta_adj = sum_a c_a theta_a per group, from estimate()'s cells
    ds = _data()
    r = compare(ds, DESIGN, ["y"], by="g", age_adjust="age", standard="us2000-adults20")
    cells = estimate(ds, DESIGN, ["y"], by=["g", "age"]).frame.iloc[1:]
    c = STANDARDS["us2000-adults20"].shares
    adjusted = cells["estimate"].to_numpy().reshape(3, 3) @ c
    row = r.differences.rows[0]
    assert row["estimate_a"] == pytest.approx(adjusted[0])
    assert row["estimate_b"] == pytest.approx(adjusted[1])
    assert row["standard"] == "us2000-adults20"
    assert r.settings["standard"] == "us2000-adults20"


def test_empty_age_cell_names_domain_and_group() -> None:
    # [S] REFERENCES §15: an empty age cell makes the adjusted value undefined
    ds = _data()
    cols = {k: ds[k].values.copy() for k in ds.columns}
    cols["y"][(cols["g"] == 2) & (cols["age"] == 3)] = np.nan
    with pytest.raises(EstimationError, match="age group '3' of age .* group '2' of g"):
        compare(Dataset.from_arrays(cols), DESIGN, ["y"], by="g", age_adjust="age",
                standard="us2000-adults20")


def test_zero_percent_age_cell_is_flagged() -> None:
    # [S] REFERENCES §15: a 0 %/100 % cell has SE 0 and understates the variance
    ds = _data()
    cols = {k: ds[k].values.copy() for k in ds.columns}
    cols["b"][(cols["g"] == 1) & (cols["age"] == 1)] = 0.0
    r = compare(Dataset.from_arrays(cols), DESIGN, ["b"], by="g", categorical=["b"],
                age_adjust="age", standard="us2000-adults20")
    assert all("age-cell-0-or-100" in x["flags"] for x in r.differences.rows)
    assert {t["test"] for t in r.tests.rows} == {"wald"}


def test_reasons_compare_item_nonresponse() -> None:
    # [C] the nonresponse rates among those asked equal nonresponse()'s rates by group
    from wstats import nonresponse

    cb = demo_codebook()
    ds = cb.decode(raw_table(demo.build_sample(rows=1500)))
    design = Design(**cb.design)
    r = compare(ds, design, ["dm_incbd"], by="dm_sex", reasons=True)
    rate = [x for x in r.differences.rows if x["statistic"] == "nonresponse-rate"][0]
    nr = nonresponse(ds, design, ["dm_incbd"], by=["dm_sex"]).to_pandas()
    groups = nr.loc[nr["dm_sex"].notna()]
    rates = groups["nonresponse_rate"].to_numpy()
    assert [rate["estimate_a"], rate["estimate_b"]] == pytest.approx(list(rates), rel=1e-9)
    test = [t for t in r.tests.rows if t["quantity"] == "reasons"][0]
    assert test["test"] == "rao-scott" and test["level"].startswith("valid+")


def test_options_are_checked() -> None:
    # common practice, no source: one-line messages naming the allowed values
    with pytest.raises(UsageError, match="reference, all"):
        compare(_data(), DESIGN, ["y"], by="g", pairs="each")
    with pytest.raises(UsageError, match="holm"):
        compare(_data(), DESIGN, ["y"], by="g", adjust_p="hochberg")
    with pytest.raises(UsageError, match="both the age variable and a standard"):
        compare(_data(), DESIGN, ["y"], by="g", age_adjust="age")
    with pytest.raises(UsageError, match="both compared and used to form groups"):
        compare(_data(), DESIGN, ["g"], by="g")


def test_where_condition_matches_estimate() -> None:
    # [C] a subpopulation keeps the full design: the groups' means equal estimate(where=...)
    ds = _data(4)
    r = compare(ds, DESIGN, ["y"], by="g", where="age == 1")
    means = estimate(ds, DESIGN, ["y"], by=["g"], where="age == 1").frame.iloc[1:]
    got = [r.differences.rows[0]["estimate_a"], *(x["estimate_b"] for x in r.differences.rows)]
    assert got == pytest.approx(means["estimate"].to_numpy())


def test_text_groups_and_an_empty_level() -> None:
    # common practice, no source: text levels are groups in sorted order; a labelled level
    # without rows gives NaN differences, and the Rao-Scott test drops its zero margin
    ds = _data(5)
    cols = {k: ds[k].values for k in ds.columns}
    cols["g"] = np.where(cols["g"] == 3.0, 2.0, cols["g"])  # level 3 empty from here on
    data = Dataset.from_arrays(cols)
    data["g"].value_labels.update({1.0: "one", 2.0: "two", 3.0: "three"})
    r = compare(data, DESIGN, ["y", "b"], by="g", categorical=["b"])
    rows = r.differences.rows
    assert [x["group_b"] for x in rows[:2]] == ["two", "three"]
    assert np.isfinite(rows[0]["difference"]) and rows[1]["difference"] is not None
    assert np.isnan(rows[1]["difference"])
    rs = [t for t in r.tests.rows if t["test"] == "rao-scott"][0]
    assert np.isfinite(rs["p"]) and rs["df1"] == pytest.approx(1.0 / (1.0 + rs["deff_cv2"]))
    wald = [t for t in r.tests.rows if t["test"] == "wald"][0]
    assert wald["df1"] == 1.0 and wald["statistic"] == pytest.approx(rows[0]["t"] ** 2)
    text = Dataset.from_arrays({**cols, "g": np.array(["b", "a"])[(cols["g"] == 1).astype(int)]})
    r2 = compare(text, DESIGN, ["y"], by="g")
    assert [r2.differences.rows[0]["group_a"], r2.differences.rows[0]["group_b"]] == ["a", "b"]
