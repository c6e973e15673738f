"""Cell formatting: rounding rule, templates, reason breakdown, flag marks."""

from __future__ import annotations

import math
from decimal import Decimal

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from wstats.reports.cells import (
    FlagNotes,
    auto_decimals,
    cell_text,
    fmt_count,
    fmt_number,
    group_text,
    reason_breakdown,
    reason_legend,
    short_reason,
    template_fields,
)


@pytest.mark.parametrize("x,d,expected", [
    # half away from zero on the decimal the user sees (repr); binary half-even would give
    # 2.67, 0.12 and 1.0 -- common practice for published tables, no single source
    (2.675, 2, "2.68"), (0.125, 2, "0.13"), (1.05, 1, "1.1"), (-2.5, 0, "-3"),
    (0.5, 0, "1"), (-0.0001, 2, "0.00"), (-0.0, 1, "0.0"), (1234567.891, 1, "1234567.9"),
    (math.nan, 2, ""), (math.inf, 1, "inf"),
])
def test_fmt_number_rounds_half_away_from_zero(x: float, d: int, expected: str) -> None:
    assert fmt_number(x, d) == expected


def test_grouping_and_counts() -> None:
    assert fmt_number(916927110.4, 0, grouping=True) == "916,927,110"
    assert fmt_count(1402.0) == "1,402"
    assert fmt_count(None) == ""


@settings(max_examples=200, deadline=None)
@given(st.integers(min_value=-10**9, max_value=10**9), st.integers(min_value=0, max_value=6))
def test_exact_decimals_print_unchanged(k: int, d: int) -> None:
    # k / 10^d written with d decimals must come back as that decimal (property, no source)
    x = k / 10**d
    assert Decimal(fmt_number(x, d)) == Decimal(k).scaleb(-d)


@settings(max_examples=200, deadline=None)
@given(st.floats(min_value=-1e9, max_value=1e9, allow_nan=False), st.integers(0, 6))
def test_rounding_error_at_most_half_a_unit(x: float, d: int) -> None:
    shown = Decimal(fmt_number(x, d))
    assert abs(shown - Decimal(repr(x))) <= Decimal(5).scaleb(-d - 1)


@pytest.mark.parametrize("se,expected", [(0.30, 2), (0.053, 3), (2150.0, 0), (1.45, 1),
                                         (0.0, 2), (math.nan, 2)])
def test_auto_decimals_give_two_significant_digits_of_se(se: float, expected: int) -> None:
    assert auto_decimals(se) == expected


ROW = {"estimate": 0.3115, "se": 0.01452, "ci_low": 0.2841, "ci_high": 0.34115, "n": 1480,
       "cv": 0.0466, "deff": 1.437}


def test_cell_templates_from_the_brief() -> None:
    mean = {**ROW, "estimate": 24.47, "se": 0.2963, "ci_low": 23.9, "ci_high": 25.1}
    assert cell_text("{est} ({se})", mean, decimals=1, se_decimals=2, scale=1) == "24.5 (0.30)"
    assert (cell_text("{pct} ({lo}–{hi})", ROW, decimals=1, se_decimals=2, scale=100)
            == "31.2% (28.4–34.1)")
    assert (cell_text("{est} [{n}; cv {cv}; deff {deff}]", ROW, decimals=3, se_decimals=3,
                      scale=1) == "0.312 [1,480; cv 4.7%; deff 1.44]")


def test_template_fields_rejects_format_specs() -> None:
    assert template_fields("{pct} ({lo}–{hi})") == ["pct", "lo", "hi"]
    with pytest.raises(ValueError, match="plain name"):
        template_fields("{est:.2f}")


def test_reason_breakdown_order_and_zeros() -> None:
    counts = {"skipped": 903, "dont_know": 41, "refused": 12, "invalid": 0, "not_eligible": 3}
    assert (reason_breakdown(counts, ["dont_know", "refused", "skipped"])
            == "dk 41 · ref 12 · skip 903 · ne 3")
    assert reason_breakdown({}) == ""


def test_unusual_reasons_get_a_short_form_in_the_legend() -> None:
    legend = reason_legend(["dont_know", "not_applicable", "declared_88", "proxy"])
    assert "na = not applicable" in legend and "d88 = declared 88" in legend
    assert "dk = don't know" in legend and "prox = proxy" in legend
    assert "not_applicable = not_applicable" not in legend
    assert [short_reason(r) for r in ("refused", "not_measured", "gone")] == ["ref", "nm", "gone"]
    assert "gone =" not in reason_legend(["gone"])  # a short form that is the word: no "x = x"


def test_flag_notes_give_one_mark_per_rule_in_order_of_use() -> None:
    notes = FlagNotes()
    assert notes.mark(("df<8",)) == "‡"
    assert notes.mark(("neff<30", "df<8"), suppress=True) == "§‡"
    lines = notes.notes("—")
    assert lines[0].startswith("‡ Flagged by reliability rule df<8: fewer than 8 degrees")
    assert lines[-1].startswith("— Estimate not shown")
    assert notes.rules == ("df<8", "neff<30")


def test_group_text() -> None:
    assert [group_text(v) for v in (None, math.nan, 2.0, 2.5, "Male")] == [
        "All", "All", "2", "2.5", "Male"]
