"""Drafting a codebook from file metadata, and checking a codebook against a file.

The special-code families (7/77/777 don't know, 9/99/999 refused, 8/88/888 "none" = 0) and the
unit-prefixed pattern (1xx/2xx/3xx/4xx) are common practice in telephone health-survey
codebooks, no single source (/work/shared/REFERENCES.md section 11). The suspicion heuristic is
our own and documented in wstats/decoding/draft.py and docs/codebook.md.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from wstats.decoding.codebook import Codebook, load_codebook
from wstats.decoding.draft import check_codebook, draft_codebook, suspected_codes
from wstats.readers.raw import RawColumn, RawTable

NAN = np.nan


def table(*cols: RawColumn) -> RawTable:
    """Build a RawTable from columns (no reader involved)."""
    n = len(cols[0].data)
    return RawTable("/data/survey.sav", "sav", "test", n, {c.name: c for c in cols},
                    [c.name for c in cols])


def survey() -> RawTable:
    """A small fictional survey with typical special codes."""
    rng = np.random.default_rng(2024)
    n = 1000
    sleep = rng.integers(3, 12, n).astype(float)
    sleep[:40], sleep[40:60], sleep[60:100] = 77, 99, NAN
    exer = rng.choice([101, 102, 203, 205, 301, 310, 402], n).astype(float)
    exer[:30], exer[30:40], exer[40:45] = 777, 888, 999
    yn = rng.choice([1.0, 2.0], n)
    yn[:20], yn[20:30] = 7, 9
    dist = rng.choice([1.0, 2.0, 3.0], n)
    tags = np.zeros(n, np.uint8)
    dist[:5], dist[5:9], tags[5:9] = 8, NAN, ord("a")
    return table(
        RawColumn("SLEEP_HRS", sleep, label='Hours of "sleep"\non a usual night'),
        RawColumn("EXER_FREQ", exer, label="Exercise – how often"),
        RawColumn("EVER_SMK", yn, value_labels={1.0: "Yes", 2.0: "No", 7.0: "DK/NS",
                                                 9.0: "Refused"}),
        RawColumn("ar_dist", dist, value_labels={1.0: "North", 2.0: "South", 3.0: "East",
                                                  8.0: "Not eligible"}, user_missing=[8.0],
                  tags=tags),
        RawColumn("COMMENT", np.array(["a", "", "b", " ", "c"] * 200, dtype=object),
                  numeric=False),
    )


def test_draft_loads_and_lists_metadata(tmp_path: Path) -> None:
    text = draft_codebook(survey())
    path = tmp_path / "draft.toml"
    path.write_text(text, encoding="utf-8")
    book = load_codebook(path)
    assert book.variables["SLEEP_HRS"].label == 'Hours of "sleep"\non a usual night'
    assert book.variables["EXER_FREQ"].label == "Exercise – how often"
    assert book.kind_of("EVER_SMK") == "binary"  # 7 and 9 are suspected, leaving Yes/No
    assert book.kind_of("ar_dist") == "categorical" and book.kind_of("COMMENT") == "text"
    assert book.labels_for("ar_dist") == {1.0: "North", 2.0: "South", 3.0: "East"}
    # file declarations become codes; the reasons they use are declared
    assert book.variables["ar_dist"].codes.numeric[8.0].reason == "declared_8"
    assert book.variables["ar_dist"].codes.tags["a"].reason == "tag_a"
    assert set(book.reasons) == {"declared_8", "tag_a"}


def test_draft_comments_suspected_codes_with_counts() -> None:
    text = draft_codebook(survey())
    assert '# 77 = "dont_know"   # suspected special code: 40 rows at the top of the range' \
        in text
    assert '# 99 = "refused"   # suspected special code: 20 rows' in text
    assert "# 888 = 0   # suspected 'none' code (a valid 0): 10 rows" in text
    assert '# 7 = "dont_know"   # suspected special code: 20 rows' in text
    assert "# [variables.EXER_FREQ.unit_prefixed]   # suspected: 100% of values" in text
    assert '# blank = "skipped"   # 40 blank rows' in text
    assert '# blank = "skipped"   # 400 blank rows' in text  # "" and " " in COMMENT
    assert "# range = [3, 11]" in text


def test_accepting_the_suggestions_decodes_as_suggested(tmp_path: Path) -> None:
    raw = survey()
    text = re.sub(r"(?m)^# (\d+ = |\[variables\.\w+\.unit_prefixed\]|to = )", r"\1",
                  draft_codebook(raw))
    path = tmp_path / "accepted.toml"
    path.write_text(text, encoding="utf-8")
    ds = load_codebook(path).decode(raw)
    counts = ds["SLEEP_HRS"].reason_counts()
    assert (counts["dont_know"], counts["refused"], counts["skipped"]) == (40, 20, 40)
    exer = ds["EXER_FREQ"]
    assert exer.reason_counts()["dont_know"] == 30 and exer.reason_counts()["refused"] == 5
    assert (exer.values[30:40] == 0).all()  # 888 -> 0
    assert set(np.unique(exer.values[45:])) <= {365.0, 730.0, 156.0, 260.0, 12.0, 120.0, 2.0}
    assert ds["ar_dist"].reason_counts()["declared_8"] == 5


def test_quoting_of_odd_names_and_codes(tmp_path: Path) -> None:
    raw = table(RawColumn("my var", np.array([1.0, -9.0, 2.5]), label="tab\tand \x7f",
                          value_labels={-9.0: "Weird", 2.5: "Half"}, user_missing=[-9.0]))
    text = draft_codebook(raw)
    assert '[variables."my var"]' in text and '"-9" = "declared_m9"' in text
    path = tmp_path / "odd.toml"
    path.write_text(text, encoding="utf-8")
    book = load_codebook(path)
    assert book.variables["my var"].label == "tab\tand \x7f"
    assert book.labels_for("my var") == {2.5: "Half"}


def test_suspicion_heuristic_spares_ordinary_values() -> None:
    rng = np.random.default_rng(3)
    scale = rng.integers(1, 10, 2000).astype(float)  # a 1-9 scale: 7, 8, 9 are answers
    assert suspected_codes(scale) == []
    age = rng.integers(18, 99, 5000).astype(float)  # 77 and 88 are ages here
    assert suspected_codes(age) == []
    topcoded = np.concatenate([age, np.full(400, 99.0)])  # a spike at the top
    assert suspected_codes(topcoded) == [(99.0, int((topcoded == 99).sum()))]
    likert = np.concatenate([rng.integers(1, 6, 500), [7] * 12, [9] * 3]).astype(float)
    assert suspected_codes(likert) == [(7.0, 12), (9.0, 3)]  # a gap above 5


def test_check_counts_rules_unexplained_and_absent() -> None:
    raw = survey()
    book = Codebook.from_dict({
        "variables": {"SLEEP_HRS": {"range": [1, 10], "codes": {"77": "dont_know"}},
                      "SLEEP_HR": {}},
        "derived": {"TWICE": {"expr": "SLEEP_HRS * 2"}}})
    check = check_codebook(raw, book)
    sleep = check.frame[check.frame.variable == "SLEEP_HRS"]
    assert sleep[["raw_code", "reason", "count"]].values.tolist() == [
        ["77", "dont_know", 40], ["blank", "skipped", 40]]
    assert int(check.frame["count"].sum()) == 40 + 40 + 5 + 4 + 400
    odd = check.unexplained
    assert odd.values.tolist() == [["SLEEP_HRS", 11.0, int((raw.columns["SLEEP_HRS"].data ==
                                                             11).sum())],
                                   ["SLEEP_HRS", 99.0, 20]]
    assert check.absent == (("SLEEP_HR", "SLEEP_HRS"),)
    assert not check.ok and check.problems == ()


def test_check_collects_problems_instead_of_failing() -> None:
    raw = survey()
    book = Codebook.from_dict({
        "family": [{"name": "a", "match": ["E*"], "codes": {"9": "refused"}},
                   {"name": "b", "digits": 1, "codes": {"9": "dont_know"}}],
        "derived": {"R": {"expr": "SLEEP / 2"}}})
    check = check_codebook(raw, book)
    assert len(check.problems) == 2 and not check.ok
    assert "EVER_SMK: code 9 means 'refused' in family 'a'" in check.problems[0]
    assert "reads 'SLEEP', which is neither a column" in check.problems[1]
    clean = check_codebook(raw, Codebook())
    assert clean.ok and clean.unexplained.empty


def test_check_shows_what_a_value_substitute_became() -> None:
    # 888 = "none" recoded to 0 (common practice in health-survey codebooks, no single source)
    book = Codebook.from_dict({"variables": {"EXER_FREQ": {
        "codes": {"777": "dont_know", "888": 0, "999": "refused"}}}})
    check = check_codebook(survey(), book)
    rows = check.frame[check.frame.variable == "EXER_FREQ"]
    assert rows[["raw_code", "reason", "count"]].values.tolist() == [
        ["777", "dont_know", 30], ["888", "valid", 10], ["999", "refused", 5]]
    assert rows["value"].tolist()[1] == 0.0 and np.isnan(rows["value"].tolist()[0])
