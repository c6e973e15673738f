"""Reasons read from a file's own labels, on files written by pyreadstat (never by wstats).

The label words are common practice in survey codebooks (no single source; other languages
from memory), see wstats/decoding/label_reasons.py. The nonresponse denominators follow NCES
Statistical Standards (2012), Standard 1-3: items that do not apply leave the denominator.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pyreadstat
import pytest

from conftest import run_wstats
from wstats import Design, nonresponse, read
from wstats.decoding.draft import draft_codebook
from wstats.decoding.label_reasons import LABEL_WORDS, label_reason, only_reason_words
from wstats.decoding.reasons import Reasons
from wstats.readers.dispatch import read_raw


@pytest.mark.parametrize(("label", "strict", "loose"), [
    ("Don't know", "dont_know", "dont_know"),
    ("(7) Don't know/Not sure", "dont_know", "dont_know"),
    ("Refusal", "refused", "refused"),
    ("97. Prefer not to say", "refused", "refused"),
    ("NOT APPLICABLE", "not_applicable", "not_applicable"),
    ("Inapplicable - not asked", "not_applicable", "not_applicable"),
    ("No answer", "missing", "missing"),
    ("Trifft nicht zu", "not_applicable", "not_applicable"),
    ("NS/NC", "dont_know", "dont_know"),                # no sabe / no contesta: missing
    ("Don't know / no answer", "dont_know", "dont_know"),  # gives way to the specific one
    ("Don't know how to use it", None, "dont_know"),   # words besides: not special unless
    ("Refused / Don't know", None, None),               # declared; two reasons: none
    ("Yes", None, None),
    ("Unknowable", None, None),                         # whole words only
])
def test_word_table(label: str, strict: str | None, loose: str | None) -> None:
    assert only_reason_words(label) == strict
    assert label_reason(label) == loose


def test_every_phrase_names_its_own_reason() -> None:
    for reason, languages in LABEL_WORDS.items():
        for phrases in languages.values():
            for phrase in phrases:
                assert only_reason_words(phrase.title()) == reason, phrase


def _sav(tmp_path: Path) -> tuple[Path, pd.DataFrame]:
    rng = np.random.default_rng(11)
    n = 300
    q1 = rng.choice([1.0, 2.0, 7.0, 8.0, 9.0], n, p=[.45, .3, .1, .1, .05])
    q3 = rng.choice([1.0, 2.0, -1.0, -2.0], n, p=[.5, .4, .06, .04])
    frame = pd.DataFrame({"Q1": q1, "W": rng.uniform(1.0, 4.0, n).round(2),
                          "Q2": rng.choice([1.0, 2.0, 97.0], n), "Q3": q3})
    path = tmp_path / "labels.sav"
    pyreadstat.write_sav(
        frame, str(path),
        variable_value_labels={
            "Q1": {1: "Yes", 2: "No", 7: "Don't know", 8: "Not applicable", 9: "Refusal"},
            "Q2": {1: "Yes", 2: "No", 97: "Refused"},
            "Q3": {1: "Yes", 2: "No", -1: "No answer"}},
        missing_ranges={"Q1": [7, 8, 9], "Q3": [{"lo": -2, "hi": -1}]})
    return path, frame


def test_sav_user_missing_get_named_reasons(tmp_path: Path) -> None:
    path, frame = _sav(tmp_path)
    data = read(path, ["Q1", "Q2", "Q3"])
    counts = data["Q1"].reason_counts()
    q1, q3 = frame["Q1"], frame["Q3"]
    assert counts["dont_know"] == (q1 == 7).sum() and counts["refused"] == (q1 == 9).sum()
    assert counts["not_applicable"] == (q1 == 8).sum()
    counts = data["Q3"].reason_counts()
    assert counts["missing"] == (q3 == -1).sum()
    assert counts["declared_m2_to_m1"] == (q3 == -2).sum()  # in the range, no label
    assert data["Q1"].value_labels == {1.0: "Yes", 2.0: "No"}
    # 97 is not declared missing, but its label says nothing but "Refused"
    assert data["Q2"].reason_counts()["refused"] == (frame["Q2"] == 97).sum()
    assert data["Q2"].kind == "binary"


def test_a_codebook_overrides_what_labels_say(tmp_path: Path) -> None:
    path, frame = _sav(tmp_path)
    book = tmp_path / "book.toml"
    book.write_text('[variables.Q2]\ncodes = { 97 = "missing" }\n[variables.Q1]\n'
                    'codes = { 8 = "skipped" }\n', encoding="utf-8")
    data = read(path, ["Q1", "Q2"], codebook=book)
    assert data["Q2"].reason_counts()["missing"] == (frame["Q2"] == 97).sum()
    assert data["Q1"].reason_counts()["skipped"] == (frame["Q1"] == 8).sum()


def test_dta_tagged_missing_get_named_reasons(tmp_path: Path) -> None:
    frame = pd.DataFrame({"Q": [1.0, "a", "b", "c", "d", 2.0, None, "a"]}, dtype=object)
    path = tmp_path / "tags.dta"
    pyreadstat.write_dta(frame, str(path), missing_user_values={"Q": ["a", "b", "c", "d"]},
                         variable_value_labels={"Q": {1: "Yes", 2: "No", "a": "Don't know",
                                                      "b": "Refused", "c": "Inapplicable",
                                                      "d": "Other code"}})
    data = read(path, ["Q"])
    names = data["Q"].vocabulary.names
    assert [names[r] for r in data["Q"].reasons] == [
        "valid", "dont_know", "refused", "not_applicable", "tag_d", "valid", "skipped",
        "dont_know"]
    draft = draft_codebook(read_raw(path))
    assert '".a" = "dont_know"  # tagged missing in the file, label "Don\'t know", 2 rows' \
        in draft
    assert '".d" = "tag_d"' in draft


def test_draft_writes_what_it_inferred_as_confirmed_entries(tmp_path: Path) -> None:
    path, _ = _sav(tmp_path)
    draft = draft_codebook(read_raw(path))
    assert '8 = "not_applicable"  # declared missing in the file, label "Not applicable"' in draft
    assert '97 = "refused"  # labelled in the file, label "Refused"' in draft
    assert "not_applicable = " in draft.split("[reasons]", 1)[1]  # declared for the loader
    book = tmp_path / "draft.toml"
    book.write_text(draft, encoding="utf-8")
    plain, drafted = read(path, ["Q1", "Q2"]), read(path, ["Q1", "Q2"], codebook=book)
    for name in ("Q1", "Q2"):
        assert plain[name].reason_counts() == {
            k: v for k, v in drafted[name].reason_counts().items() if k in plain.vocabulary}


def test_not_applicable_ranks_just_above_skipped() -> None:
    vocab = Reasons(["not_measured", "not_applicable"])
    na, nm = vocab.code("not_applicable"), vocab.code("not_measured")
    a = np.array([na, na, na, vocab.code("skipped")], dtype=np.int8)
    b = np.array([vocab.code("skipped"), vocab.code("missing"), nm, na], dtype=np.int8)
    assert [vocab.name(c) for c in vocab.combine(a, b)] == [
        "not_applicable", "missing", "not_measured", "not_applicable"]


def test_not_applicable_is_outside_the_universe_by_default(tmp_path: Path) -> None:
    path, frame = _sav(tmp_path)
    data = read(path, ["Q1", "W"])
    q1, w = frame["Q1"].to_numpy(), frame["W"].to_numpy()
    out = (q1 == 8)
    nonresp = np.isin(q1, [7, 9])
    rate = nonresponse(data, Design("W"), ["Q1"]).frame["nonresponse_rate"][0]
    assert rate == pytest.approx(w[nonresp].sum() / w[~out].sum(), rel=1e-12)
    counted = nonresponse(data, Design("W"), ["Q1"], not_asked=["skipped"])
    assert counted.frame["nonresponse_rate"][0] == pytest.approx(
        w[nonresp | out].sum() / w.sum(), rel=1e-12)
    cli = run_wstats("nonresponse", path, "Q1", "--weight", "W", "--format", "json")
    assert cli.returncode == 0, cli.stderr
    (row,) = json.loads(cli.stdout)["results"]
    assert row["asked"] == int((~out).sum())
    cli = run_wstats("nonresponse", path, "Q1", "--weight", "W", "--not-asked", "skipped",
                     "--format", "json")
    assert json.loads(cli.stdout)["results"][0]["asked"] == len(frame)


def test_a_codebook_may_use_not_applicable_without_declaring_it(tmp_path: Path) -> None:
    from wstats.decoding.codebook import load_codebook

    book = tmp_path / "book.toml"
    book.write_text('[variables.Q]\ncodes = { 8 = "not_applicable" }\n', encoding="utf-8")
    assert load_codebook(book).variables["Q"].codes.numeric[8.0].reason == "not_applicable"
