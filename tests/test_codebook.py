"""Codebook loading, validation and decoding.

The code families (7/77/777 don't know, 9/99/999 refused, 8/88/888 "none" = 0, blank = not
asked) are common practice in telephone health-survey codebooks, no single source
(/work/shared/REFERENCES.md section 11). Unit-prefixed answers (1xx per day, 2xx per week, 3xx
per month, 4xx per year) and the per-year factors 365/52/12/1 are common practice too, no
single source; the expected rates below are recomputed by hand from those factors.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from wstats.decoding.codebook import Codebook, decode, load_codebook
from wstats.decoding.columns import Dataset
from wstats.errors import CodebookError, ExpressionError
from wstats.readers.raw import RawColumn, RawTable

NAN = np.nan


def table(*cols: RawColumn, path: str = "survey.sav") -> RawTable:
    """Build a RawTable from columns (no reader involved)."""
    n = len(cols[0].data)
    return RawTable(path, "sav", "test", n, {c.name: c for c in cols}, [c.name for c in cols])


def num(name: str, values: list[float], **kw: object) -> RawColumn:
    """Build a numeric raw column."""
    return RawColumn(name, np.array(values, dtype=np.float64), **kw)  # type: ignore[arg-type]


def reasons_of(ds: Dataset, name: str) -> list[str]:
    """Return the reason names of a decoded column, row by row."""
    col = ds[name]
    return [ds.vocabulary.name(r) for r in col.reasons]


def cb(d: dict[str, object]) -> Codebook:
    """Validate a codebook dict."""
    return Codebook.from_dict(d, source="test.toml")


FAMILIES = {
    "family": [
        {"name": "one-digit", "digits": 1, "codes": {"7": "dont_know", "9": "refused"}},
        {"name": "two-digit", "digits": 2, "codes": {"77": "dont_know", "99": "refused",
                                                      "88": 0}},
        {"name": "three-digit", "digits": 3, "codes": {"777": "dont_know", "999": "refused",
                                                        "888": 0}},
    ]
}


# --- code families ----------------------------------------------------------------------

def test_one_digit_family_codes_7_and_9() -> None:
    # common practice, no single source: 7 = don't know, 9 = refused on 1-digit items
    ds = decode(table(num("SMOKE", [1, 2, 7, 9, 1])), cb(FAMILIES))
    assert reasons_of(ds, "SMOKE") == ["valid", "valid", "dont_know", "refused", "valid"]
    np.testing.assert_array_equal(ds["SMOKE"].values, [1, 2, NAN, NAN, 1])


def test_two_digit_family_and_88_is_zero() -> None:
    # common practice, no single source: 77 don't know, 99 refused, 88 "none" = a valid 0
    ds = decode(table(num("DRINKS", [3, 77, 99, 88, 12])), cb(FAMILIES))
    assert reasons_of(ds, "DRINKS") == ["valid", "dont_know", "refused", "valid", "valid"]
    np.testing.assert_array_equal(ds["DRINKS"].values, [3, NAN, NAN, 0, 12])


def test_three_digit_family_and_888_is_zero() -> None:
    # common practice, no single source: 777 / 999 / 888 -> don't know / refused / 0
    ds = decode(table(num("WEIGHT_LB", [150, 777, 999, 888, 210])), cb(FAMILIES))
    assert reasons_of(ds, "WEIGHT_LB") == ["valid", "dont_know", "refused", "valid", "valid"]
    np.testing.assert_array_equal(ds["WEIGHT_LB"].values, [150, NAN, NAN, 0, 210])


def test_family_by_digits_leaves_other_widths_alone() -> None:
    # 7 in a two-digit item is seven, not "don't know" (the one-digit family does not apply)
    ds = decode(table(num("DAYS", [7, 9, 30, 77])), cb(FAMILIES))
    assert reasons_of(ds, "DAYS") == ["valid", "valid", "valid", "dont_know"]


def test_family_by_glob() -> None:
    d = {"family": [{"name": "sleep", "match": ["SLP_*"], "codes": {"77": "dont_know"}}]}
    ds = decode(table(num("SLP_HRS", [7, 77]), num("AGE", [77, 30])), cb(d))
    assert reasons_of(ds, "SLP_HRS") == ["valid", "dont_know"]
    assert reasons_of(ds, "AGE") == ["valid", "valid"]


def test_variable_rule_overrides_family_for_same_code() -> None:
    # documented: a variable's own codes win over its families' codes for the same raw code;
    # mapping a code to itself exempts it from a family
    d = {**FAMILIES, "variables": {"DAYS7": {"codes": {"7": 7, "9": "missing"}}}}
    ds = decode(table(num("DAYS7", [7, 9, 1])), cb(d))
    assert reasons_of(ds, "DAYS7") == ["valid", "missing", "valid"]
    np.testing.assert_array_equal(ds["DAYS7"].values, [7, NAN, 1])


def test_two_families_in_conflict_are_an_error_naming_both() -> None:
    d = {"family": [{"name": "a", "match": ["X*"], "codes": {"7": "dont_know"}},
                    {"name": "b", "digits": 1, "codes": {"7": "refused"}}]}
    book = cb(d)  # the digits family cannot be judged before the data are seen
    with pytest.raises(CodebookError, match=r"XA: code 7 means 'dont_know' in family 'a' but "
                                            r"'refused' in family 'b'"):
        decode(table(num("XA", [1, 7])), book)


def test_two_glob_families_in_conflict_fail_at_load_for_listed_variables() -> None:
    d = {"family": [{"name": "a", "match": ["*"], "codes": {"9": "refused"}},
                    {"name": "b", "match": ["Q*"], "codes": {"9": "dont_know"}}],
         "variables": {"Q1": {"label": "Question one"}}}
    with pytest.raises(CodebookError, match="family 'a' but 'dont_know' in family 'b'"):
        cb(d)


def test_families_agreeing_on_a_code_are_fine() -> None:
    d = {"family": [{"name": "a", "match": ["*"], "codes": {"9": "refused"}},
                    {"name": "b", "match": ["Q*"], "codes": {"9": "refused"}}]}
    assert reasons_of(decode(table(num("Q1", [9, 1])), cb(d)), "Q1") == ["refused", "valid"]


# --- unit-prefixed answers --------------------------------------------------------------

def unit_book(to: str, **extra: object) -> Codebook:
    """Codebook with one unit-prefixed count variable EX."""
    return cb({"variables": {"EX": {"kind": "count",
                                    "codes": {"777": "dont_know", "999": "refused", "888": 0},
                                    "unit_prefixed": {"to": to, **extra}}}})


def test_unit_prefixed_to_year() -> None:
    # common practice, no single source: per-year factors day 365, week 52, month 12, year 1
    # 103 = 3/day -> 1095/yr; 203 = 3/week -> 156; 303 = 3/month -> 36; 403 = 3/year -> 3
    ds = decode(table(num("EX", [103, 203, 303, 403])), unit_book("year"))
    np.testing.assert_allclose(ds["EX"].values, [3 * 365, 3 * 52, 3 * 12, 3])
    assert reasons_of(ds, "EX") == ["valid"] * 4


def test_unit_prefixed_to_week() -> None:
    # to another unit: per-year rate / that unit's per-year factor (203 -> 3/week exactly)
    ds = decode(table(num("EX", [203, 103, 303, 403])), unit_book("week"))
    np.testing.assert_allclose(ds["EX"].values, [3, 3 * 365 / 52, 3 * 12 / 52, 3 / 52])


def test_unit_prefixed_to_day_and_month() -> None:
    day = decode(table(num("EX", [103, 210])), unit_book("day"))
    np.testing.assert_allclose(day["EX"].values, [3, 10 * 52 / 365])
    month = decode(table(num("EX", [303, 102])), unit_book("month"))
    np.testing.assert_allclose(month["EX"].values, [3, 2 * 365 / 12])


def test_unit_prefixed_codes_take_precedence_over_the_prefix() -> None:
    # 777 / 999 are not "77 per month-of-7"; 888 is the value 0, not "88 per unit 8"
    ds = decode(table(num("EX", [777, 999, 888, 200])), unit_book("year"))
    assert reasons_of(ds, "EX") == ["dont_know", "refused", "valid", "valid"]
    np.testing.assert_array_equal(ds["EX"].values, [NAN, NAN, 0, 0])


def test_unit_prefixed_unknown_leading_digit_and_bad_width_are_invalid() -> None:
    ds = decode(table(num("EX", [503, 15, 1003, 102.5, NAN])), unit_book("year"))
    assert reasons_of(ds, "EX") == ["invalid", "invalid", "invalid", "invalid", "skipped"]


def test_unit_prefixed_conversion_in_tiles_equals_one_pass(monkeypatch: pytest.MonkeyPatch
                                                           ) -> None:
    # common practice, no source: the conversion runs on row tiles; tiles of 3 rows (cutting
    # through codes, blanks and bad prefixes) give what one tile over all rows gives
    from wstats.decoding import columns as _column
    codes = [103, 777, 203, NAN, 503, 888, 303, 102.5, 403, 999, 15, 210] * 3
    whole = decode(table(num("EX", codes)), unit_book("week"))
    monkeypatch.setattr(_column, "ROW_TILE", 3)
    tiled = decode(table(num("EX", codes)), unit_book("week"))
    np.testing.assert_array_equal(tiled["EX"].values, whole["EX"].values)
    assert reasons_of(tiled, "EX") == reasons_of(whole, "EX")
    assert reasons_of(whole, "EX")[:6] == ["valid", "dont_know", "valid", "skipped", "invalid",
                                           "valid"]


def test_unit_prefixed_factors_are_overridable() -> None:
    # a user may prefer 365.25 days and 52.1775 weeks per year (Julian year; from memory)
    book = unit_book("year", factors={"day": 365.25, "week": 52.1775, "month": 12, "year": 1})
    ds = decode(table(num("EX", [102, 202])), book)
    np.testing.assert_allclose(ds["EX"].values, [2 * 365.25, 2 * 52.1775])


def test_unit_prefixed_custom_units_and_range_after_conversion() -> None:
    book = cb({"variables": {"EX": {"range": [0, 100], "unit_prefixed": {
        "to": "week", "units": {"1": "day", "2": "week"}}}}})
    ds = decode(table(num("EX", [102, 250, 302])), book)
    # 102 -> 2*365/52 = 14.04/week (in range); 250 -> 50/week; 3xx unknown here -> invalid
    np.testing.assert_allclose(ds["EX"].values, [2 * 365 / 52, 50, NAN])
    assert reasons_of(ds, "EX") == ["valid", "valid", "invalid"]
    over = decode(table(num("EX", [199])), book)  # 99/day = 696/week > 100 -> invalid
    assert reasons_of(over, "EX") == ["invalid"]


# --- blanks and ranges ------------------------------------------------------------------

def test_blank_defaults_to_skipped_and_can_be_overridden() -> None:
    raw = table(num("A", [1, NAN]), num("B", [NAN, 2]))
    assert reasons_of(decode(raw), "A") == ["valid", "skipped"]
    book = cb({"defaults": {"blank": "missing"}, "variables": {"B": {"blank": "refused"}}})
    ds = decode(raw, book)
    assert reasons_of(ds, "A") == ["valid", "missing"]
    assert reasons_of(ds, "B") == ["refused", "valid"]


def test_blank_as_a_value() -> None:
    ds = decode(table(num("N", [NAN, 4])), cb({"variables": {"N": {"blank": 0}}}))
    np.testing.assert_array_equal(ds["N"].values, [0, 4])


def test_range_marks_out_of_range_invalid_but_not_substitutes() -> None:
    book = cb({"variables": {"SLEEP_HRS": {"range": [1, 24], "codes": {
        "77": "dont_know", "99": "refused", "88": 0}}}})
    ds = decode(table(num("SLEEP_HRS", [0.5, 1, 24, 25, 77, 88, 99, 50])), book)
    assert reasons_of(ds, "SLEEP_HRS") == ["invalid", "valid", "valid", "invalid",
                                           "dont_know", "valid", "refused", "invalid"]
    np.testing.assert_array_equal(ds["SLEEP_HRS"].values, [NAN, 1, 24, NAN, NAN, 0, NAN, NAN])


# --- codes declared by the file ---------------------------------------------------------

def test_declared_codes_stay_distinct_and_take_names_from_labels() -> None:
    col = num("Q", [1, 7, 9, 8, 2], value_labels={
        1: "Yes", 2: "No", 7: "Don't know / Not sure", 9: "Refused", 8: "Something else"},
        user_missing=[7.0, 8.0, 9.0])
    ds = decode(table(col))
    assert reasons_of(ds, "Q") == ["valid", "dont_know", "refused", "declared_8", "valid"]
    assert ds["Q"].value_labels == {1.0: "Yes", 2.0: "No"}
    assert ds["Q"].kind == "binary"


def test_declared_codes_without_labels_never_merge() -> None:
    col = num("Q", [7, 9, -9, 7.5, 3], user_missing=[7.0, 9.0, -9.0, 7.5])
    ds = decode(table(col))
    assert reasons_of(ds, "Q") == ["declared_7", "declared_9", "declared_m9", "declared_7_5",
                                   "valid"]


@pytest.mark.parametrize(("label", "reason"), [
    ("DK", "dont_know"), ("dont know", "dont_know"), ("Not sure", "dont_know"),
    ("Refusal", "refused"), ("REFUSED", "refused"), ("Not asked", "not_applicable"),
    ("Legitimate skip", "not_applicable"), ("Inapplicable", "not_applicable"),
    ("Not applicable", "not_applicable"), ("Not eligible", "not_applicable"),
    ("Not ascertained", "missing"), ("No answer", "missing"),
    ("Refused / Don't know", "declared_97"), ("Other", "declared_97"),
    ("Missing - not applicable", "not_applicable"), ("Weiß nicht", "dont_know"),
    ("Sans objet", "not_applicable"), ("No sabe", "dont_know"), ("Don’t know", "dont_know"),
])
def test_declared_code_naming_from_label(label: str, reason: str) -> None:
    ds = decode(table(num("Q", [97], value_labels={97: label}, user_missing=[97.0])))
    assert reasons_of(ds, "Q") == [reason]


def test_declared_range_keeps_labelled_codes_apart() -> None:
    col = num("Q", [-1, -2, -3, 5], value_labels={-1: "Refused", -2: "Don't know"},
              user_missing=[(-3.0, -1.0)])
    ds = decode(table(col))
    assert reasons_of(ds, "Q") == ["refused", "dont_know", "declared_m3_to_m1", "valid"]


def test_tags_become_reasons_and_case_folds() -> None:
    tags = np.array([0, ord("a"), ord("A"), ord("_"), ord("b"), 0], dtype=np.uint8)
    col = num("T", [1, NAN, NAN, NAN, NAN, NAN], tags=tags)
    ds = decode(table(col))
    assert reasons_of(ds, "T") == ["valid", "tag_a", "tag_a", "tag_underscore", "tag_b",
                                   "skipped"]


@pytest.mark.parametrize("threads", [1, 2])
def test_columns_decoded_at_once_keep_the_vocabulary_order(
        threads: int, monkeypatch: pytest.MonkeyPatch) -> None:
    # common practice, no source: columns are decoded on threads, each on its own vocabulary;
    # the reasons they meet join in column order, as one after another would (the order ranks
    # the extra reasons' precedence, which a derived variable then uses)
    from wstats.decoding import decode as _decode
    monkeypatch.setattr(_decode, "_THREADS", threads)

    def tagged(name: str, letters: str) -> RawColumn:
        tags = np.array([0, *(ord(c) for c in letters)], dtype=np.uint8)
        return num(name, [1.0] + [NAN] * len(letters), tags=tags)

    raw = table(tagged("A", "cb"), tagged("B", "ad"), tagged("C", "db"))
    book = cb({"derived": {"S": {"expr": "A + B + C"}}})
    ds = decode(raw, book)
    # within a column the tags are met in letter order; columns in file order
    assert ds.vocabulary.extra == ("tag_b", "tag_c", "tag_a", "tag_d")
    assert reasons_of(ds, "C") == ["valid", "tag_d", "tag_b"]
    # the precedence of extras follows their order: the earlier-registered tag wins
    assert reasons_of(ds, "S") == ["valid", "tag_c", "tag_b"]


def test_codebook_overrides_file_declarations_and_tags() -> None:
    tags = np.array([0, ord("a"), 0, 0], dtype=np.uint8)
    col = num("T", [7, NAN, 9, 1], tags=tags, user_missing=[7.0, 9.0],
              value_labels={7: "Don't know"})
    book = cb({"reasons": {"not_eligible": "Not in the item's universe"},
               "variables": {"T": {"codes": {".a": "refused", "7": "not_eligible", "9": 0}}}})
    ds = decode(table(col), book)
    assert reasons_of(ds, "T") == ["not_eligible", "refused", "valid", "valid"]
    np.testing.assert_array_equal(ds["T"].values, [NAN, NAN, 0, 1])
    assert ds.vocabulary.extra[0] == "not_eligible"


# --- kinds and labels -------------------------------------------------------------------

def test_kind_inference_and_codebook_kind() -> None:
    raw = table(num("C", [1, 2, 3], value_labels={1: "a", 2: "b", 3: "c"}),
                num("B", [1, 2, 1], value_labels={1: "y", 2: "n"}), num("X", [1.5, 2, 3]),
                RawColumn("S", np.array(["a", "", "b"], dtype=object), numeric=False))
    ds = decode(raw)
    assert [ds[n].kind for n in "CBXS"] == ["categorical", "binary", "continuous", "text"]
    assert reasons_of(ds, "S") == ["valid", "skipped", "valid"]
    book = cb({"variables": {"C": {"kind": "count", "labels": {"1": "one"}, "label": "Cnt"}}})
    dc = decode(raw, book)
    assert (dc["C"].kind, dc["C"].value_labels, dc["C"].label) == ("count", {1.0: "one"}, "Cnt")
    assert book.kind_of("C") == "count" and book.kind_of("Z") is None
    assert book.labels_for("C") == {1.0: "one"}


def test_text_codes_and_text_read_as_numbers() -> None:
    # a CSV column with 'NA' cells arrives as text; the codebook's codes make it numeric
    col = RawColumn("AGE", np.array(["34", "NA", "", "77"], dtype=object), numeric=False)
    book = cb({"variables": {"AGE": {"range": [18, 99], "codes": {"NA": "missing",
                                                                   "77": "dont_know"}}}})
    ds = decode(table(col), book)
    assert reasons_of(ds, "AGE") == ["valid", "missing", "skipped", "dont_know"]
    np.testing.assert_array_equal(ds["AGE"].values, [34, NAN, NAN, NAN])


def test_text_that_is_not_a_number_under_numeric_rules_is_an_error() -> None:
    col = RawColumn("EX", np.array(["101", "lots"], dtype=object), numeric=False)
    book = cb({"variables": {"EX": {"unit_prefixed": {"to": "year"}}}})
    with pytest.raises(CodebookError, match=r"\[variables.EX\]: EX is treated as numeric .* "
                                            r"holds text such as 'lots' in 1 rows"):
        decode(table(col), book)


# --- derived variables ------------------------------------------------------------------

def test_derived_bmi_and_reason_precedence() -> None:
    # body mass index = kg / m^2 (WHO definition, from memory); 70 kg, 175 cm -> 22.857
    raw = table(num("KG", [70, 777, 70, 999, 80]), num("CM", [175, 180, 999, 777, 0]))
    book = cb({"variables": {"KG": {"codes": {"777": "dont_know", "999": "refused"}},
                             "CM": {"codes": {"777": "dont_know", "999": "refused"}}},
               "derived": {"bd_bmi": {"expr": "KG / (CM / 100) ^ 2", "label": "Body mass index"}}})
    ds = decode(raw, book)
    np.testing.assert_allclose(ds["bd_bmi"].values, [70 / 1.75**2, NAN, NAN, NAN, NAN])
    # precedence refused > dont_know; division by zero is invalid
    assert reasons_of(ds, "bd_bmi") == ["valid", "dont_know", "refused", "refused", "invalid"]
    assert ds["bd_bmi"].label == "Body mass index" and ds["bd_bmi"].kind == "continuous"


def test_derived_in_tiles_equals_one_pass(monkeypatch: pytest.MonkeyPatch) -> None:
    # common practice, no source: derived variables are evaluated on row tiles; tiles of 2
    # rows give what one pass gives (values, reasons, derived on derived)
    from wstats.decoding import columns as _column
    raw = table(num("KG", [70, 777, 70, 999, 80, 95, 60]),
                num("CM", [175, 180, 999, 777, 0, 160, 181]))
    book = cb({"variables": {"KG": {"codes": {"777": "dont_know", "999": "refused"}},
                             "CM": {"codes": {"777": "dont_know", "999": "refused"}}},
               "derived": {"bd_bmi": {"expr": "KG / (CM / 100) ^ 2"},
                           "OBESE": {"expr": "bd_bmi >= 30"}}})
    whole = decode(raw, book)
    monkeypatch.setattr(_column, "ROW_TILE", 2)
    tiled = decode(raw, book)
    for name in ("bd_bmi", "OBESE"):
        np.testing.assert_array_equal(tiled[name].values, whole[name].values)
        assert reasons_of(tiled, name) == reasons_of(whole, name)
    assert reasons_of(tiled, "OBESE")[4:] == ["invalid", "valid", "valid"]


def test_derived_on_derived_in_dependency_order_and_boolean_kind() -> None:
    book = cb({"derived": {"OBESE": {"expr": "bd_bmi >= 30"},
                           "bd_bmi": {"expr": "KG / M ^ 2"}}})
    assert list(book.derived) == ["bd_bmi", "OBESE"]
    ds = decode(table(num("KG", [100, 60]), num("M", [1.7, 1.7])), book)
    np.testing.assert_array_equal(ds["OBESE"].values, [1.0, 0.0])  # 34.6 and 20.8
    assert ds["OBESE"].kind == "binary"
    assert book.raw_columns_for(["OBESE", "AGE"]) == ["KG", "M", "AGE"]


def test_derived_cycle_is_an_error() -> None:
    with pytest.raises(CodebookError, match="cycle: A -> B -> A"):
        cb({"derived": {"A": {"expr": "B + 1"}, "B": {"expr": "A * 2"}}})


def test_derived_unknown_input_is_an_error_with_suggestion() -> None:
    book = cb({"derived": {"R": {"expr": "WEIGHT_KG / 2"}}})
    with pytest.raises(ExpressionError, match=r"reads 'WEIGHT_KG', which is neither a column "
                                              r"of survey.sav .*did you mean 'WEIGHT_KGS'"):
        decode(table(num("WEIGHT_KGS", [1])), book)


def test_derived_skipped_when_its_inputs_were_not_read() -> None:
    raw = RawTable("s.sav", "sav", "t", 1, {"A": num("A", [1])}, ["A", "B"])
    ds = decode(raw, cb({"derived": {"C": {"expr": "A + B"}}}))
    assert list(ds) == ["A"]


def test_derived_forbidden_construct_is_an_expression_error() -> None:
    with pytest.raises(ExpressionError, match=r"\[derived.X\]: expression 'A.__class__' "
                                              r"column 2: attribute access"):
        cb({"derived": {"X": {"expr": "A.__class__"}}})


# --- loading and validation errors ------------------------------------------------------

def write(tmp_path: Path, text: str) -> Path:
    """Write a codebook file."""
    p = tmp_path / "book.toml"
    p.write_text(text, encoding="utf-8")
    return p


def test_load_full_codebook(tmp_path: Path) -> None:
    p = write(tmp_path, """
