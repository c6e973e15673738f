"""Worst-case bounds for proportions under item nonresponse (Manski 1989, 2003; from memory)."""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from wstats.decoding.columns import Dataset, DecodedColumn
from wstats.decoding.reasons import DONT_KNOW, INVALID, MISSING, REFUSED, SKIPPED, VALID, Reasons
from wstats.design.declared import Design
from wstats.errors import CodebookError, ColumnError
from wstats.estimation.estimate import estimate
from wstats.estimation.reliability import STANDARDS
from wstats.reports.bounds import bounds, bounds_records


def _dataset(values: np.ndarray, reasons: np.ndarray, weights: np.ndarray,
             group: np.ndarray | None = None) -> Dataset:
    """Build a dataset with categorical item Y (labels 1 = Yes, 2 = No), weight W, group G."""
    vocab = Reasons()
    n = len(values)
    r = reasons.astype(np.int8)
    y = np.where(r == VALID, values.astype(float), np.nan)
    cols = {"Y": DecodedColumn("Y", y, r, vocab, kind="categorical",
                               value_labels={1.0: "Yes", 2.0: "No"}),
            "W": DecodedColumn("W", weights.astype(float), np.zeros(n, np.int8), vocab)}
    if group is not None:
        cols["G"] = DecodedColumn("G", group.astype(float), np.zeros(n, np.int8), vocab,
                                  kind="categorical")
    return Dataset(cols, vocab, n)


VALUES = np.array([1, 2, 1, 1, 2, 0, 0, 0, 0, 1])
REASONS = np.array([VALID, VALID, VALID, VALID, VALID, DONT_KNOW, REFUSED, SKIPPED, MISSING,
                    VALID])
WEIGHTS = np.array([1.0, 2.0, 1.0, 3.0, 1.0, 2.0, 1.0, 5.0, 4.0, 2.0])


def test_bounds_equal_the_hand_computation() -> None:
    # lower = W_L / (W_valid + W_dkref), upper = (W_L + W_dkref) / (W_valid + W_dkref);
    # Manski (1989) J. Human Resources 24:343-360 (worst-case bounds; from memory).
    ds = _dataset(VALUES, REASONS, WEIGHTS)
    b = bounds(ds, Design("W"), "Y")
    valid = REASONS == VALID
    unknown = np.isin(REASONS, [DONT_KNOW, REFUSED])
    w_valid, w_unk = WEIGHTS[valid].sum(), WEIGHTS[unknown].sum()  # 10, 3
    assert list(b["level"]) == ["Yes", "No"]
    for i, code in enumerate((1, 2)):
        w_level = WEIGHTS[valid & (VALUES == code)].sum()
        assert b["estimate"][i] == pytest.approx(w_level / w_valid)
        assert b["lower"][i] == pytest.approx(w_level / (w_valid + w_unk))
        assert b["upper"][i] == pytest.approx((w_level + w_unk) / (w_valid + w_unk))
    assert b["unknown_share"][0] == pytest.approx(3 / 13)
    assert list(b["n_valid"]) == [6, 6] and list(b["n_unknown"]) == [2, 2]


def test_reasons_choose_which_rows_could_hold_any_level() -> None:
    ds = _dataset(VALUES, REASONS, WEIGHTS)
    b = bounds(ds, Design("W"), ["Y"], reasons=["dont_know", "refused", "missing"])
    w_yes = WEIGHTS[(REASONS == VALID) & (VALUES == 1)].sum()  # 7
    assert b["lower"][0] == pytest.approx(w_yes / (10 + 7))
    assert b["upper"][0] == pytest.approx((w_yes + 7) / 17)
    assert b.attrs["reasons"] == ["dont_know", "refused", "missing"]
    with pytest.raises(CodebookError, match="unknown reason 'refusal'"):
        bounds(ds, Design("W"), "Y", reasons=["refusal"])


def test_valid_case_estimate_and_interval_are_the_engines() -> None:
    group = np.array([1, 1, 1, 2, 2, 2, 1, 2, 1, 2])
    ds = _dataset(VALUES, REASONS, WEIGHTS, group)
    b = bounds(ds, Design("W"), "Y", by=["G"], level=0.9)
    est = estimate(ds, Design("W"), ["Y"], statistics="proportion", by=["G"],
                   level=0.9, reliability=STANDARDS["none"]).frame
    for col in ("estimate", "se", "ci_low", "ci_high"):
        np.testing.assert_allclose(b[col], est[col], rtol=1e-12)
    assert list(b["G"]) == list(est["G"])
    recs = json.loads(json.dumps(bounds_records(b)))
    assert recs[0]["group"] is None and recs[2]["group"] == {"G": 1}
    assert set(recs[0]) == {"variable", "level", "estimate", "se", "ci_low", "ci_high",
                            "lower", "upper", "unknown_share", "n_valid", "n_unknown", "flags",
                            "suppress", "group"}


def test_domain_with_only_unknown_answers_is_fully_uncertain() -> None:
    values = np.array([1, 2, 0, 0])
    reasons = np.array([VALID, VALID, DONT_KNOW, REFUSED])
    ds = _dataset(values, reasons, np.ones(4), np.array([1, 1, 2, 2]))
    b = bounds(ds, Design("W"), "Y", by=["G"])
    cell2 = b[b["G"] == 2]
    assert list(cell2["lower"]) == [0.0, 0.0] and list(cell2["upper"]) == [1.0, 1.0]
    assert cell2["estimate"].isna().all()


def test_unknown_variable() -> None:
    ds = _dataset(VALUES, REASONS, WEIGHTS)
    with pytest.raises(ColumnError, match="did you mean 'Y'"):
        bounds(ds, Design("W"), "y")


@settings(max_examples=40, deadline=None)
@given(st.data())
def test_bounds_contain_the_valid_case_estimate(data: st.DataObject) -> None:
    n = data.draw(st.integers(min_value=3, max_value=30))
    values = np.array(data.draw(st.lists(st.integers(1, 2), min_size=n, max_size=n)))
    reasons = np.array(data.draw(st.lists(
        st.sampled_from([VALID, VALID, SKIPPED, DONT_KNOW, REFUSED, INVALID]),
        min_size=n, max_size=n)))
    w = np.array(data.draw(st.lists(st.floats(0.1, 10.0), min_size=n, max_size=n)))
    b = bounds(_dataset(values, reasons, w), Design("W"), "Y")
    est, lo, hi = b["estimate"].to_numpy(), b["lower"].to_numpy(), b["upper"].to_numpy()
    ok = ~np.isnan(est)
    assert (lo[ok] <= est[ok] + 1e-12).all() and (est[ok] <= hi[ok] + 1e-12).all()
    defined = ~np.isnan(lo)
    np.testing.assert_allclose((hi - lo)[defined], b["unknown_share"][defined], atol=1e-12)
    # Lower bounds of all levels plus the unknown share add up to 1 (every weight counted).
    if defined.all():
        assert lo.sum() + b["unknown_share"][0] == pytest.approx(1.0)
