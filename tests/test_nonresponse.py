"""Item nonresponse: counts and weighted shares by reason, the rate among those asked, its SE."""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from wstats.decoding.columns import Dataset, DecodedColumn
from wstats.decoding.reasons import DONT_KNOW, INVALID, MISSING, REFUSED, SKIPPED, VALID, Reasons
from wstats.design.declared import Design
from wstats.errors import ColumnError, EstimationError
from wstats.estimation.estimate import estimate
from wstats.estimation.reliability import STANDARDS
from wstats.reports.nonresponse import NONRESPONSE_RULES, nonresponse, nonresponse_reasons

CORE = ("valid", "skipped", "dont_know", "refused", "invalid", "missing")


def _dataset(reasons: np.ndarray, weights: np.ndarray, group: np.ndarray | None = None,
             strata: np.ndarray | None = None, psu: np.ndarray | None = None,
             extra: tuple[str, ...] = ()) -> Dataset:
    """Build a dataset with item Y carrying *reasons*, weight W and optional G, S, P."""
    vocab = Reasons(extra)
    n = len(reasons)
    r = reasons.astype(np.int8)
    y = np.where(r == VALID, np.arange(n) % 3 + 1.0, np.nan)
    cols = {"Y": DecodedColumn("Y", y, r, vocab, kind="categorical"),
            "W": DecodedColumn("W", weights.astype(float), np.zeros(n, np.int8), vocab)}
    for name, arr in (("G", group), ("S", strata), ("P", psu)):
        if arr is not None:
            cols[name] = DecodedColumn(name, arr.astype(float), np.zeros(n, np.int8), vocab,
                                       kind="categorical")
    return Dataset(cols, vocab, n)


REASONS = np.array([VALID, VALID, DONT_KNOW, REFUSED, SKIPPED, VALID, INVALID, MISSING,
                    VALID, SKIPPED, VALID, DONT_KNOW])
WEIGHTS = np.array([1.0, 2.0, 3.0, 1.5, 2.5, 1.0, 2.0, 0.5, 4.0, 1.0, 2.0, 1.0])
GROUPS = np.array([1, 1, 1, 1, 1, 1, 2, 2, 2, 2, 2, 2])


def test_counts_shares_and_rate_by_hand() -> None:
    # Definition: NCES Statistical Standards, Standard 1-3 (denominator: all but legitimate
    # skips); numerator our documented choice (dont_know, refused, invalid, missing).
    ds = _dataset(REASONS, WEIGHTS, GROUPS)
    t = nonresponse(ds, Design("W"), ["Y"], by=["G"])
    f = t.frame
    assert list(f["G"]) == [None, 1, 2]
    pop = f.iloc[0]
    for code, name in enumerate(CORE):
        assert pop[f"count_{name}"] == int((REASONS == code).sum())
        assert pop[f"share_{name}"] == pytest.approx(WEIGHTS[REASONS == code].sum()
                                                     / WEIGHTS.sum())
    asked = REASONS != SKIPPED
    missed = np.isin(REASONS, [DONT_KNOW, REFUSED, INVALID, MISSING])
    assert pop["asked"] == asked.sum() == 10
    assert pop["n_rows"] == 12
    assert pop["nonresponse_rate"] == pytest.approx(WEIGHTS[missed].sum() / WEIGHTS[asked].sum())
    g2 = GROUPS == 2
    assert f.iloc[2]["nonresponse_rate"] == pytest.approx(
        WEIGHTS[missed & g2].sum() / WEIGHTS[asked & g2].sum())
    assert f.iloc[2]["count_invalid"] == 1 and f.iloc[1]["count_invalid"] == 0


def test_count_invalid_false_treats_invalid_as_an_answer() -> None:
    ds = _dataset(REASONS, WEIGHTS)
    t = nonresponse(ds, Design("W"), ["Y"], count_invalid=False)
    asked = REASONS != SKIPPED
    missed = np.isin(REASONS, [DONT_KNOW, REFUSED, MISSING])
    assert t.frame["nonresponse_rate"][0] == pytest.approx(
        WEIGHTS[missed].sum() / WEIGHTS[asked].sum())
    assert t.settings["nonresponse_reasons"] == ["dont_know", "refused", "missing"]
    assert nonresponse_reasons(ds, count_invalid=True) == ("dont_know", "refused", "invalid",
                                                          "missing")


