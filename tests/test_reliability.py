"""Tests of wstats.estimation.reliability: each rule on both sides of its threshold.

Proportion rules: Parker JD, Talih M, Malec DJ, et al. National Center for Health Statistics
Data Presentation Standards for Proportions. Vital Health Stat 2(175), 2017 (rules as listed
in REFERENCES.md section 10 [S citation, M rules]). RSE rules: NCHS ambulatory care survey
documentation, RSE > 30% or fewer than 30 records (REFERENCES.md section 10 [S]).
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import optimize

from wstats.errors import EstimationError
from wstats.estimation.intervals import korn_graubard_ci
from wstats.estimation.reliability import (
    DEFAULT_STANDARD,
    RULES,
    STANDARDS,
    ReliabilityStandard,
    _proportion_rules,
    assess,
    describe,
    evaluate,
    footnotes,
)

UP = math.inf


def frame(rows: list[dict[str, Any]]) -> pd.DataFrame:
    """Build an estimate frame; defaults: proportion, df 60, n 2000."""
    base = {"statistic": "proportion", "df": 60.0, "n": 2000}
    return pd.DataFrame([{**base, **r} for r in rows])


def fires(
    rule: str, rows: list[dict[str, Any]], std: ReliabilityStandard = DEFAULT_STANDARD
) -> list[bool]:
    """Return whether *rule* fires on each row."""
    return [bool(b) for b in evaluate(frame(rows), std)[rule]]


def se_for_width(p: float, width: float, n: float = 2000, df: float = 60) -> float:
    """Solve for the SE at which the Korn-Graubard 95% width equals *width*."""

    def gap(se: float) -> float:
        low, high = korn_graubard_ci(p, se, n, df, 0.95)
        return float(high - low) - width

    return float(optimize.brentq(gap, 1e-5, math.sqrt(p * (1 - p)) * 0.999, xtol=1e-14))


def arr(*x: float) -> npt.NDArray[np.float64]:
    return np.array(x, dtype=np.float64)


# --- exact thresholds on the rule function (floats chosen to be exact in binary) ------------


def test_neff_rule_exactly_at_30() -> None:
    # Parker et al. 2017: suppress if n_eff < 30 (30 itself passes).
    got = _proportion_rules(
        arr(0.5, 0.5, 0.5),
        arr(0.1, 0.1, 0.1),
        arr(29.999, 30.0, 30.001),
        arr(60, 60, 60),
        DEFAULT_STANDARD,
    )
    assert got["neff<30"].tolist() == [True, False, False]


def test_width_rule_exactly_at_030() -> None:
    # Parker et al. 2017: suppress if the Korn-Graubard width W >= 0.30.
    w = arr(np.nextafter(0.30, 0), 0.30, np.nextafter(0.30, 1))
    got = _proportion_rules(
        arr(0.5, 0.5, 0.5), w, arr(100, 100, 100), arr(60, 60, 60), DEFAULT_STANDARD
    )
    assert got["kg-width>=0.30"].tolist() == [False, True, True]


def test_relative_width_rule_exactly_at_130_percent() -> None:
    # Parker et al. 2017: 0.05 < W < 0.30 and W/p > 130% -> suppress. p = 0.125, W/p = 1.3
    # exactly when W = 1.3 * 0.125 (scaling by a power of two is exact).
    w0 = 1.3 * 0.125
    w = arr(np.nextafter(w0, 0), w0, np.nextafter(w0, 1))
    got = _proportion_rules(
        arr(0.125, 0.125, 0.125), w, arr(100, 100, 100), arr(60, 60, 60), DEFAULT_STANDARD
    )
    assert got["kg-relwidth>130%"].tolist() == [False, False, True]


def test_relative_width_rule_only_above_005() -> None:
    # Parker et al. 2017: W <= 0.05 -> present, whatever W/p (here W/p = 5).
    w = arr(0.05, np.nextafter(0.05, 1))
    got = _proportion_rules(arr(0.01, 0.01), w, arr(100, 100), arr(60, 60), DEFAULT_STANDARD)
    assert got["kg-relwidth>130%"].tolist() == [False, True]


def test_df_rule_exactly_at_8() -> None:
    # Parker et al. 2017: flag for statistical review if df < 8.
    got = _proportion_rules(
        arr(0.5, 0.5, 0.5, 0.5),
        arr(0.1, 0.1, 0.1, 0.1),
        arr(100, 100, 100, 100),
        arr(7, 7.999, 8, UP),
        DEFAULT_STANDARD,
    )
    assert got["df<8"].tolist() == [True, True, False, False]


def test_complement_rule_exactly_at_130_percent() -> None:
    # Parker et al. 2017: flag if W/(1-p) > 130%; p = 0.875, 1-p = 0.125.
    w0 = 1.3 * 0.125
    w = arr(np.nextafter(w0, 0), w0, np.nextafter(w0, 1))
    got = _proportion_rules(
        arr(0.875, 0.875, 0.875), w, arr(100, 100, 100), arr(60, 60, 60), DEFAULT_STANDARD
    )
    assert got["complement-relwidth>130%"].tolist() == [False, False, True]
    assert not got["kg-relwidth>130%"].any()  # W/p = 0.186 here


def test_boundary_rule_and_our_interpretation_at_p_zero_and_one() -> None:
    # Parker et al. 2017: flag p of 0 or 1 for review. Interpretation (ours, documented): the
    # relative-width rules are undefined at p = 0 (W/p) and p = 1 (W/(1-p)) and do not apply.
    p = arr(0.0, 1e-9, 1.0, 1 - 1e-9)
    got = _proportion_rules(
        p, arr(0.2, 0.2, 0.2, 0.2), arr(100, 100, 100, 100), arr(60, 60, 60, 60), DEFAULT_STANDARD
    )
    assert got["p-at-0-or-1"].tolist() == [True, False, True, False]
    assert got["kg-relwidth>130%"].tolist() == [False, True, False, False]
    assert got["complement-relwidth>130%"].tolist() == [False, False, False, True]


# --- the same rules through evaluate() at the default standard ------------------------------


@pytest.mark.parametrize(
    ("rule", "p", "width"),
    [
        ("kg-width>=0.30", 0.5, 0.30),
        ("kg-relwidth>130%", 0.1, 0.13),
        ("complement-relwidth>130%", 0.9, 0.13),
    ],
)
def test_width_rules_both_sides_through_evaluate(rule: str, p: float, width: float) -> None:
    # Parker et al. 2017 thresholds, with the Korn-Graubard 95% width recomputed inside.
    se = se_for_width(p, width)
    assert fires(
        rule, [{"estimate": p, "se": se * (1 - 1e-6)}, {"estimate": p, "se": se * (1 + 1e-6)}]
    ) == [False, True]


def test_present_width_both_sides_through_evaluate() -> None:
    # Parker et al. 2017: W <= 0.05 is presented even though W/p = 2.5 > 130% here.
    se = se_for_width(0.02, 0.05)
    assert fires(
        "kg-relwidth>130%",
        [{"estimate": 0.02, "se": se * (1 - 1e-6)}, {"estimate": 0.02, "se": se * (1 + 1e-6)}],
    ) == [False, True]


def test_neff_both_sides_through_evaluate() -> None:
    # n_eff = p(1-p)/se^2 capped at n (Parker et al. 2017).
    rows = [{"estimate": 0.5, "se": math.sqrt(0.25 / m)} for m in (29.5, 30.5)]
    assert fires("neff<30", rows) == [True, False]
    # Capped at n: tiny SE but only 25 records.
    assert fires("neff<30", [{"estimate": 0.5, "se": 0.001, "n": 25}]) == [True]


def test_df_and_boundary_through_evaluate() -> None:
    rows = [
        {"estimate": 0.4, "se": 0.01, "df": 7},
        {"estimate": 0.4, "se": 0.01, "df": 8},
        {"estimate": 0.0, "se": 0.0},
        {"estimate": 1.0, "se": float("nan")},
    ]
    fired = evaluate(frame(rows))
    assert fired["df<8"].tolist() == [True, False, False, False]
    assert fired["p-at-0-or-1"].tolist() == [False, False, True, True]
    assert not fired["se-zero"].any()  # SE 0 is expected at p = 0 or 1


def test_table_interval_method_does_not_change_the_outcome() -> None:
    # The width rules are defined on the Korn-Graubard 95% interval (Parker et al. 2017).
    rows = [
        {"estimate": 0.1, "se": 0.05, "ci_low": 0.09, "ci_high": 0.11},
        {"estimate": 0.1, "se": 0.05, "ci_low": 0.0, "ci_high": 0.9},
    ]
    flags, suppress = assess(frame(rows), level=0.90)
    assert flags[0] == flags[1] and suppress.tolist() == [True, True]


# --- RSE rules -------------------------------------------------------------------------------


def test_rse_rule_both_sides_of_30_percent() -> None:
    # NCHS ambulatory care surveys: unreliable if RSE > 30% (30% itself is reliable).
    rows = [
        {"statistic": s, "estimate": e, "se": se}
        for s, e, se in [
            ("mean", 1.0, 0.3),
            ("mean", 1.0, np.nextafter(0.3, 1)),
            ("total", -10.0, 2.9),
            ("ratio", -10.0, 3.1),
            ("quantile", 4.0, 1.3),
            ("total", 0.0, 0.5),
        ]
    ]
    assert fires("rse>30%", rows) == [False, True, False, True, True, True]


def test_fewer_than_30_records() -> None:
    # NCHS ambulatory care surveys: fewer than 30 records -> unreliable regardless of RSE.
    rows = [{"statistic": "mean", "estimate": 5.0, "se": 0.01, "n": n} for n in (29, 30)]
    assert fires("n<30", rows) == [True, False]
    flags, suppress = assess(frame(rows))
    assert flags == [("n<30",), ()] and not suppress.any()


def test_rse_rules_can_suppress_when_configured() -> None:
    std = dataclasses.replace(DEFAULT_STANDARD, name="strict", rse_suppress=True)
    rows = [
        {"statistic": "mean", "estimate": 5.0, "se": 2.0},
        {"statistic": "mean", "estimate": 5.0, "se": 1.0},
    ]
    assert assess(frame(rows), std)[1].tolist() == [True, False]


def test_se_zero_missing_and_empty() -> None:
    rows = [
        {"statistic": "mean", "estimate": 3.0, "se": 0.0, "n": 40},
        {"statistic": "mean", "estimate": 3.0, "se": float("nan"), "n": 40},
        {"statistic": "mean", "estimate": float("nan"), "se": float("nan"), "n": 0},
        {"statistic": "proportion", "estimate": float("nan"), "se": float("nan"), "n": 0},
    ]
    flags, suppress = assess(frame(rows))
    assert flags == [("se-zero",), ("se-missing",), ("empty",), ("empty",)]
    assert suppress.tolist() == [False, False, True, True]


# --- standards ---------------------------------------------------------------------------------


def test_nchs_default_suppresses_and_orders_flags() -> None:
    # p = .30, SE = .09, n = 400, df = 5: n_eff = 25.9 < 30, KG width >= 0.30, df < 8.
    low, high = korn_graubard_ci(0.3, 0.09, 400, 5, 0.95)
    assert float(high - low) >= 0.30  # precondition of the check
    flags, suppress = assess(frame([{"estimate": 0.3, "se": 0.09, "n": 400, "df": 5}]))
    assert flags == [("neff<30", "kg-width>=0.30", "df<8")]
    assert suppress.tolist() == [True]


def test_standard_rse30_applies_rse_to_proportions_and_none_applies_nothing() -> None:
    rows: list[dict[str, Any]] = [
        {"estimate": 0.1, "se": 0.05, "n": 400, "df": 5},
        {"statistic": "mean", "estimate": 1.0, "se": 0.5, "n": 10},
    ]
    flags, suppress = assess(frame(rows), STANDARDS["rse-30"])
    assert flags == [("rse>30%",), ("n<30", "rse>30%")] and not suppress.any()
    flags, suppress = assess(frame(rows), STANDARDS["none"])
    assert flags == [(), ()] and not suppress.any()
    assert DEFAULT_STANDARD is STANDARDS["nchs-2017"]


def test_configured_thresholds_move_the_rules() -> None:
    std = dataclasses.replace(DEFAULT_STANDARD, name="looser", max_width=0.5, min_df=4)
    flags, suppress = assess(frame([{"estimate": 0.5, "se": 0.09, "n": 400, "df": 5}]), std)
    assert "kg-width>=0.30" not in flags[0] and "df<8" not in flags[0]


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        (
            {"proportions": "proportion-nhcs"},
            r"proportions = 'proportion-nhcs' is not one of "
            r"proportion-nchs, rse, none; did you mean 'proportion-nchs'\?",
        ),
        ({"others": "rsee"}, r"others = 'rsee' is not one of rse, none; did you mean 'rse'\?"),
        ({"present_width": 0.4}, r"present_width 0.4 must be at least 0 and below max_width"),
        ({"kg_level": 95.0}, r"kg_level 95.0 is outside \(0, 1\)"),
    ],
)
def test_bad_standard_raises_one_line(kwargs: dict[str, Any], message: str) -> None:
    with pytest.raises(EstimationError, match=message) as info:
        ReliabilityStandard(name="mine", **kwargs)
    assert "\n" not in str(info.value)


def test_missing_columns_error() -> None:
    with pytest.raises(EstimationError, match=r"lacks column\(s\) se, df; pass a frame"):
        assess(pd.DataFrame({"statistic": ["mean"], "estimate": [1.0], "n": [3]}))


def test_empty_frame() -> None:
    flags, suppress = assess(frame([]).reindex(columns=["statistic", "estimate", "se", "df", "n"]))
    assert flags == [] and suppress.shape == (0,) and suppress.dtype == bool


# --- texts -------------------------------------------------------------------------------------


def test_rules_have_sources_and_describe() -> None:
    for rule, (text, source) in RULES.items():
        assert text and source and describe(rule) == f"{text} ({source})"
    assert "Vital Health Stat 2(175)" in describe("neff<30")
    with pytest.raises(EstimationError, match=r"unknown reliability rule 'df<9'.*did you mean"):
        describe("df<9")


def test_footnotes_once_per_rule_in_rules_order() -> None:
    notes = footnotes([("rse>30%",), ("n<30", "rse>30%"), ()])
    assert [n.split(":")[0] for n in notes] == ["n<30", "rse>30%"]


# --- properties --------------------------------------------------------------------------------

row = st.fixed_dictionaries(
    {
        "statistic": st.sampled_from(["proportion", "mean", "total", "ratio", "quantile"]),
        "estimate": st.floats(0.0, 1.0),
        "se": st.one_of(st.just(float("nan")), st.floats(0.0, 0.4)),
        "df": st.one_of(st.just(UP), st.floats(1.0, 100.0)),
        "n": st.integers(0, 500),
    }
)


@settings(max_examples=40, deadline=None)
@given(rows=st.lists(row, min_size=1, max_size=12), seed=st.integers(0, 2**16))
def test_assess_is_row_wise_and_consistent(rows: list[dict[str, Any]], seed: int) -> None:
    f = frame(rows)
    flags, suppress = assess(f)
    stop = {"empty", "neff<30", "kg-width>=0.30", "kg-relwidth>130%"}
    assert suppress.tolist() == [bool(stop & set(fl)) for fl in flags]
    assert all(set(fl) <= set(RULES) for fl in flags)
    order = np.random.default_rng(seed).permutation(len(rows))
    flags2, suppress2 = assess(f.iloc[order].reset_index(drop=True))
    assert flags2 == [flags[i] for i in order]
    assert suppress2.tolist() == suppress[order].tolist()


@pytest.mark.parametrize("level", [0.95, 0.90])
def test_estimate_reuses_its_own_kg_interval_only_when_it_is_the_rules_one(
        level: float, monkeypatch: pytest.MonkeyPatch) -> None:
    # common practice, no source: a table whose proportion intervals are Korn-Graubard at the
    # standard's 95% hands them to the width rules; the flags equal those of rules that solve
    # the interval again from p, se, n and df (at 90% the table's own cannot serve)
    from wstats.decoding.columns import Dataset
    from wstats.design.declared import Design
    from wstats.estimation.estimate import estimate
    from wstats.estimation.reliability import assess

    rng = np.random.default_rng(17)
    n = 900
    rare = (rng.random(n) < 0.04).astype(float)
    ds = Dataset.from_arrays({"y": rare, "w": rng.uniform(1, 5, n),
                              "st": rng.integers(0, 6, n).astype(float),
                              "psu": rng.integers(0, 3, n).astype(float),
                              "g": rng.integers(0, 12, n).astype(float)})
    from wstats.estimation import reliability as _reliability
    solved: list[int] = []

    def counting(*args: Any) -> Any:
        solved.append(len(args[0]))
        return korn_graubard_ci(*args)

    monkeypatch.setattr(_reliability, "korn_graubard_ci", counting)
    table = estimate(ds, Design("w", strata="st", psu="psu"), ["y"], categorical=["y"],
                     by=["g"], level=level)
    assert len(solved) == (0 if level == 0.95 else 1)  # solved again only at another level
    frame = table.frame
    again, suppress = assess(frame, DEFAULT_STANDARD, level)
    assert list(frame["flags"]) == again
    assert frame["suppress"].tolist() == suppress.tolist()
    fired = {rule for flags in again for rule in flags}
    assert {"kg-relwidth>130%", "neff<30"} <= fired  # the width rules had work to do