[survey]
name = "Tamarack Basin test"
population = 2400000
[design]
weight = "wt_final"
strata = "ds_strat"
[reasons]
not_eligible = "Not eligible"
[variables.SLEEP]
range = [1, 24]
codes = { 77 = "dont_know", 99 = "refused", 88 = 0, "-1" = "not_eligible" }
""")
    book = load_codebook(p)
    assert book.population == 2_400_000 and book.name == "Tamarack Basin test"
    assert book.design == {"weight": "wt_final", "strata": "ds_strat"}
    ds = book.decode(table(num("SLEEP", [-1, 8, 88])))
    assert reasons_of(ds, "SLEEP") == ["not_eligible", "valid", "valid"]


def test_toml_syntax_error_names_line_and_column(tmp_path: Path) -> None:
    p = write(tmp_path, '[variables.A]\nlabel = "ok"\ncodes = { 7 = dont_know }\n')
    with pytest.raises(CodebookError, match=r"book.toml line 3, column 15: TOML syntax error"):
        load_codebook(p)


def test_missing_codebook_file(tmp_path: Path) -> None:
    with pytest.raises(CodebookError, match="does not exist"):
        load_codebook(tmp_path / "nope.toml")


def test_unknown_reason_lists_known_and_line(tmp_path: Path) -> None:
    p = write(tmp_path, '[survey]\nname = "x"\n\n[variables.Q]\ncodes = { 7 = "dont_knw" }\n')
    with pytest.raises(CodebookError, match=r"line 4, \[variables.Q\]: code 7 names unknown "
                                            r"reason 'dont_knw'; did you mean 'dont_know'\?; "
                                            r"known reasons: skipped, dont_know"):
        load_codebook(p)


def test_unknown_kind() -> None:
    with pytest.raises(CodebookError, match=r"unknown kind 'categorial'; did you mean "
                                            r"'categorical'"):
        cb({"variables": {"Q": {"kind": "categorial"}}})


@pytest.mark.parametrize(("d", "message"), [
    ({"variabels": {}}, r"unknown key 'variabels'; did you mean 'variables'"),
    ({"variables": {"Q": {"lable": "x"}}}, r"\[variables.Q\]: unknown key 'lable'; did you "
                                           r"mean 'label'"),
    ({"family": [{"codes": {}, "digit": 3}]}, r"\[\[family\]\] #1: unknown key 'digit'"),
    ({"derived": {"D": {"expr": "1", "kid": "count"}}}, r"unknown key 'kid'; did you mean "
                                                         r"'kind'"),
])
def test_unknown_keys(d: dict[str, object], message: str) -> None:
    with pytest.raises(CodebookError, match=message):
        cb(d)


def test_range_min_above_max() -> None:
    with pytest.raises(CodebookError, match=r"range min 24 is greater than max 1"):
        cb({"variables": {"Q": {"range": [24, 1]}}})


def test_bad_unit_prefixed_tables() -> None:
    with pytest.raises(CodebookError, match=r"unit 'fortnight' has no per-year factor"):
        cb({"variables": {"Q": {"unit_prefixed": {"to": "fortnight"}}}})
    with pytest.raises(CodebookError, match=r"units map one leading digit"):
        cb({"variables": {"Q": {"unit_prefixed": {"units": {"12": "day"}}}}})


def test_bad_reason_name_and_bad_code_value() -> None:
    with pytest.raises(CodebookError, match=r"\[reasons\]: reason name 'Not-OK' is not allowed"):
        cb({"reasons": {"Not-OK": "x"}})
    with pytest.raises(CodebookError, match=r"'code 7' must be a number, got True"):
        cb({"variables": {"Q": {"codes": {"7": True}}}})


def test_kind_text_on_numeric_column_is_an_error() -> None:
    with pytest.raises(CodebookError, match="kind 'text' given but Q is numeric"):
        decode(table(num("Q", [1])), cb({"variables": {"Q": {"kind": "text"}}}))


def test_name_both_variable_and_derived() -> None:
    with pytest.raises(CodebookError, match="'Q' is both a variable and a derived variable"):
        cb({"variables": {"Q": {}}, "derived": {"Q": {"expr": "1"}}})


# --- read() -----------------------------------------------------------------------------

def test_read_csv_with_codebook_reads_only_needed_columns(tmp_path: Path) -> None:
    from wstats.decoding.load import read

    data = tmp_path / "s.csv"
    data.write_text("ID,KG,CM,OTHER\n1,70,175,x\n2,777,180,y\n3,80,,z\n", encoding="utf-8")
    book = write(tmp_path, '[variables.KG]\ncodes = { 777 = "dont_know" }\n'
                 '[derived.bd_bmi]\nexpr = "KG / (CM / 100) ^ 2"\n')
    ds = read(data, columns=["bd_bmi", "ID"], codebook=book)
    assert list(ds) == ["bd_bmi", "ID"]
    np.testing.assert_allclose(ds["bd_bmi"].values, [70 / 1.75**2, NAN, NAN])
    assert reasons_of(ds, "bd_bmi") == ["valid", "dont_know", "skipped"]
    assert ds.source == str(data)
    whole = read(data)
    assert list(whole) == ["ID", "KG", "CM", "OTHER"]


def test_read_unknown_column_is_an_error(tmp_path: Path) -> None:
    from wstats.decoding.load import read
    from wstats.errors import ColumnError

    data = tmp_path / "s.csv"
    data.write_text("KG,CM\n1,2\n", encoding="utf-8")
    with pytest.raises(ColumnError, match="KGS"):
        read(data, columns=["KGS"])


def test_one_code_written_twice_with_different_meanings() -> None:
    with pytest.raises(CodebookError, match=r"\[variables.Q\]: code 77 is written twice, as "
                                            r"'dont_know' and as 'refused'"):
        cb({"variables": {"Q": {"codes": {"77": "dont_know", "77.0": "refused"}}}})


def test_read_names_the_derived_variable_whose_input_is_absent(tmp_path: Path) -> None:
    from wstats.decoding.load import read

    data = tmp_path / "s.csv"
    data.write_text("KG,CM\n1,2\n", encoding="utf-8")
    book = write(tmp_path, '[derived.bd_bmi]\nexpr = "KG / (HEIGHT / 100) ^ 2"\n')
    with pytest.raises(ExpressionError, match=r"line 1, \[derived.bd_bmi\]: expression .* reads "
                                              r"'HEIGHT', which is neither a column of"):
        read(data, columns=["bd_bmi"], codebook=book)


def test_derived_variable_takes_the_memory_of_an_input_nobody_wants() -> None:
    # common practice, no source: a derived variable may be written over an input that is
    # neither wanted nor read by a later derived variable; values and reasons are as if not
    from wstats.decoding.decode import decode_table

    def raw() -> RawTable:
        return table(num("KG", [70, 777, 70, 999, 80]), num("CM", [175, 180, 999, 777, 0]),
                     num("AGE", [30, 40, 50, 60, 70]))
    book = cb({"variables": {"KG": {"codes": {"777": "dont_know", "999": "refused"}},
                             "CM": {"codes": {"777": "dont_know", "999": "refused"}}},
               "derived": {"bd_bmi": {"expr": "KG / (CM / 100) ^ 2"},
                           "KG_AGE": {"expr": "KG / AGE"}}})
    plain = decode_table(raw(), book)
    source = raw()
    cm = source.columns["CM"].data
    lent = decode_table(source, book, consume=True, keep=["bd_bmi", "AGE"])
    # KG is read again by KG_AGE, so CM lends its memory to bd_bmi; KG then lends to KG_AGE
    assert "CM" not in lent and "KG" not in lent
    assert lent["bd_bmi"].values is cm
    for name in ("bd_bmi", "KG_AGE", "AGE"):
        np.testing.assert_array_equal(lent[name].values, plain[name].values)
        assert reasons_of(lent, name) == reasons_of(plain, name)
    # a wanted input is never written over
    kept = decode_table(raw(), book, consume=True, keep=["bd_bmi", "KG", "CM"])
    np.testing.assert_array_equal(kept["CM"].values, plain["CM"].values)
    np.testing.assert_array_equal(kept["KG"].values, plain["KG"].values)