def test_added_reasons_count_unless_declared_not_asked() -> None:
    reasons = np.array([VALID, VALID, 6, 7, VALID, DONT_KNOW])  # 6 not_measured, 7 not_appl.
    w = np.array([1.0, 1.0, 2.0, 3.0, 1.0, 1.0])
    ds = _dataset(reasons, w, extra=("not_measured", "not_applicable"))
    t = nonresponse(ds, Design("W"), ["Y"])
    assert t.frame["nonresponse_rate"][0] == pytest.approx((2 + 3 + 1) / w.sum())
    assert t.frame["count_not_applicable"][0] == 1
    t2 = nonresponse(ds, Design("W"), ["Y"], not_asked=["not_applicable"])
    assert t2.frame["asked"][0] == 5
    assert t2.frame["nonresponse_rate"][0] == pytest.approx((2 + 1) / (w.sum() - 3))
    assert t2.reasons == (*CORE, "not_measured", "not_applicable")


def test_se_equals_the_estimation_engine_on_a_hand_built_indicator() -> None:
    rng = np.random.default_rng(7)
    n = 240
    reasons = rng.choice([VALID, VALID, VALID, SKIPPED, DONT_KNOW, REFUSED, MISSING], size=n)
    w = rng.uniform(0.5, 3.0, n)
    strata = np.repeat(np.arange(4), n // 4)
    psu = np.tile(np.repeat(np.arange(6), n // 24), 4)
    group = rng.integers(1, 4, n)
    ds = _dataset(reasons, w, group, strata, psu)
    design = Design("W", strata="S", psu="P")
    t = nonresponse(ds, design, ["Y"], by=["G"])
    # The indicator built by hand: 1 = did not answer, 0 = answered, absent where skipped.
    asked = reasons != SKIPPED
    ind = np.where(asked, (reasons != VALID).astype(float), np.nan)
    vocab = ds.vocabulary
    cols = dict(ds.columns)
    cols["IND"] = DecodedColumn("IND", ind, np.where(asked, VALID, SKIPPED).astype(np.int8),
                                vocab, kind="binary")
    est = estimate(Dataset(cols, vocab, n), design, ["IND"], statistics="proportion",
                   by=["G"], reliability=STANDARDS["none"]).frame
    ones = est[est["level"] == "1"].reset_index(drop=True)
    for col in ("se", "ci_low", "ci_high", "df"):
        np.testing.assert_allclose(t.frame[col], ones[col], rtol=1e-12)
    np.testing.assert_allclose(t.frame["nonresponse_rate"], ones["estimate"], rtol=1e-12)
    assert list(t.frame["asked"]) == list(ones["n"])


def test_se_matches_the_linearization_formula_for_a_domain() -> None:
    # Lohr (2010), ch. 9 / REFERENCES 1-2: one stratum, unit PSUs, equal weights; domain of
    # the m rows asked: u_k = d_k (y_k - p) / m, v = n/(n-1) sum (u_k - mean u)^2, which
    # reduces to n/(n-1) * p(1-p)/m. (Formula reproduced here with plain numpy.)
    reasons = np.array([VALID] * 14 + [DONT_KNOW] * 4 + [REFUSED] * 2 + [SKIPPED] * 5)
    n = len(reasons)
    ds = _dataset(reasons, np.ones(n))
    t = nonresponse(ds, Design("W"), ["Y"])
    d = reasons != SKIPPED
    y = (reasons != VALID) & d
    m, p = d.sum(), y[d].mean()
    u = np.where(d, (y - p) / m, 0.0)
    v = n / (n - 1) * ((u - u.mean()) ** 2).sum()
    assert t.frame["se"][0] == pytest.approx(np.sqrt(v), rel=1e-12)
    assert t.frame["se"][0] == pytest.approx(np.sqrt(n / (n - 1) * p * (1 - p) / m), rel=1e-12)
    assert t.frame["df"][0] == n - 1  # PSUs - strata (NCHS tutorial; REFERENCES 3)


def test_flags_sorting_and_records() -> None:
    vocab = Reasons()
    n = 10
    good = np.array([VALID] * 9 + [DONT_KNOW], dtype=np.int8)
    bad = np.array([VALID] * 6 + [REFUSED] * 4, dtype=np.int8)  # response rate 60% < 70%
    never = np.full(n, SKIPPED, dtype=np.int8)
    cols = {name: DecodedColumn(name, np.where(r == VALID, 1.0, np.nan), r, vocab)
            for name, r in (("GOOD", good), ("BAD", bad), ("NEVER", never))}
    cols["W"] = DecodedColumn("W", np.ones(n), np.zeros(n, np.int8), vocab)
    ds = Dataset(cols, vocab, n)
    t = nonresponse(ds, Design("W"), ["GOOD", "NEVER", "BAD"], sort_worst=True)
    assert list(t.frame["variable"]) == ["BAD", "GOOD", "NEVER"]
    assert list(t.frame["flags"]) == [("response<70%",), (), ("none-asked",)]
    assert set(NONRESPONSE_RULES) == {"response<70%", "none-asked"}
    recs = json.loads(json.dumps(t.records()))
    assert recs[0]["variable"] == "BAD" and recs[0]["group"] is None
    assert recs[0]["counts"]["refused"] == 4 and recs[0]["asked"] == 10
    assert recs[0]["response_rate"] == pytest.approx(0.6)
    assert recs[2]["nonresponse_rate"] is None and recs[2]["se"] is None


def test_unknown_variable_is_named_with_a_suggestion() -> None:
    ds = _dataset(REASONS, WEIGHTS)
    with pytest.raises(ColumnError, match=r"variable 'y' is not.*did you mean 'Y'"):
        nonresponse(ds, Design("W"), ["y"])
    with pytest.raises(EstimationError, match="no variables"):
        nonresponse(ds, Design("W"), [])
    with pytest.raises(EstimationError, match="confidence level"):
        nonresponse(ds, Design("W"), ["Y"], level=95)


def test_where_restricts_the_population() -> None:
    ds = _dataset(REASONS, WEIGHTS, GROUPS)
    t = nonresponse(ds, Design("W"), ["Y"], where="G == 2")
    full = nonresponse(ds, Design("W"), ["Y"], by=["G"])
    assert t.frame["n_rows"][0] == 6
    assert t.frame["nonresponse_rate"][0] == pytest.approx(full.frame["nonresponse_rate"][2])


@settings(max_examples=40, deadline=None)
@given(st.data())
def test_counts_and_shares_add_up(data: st.DataObject) -> None:
    n = data.draw(st.integers(min_value=4, max_value=40))
    reasons = np.array(data.draw(st.lists(st.integers(0, 5), min_size=n, max_size=n)))
    w = np.array(data.draw(st.lists(st.floats(0.1, 10.0), min_size=n, max_size=n)))
    groups = np.array(data.draw(st.lists(st.integers(1, 3), min_size=n, max_size=n)))
    ds = _dataset(reasons, w, groups)
    f = nonresponse(ds, Design("W"), ["Y"], by=["G"]).frame
    counts = f[[f"count_{r}" for r in CORE]].to_numpy()
    shares = f[[f"share_{r}" for r in CORE]].to_numpy()
    np.testing.assert_array_equal(counts.sum(axis=1), f["n_rows"])
    nonempty = f["n_rows"].to_numpy() > 0
    np.testing.assert_allclose(shares[nonempty].sum(axis=1), 1.0, rtol=1e-12)
    # Cells partition the population: their counts add up to the population row.
    np.testing.assert_array_equal(counts[1:].sum(axis=0), counts[0])
    asked = reasons != SKIPPED
    missed = asked & (reasons != VALID)
    expected = w[missed].sum() / w[asked].sum() if asked.any() else np.nan
    np.testing.assert_allclose(f["nonresponse_rate"][0], expected, rtol=1e-12)
    lo, hi, rate = f["ci_low"], f["ci_high"], f["nonresponse_rate"]
    ok = rate.notna()
    assert ((lo[ok] <= rate[ok] + 1e-12) & (rate[ok] <= hi[ok] + 1e-12)).all()


def test_rows_outside_every_cell_count_in_the_population_only() -> None:
    vocab = Reasons()
    r = np.array([VALID, DONT_KNOW, VALID, REFUSED, VALID, VALID], dtype=np.int8)
    g = np.array([1.0, 1.0, np.nan, 2.0, 2.0, np.nan])
    cols = {"Y": DecodedColumn("Y", np.where(r == VALID, 1.0, np.nan), r, vocab),
            "G": DecodedColumn("G", g, np.where(np.isnan(g), MISSING, VALID).astype(np.int8),
                               vocab, kind="categorical"),
            "W": DecodedColumn("W", np.array([1.0, 2.0, 3.0, np.nan, 1.0, 1.0]),
                               np.array([0, 0, 0, MISSING, 0, 0], dtype=np.int8), vocab)}
    ds = Dataset(cols, vocab, 6)
    # drop_incomplete leaves out the row without a weight (Design docs); it is not counted.
    t = nonresponse(ds, Design("W", drop_incomplete=True), ["Y"], by=["G"]).frame
    assert list(t["n_rows"]) == [5, 2, 1]
    assert list(t["count_refused"]) == [0, 0, 0]
    assert t["nonresponse_rate"][0] == pytest.approx(2 / 8)
    assert t["nonresponse_rate"][2] == 0.0
