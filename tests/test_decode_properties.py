"""Properties of decoding that hold for any small codebook and any data (hypothesis).

These are invariants of our own decoding rules (docs/codebook.md), not published results:
every row gets exactly one reason; an ordinary value stays valid and unchanged unless a rule
says otherwise; a derived value of a total operation is valid iff all its inputs are; and
decoding does not depend on row order.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from wstats.decoding.codebook import Codebook, decode
from wstats.decoding.reasons import VALID
from wstats.readers.raw import RawColumn, RawTable

POOL = [0.0, 1.0, 2.0, 3.0, 5.0, 7.0, 8.0, 9.0, 10.0, 50.0, 77.0, 88.0, 99.0, -1.0, 150.0]
CODE_KEYS = [7.0, 8.0, 9.0, 77.0, 88.0, 99.0, -1.0]
MEANINGS = st.one_of(st.sampled_from(["dont_know", "refused", "missing", "skipped",
                                      "not_eligible"]),
                     st.integers(0, 5))
VALUES = st.one_of(st.sampled_from(POOL), st.just(float("nan")))


@st.composite
def case(draw: st.DrawFn) -> tuple[dict[str, Any], RawTable]:
    """Draw a small codebook for columns A and B and matching raw data."""
    n = draw(st.integers(1, 40))
    variables: dict[str, Any] = {}
    cols = {}
    for name in ("A", "B"):
        codes = draw(st.dictionaries(st.sampled_from(CODE_KEYS), MEANINGS, max_size=4))
        spec: dict[str, Any] = {"codes": {f"{k:g}": v for k, v in codes.items()}}
        if draw(st.booleans()):
            low, high = sorted(draw(st.tuples(st.integers(0, 100), st.integers(0, 100))))
            spec["range"] = [low, high]
        if draw(st.booleans()):
            spec["blank"] = draw(st.sampled_from(["missing", "skipped", "not_eligible"]))
        variables[name] = spec
        data = np.array(draw(st.lists(VALUES, min_size=n, max_size=n)))
        declared = draw(st.lists(st.sampled_from(CODE_KEYS), max_size=3, unique=True))
        tags = np.where(np.isnan(data) & draw(st.lists(st.booleans(), min_size=n, max_size=n)),
                        draw(st.sampled_from([ord("a"), ord("B"), ord("_")])), 0)
        cols[name] = RawColumn(name, data, user_missing=list(declared),
                               tags=tags.astype(np.uint8))
    book = {"reasons": {"not_eligible": "Not eligible"}, "variables": variables,
            "derived": {"S": {"expr": "A + B"}, "P": {"expr": "A * B - A"}}}
    return book, RawTable("p.sav", "sav", "test", n, cols, ["A", "B"])


@settings(max_examples=80, deadline=None)
@given(case())
def test_every_row_gets_exactly_one_reason(c: tuple[dict[str, Any], RawTable]) -> None:
    book, raw = c
    ds = decode(raw, Codebook.from_dict(book))
    for col in ds.values():
        assert sum(col.reason_counts().values()) == raw.n_rows
        assert col.reasons.min() >= 0 and col.reasons.max() < len(ds.vocabulary)


@settings(max_examples=80, deadline=None)
@given(case())
def test_ordinary_values_change_only_through_a_rule(c: tuple[dict[str, Any], RawTable]) -> None:
    book, raw = c
    ds = decode(raw, Codebook.from_dict(book))
    for name in ("A", "B"):
        x = raw.columns[name].data
        spec = book["variables"][name]
        coded = np.isin(x, [float(k) for k in spec["codes"]] + raw.columns[name].user_missing)
        low, high = spec.get("range", [-np.inf, np.inf])
        ordinary = np.isfinite(x) & ~coded & (x >= low) & (x <= high)
        assert (ds[name].reasons[ordinary] == VALID).all()
        np.testing.assert_array_equal(ds[name].values[ordinary], x[ordinary])
        # and a non-valid row always has a rule behind it: blank, a code, or the range
        bad = ds[name].reasons != VALID
        assert (np.isnan(x) | coded | (x < low) | (x > high))[bad].all()


@settings(max_examples=80, deadline=None)
@given(case())
def test_derived_total_operations_valid_iff_inputs_valid(
        c: tuple[dict[str, Any], RawTable]) -> None:
    book, raw = c
    ds = decode(raw, Codebook.from_dict(book))
    both = ds["A"].valid & ds["B"].valid
    for name in ("S", "P"):
        assert (ds[name].valid == both).all()
    np.testing.assert_allclose(ds["S"].values[both], (ds["A"].values + ds["B"].values)[both])
    expect = ds.vocabulary.combine(ds["A"].reasons, ds["B"].reasons)
    np.testing.assert_array_equal(ds["S"].reasons, expect)


@settings(max_examples=60, deadline=None)
@given(case(), st.randoms(use_true_random=False))
def test_decode_is_invariant_to_row_order(c: tuple[dict[str, Any], RawTable],
                                          rnd: Any) -> None:
    book, raw = c
    order = np.array(rnd.sample(range(raw.n_rows), raw.n_rows), dtype=np.int64)
    cols = {n: RawColumn(n, col.data[order], user_missing=col.user_missing,
                         tags=None if col.tags is None else col.tags[order])
            for n, col in raw.columns.items()}
    shuffled = RawTable("p.sav", "sav", "test", raw.n_rows, cols, raw.file_columns)
    book_obj = Codebook.from_dict(book)
    a, b = decode(raw, book_obj), decode(shuffled, book_obj)
    assert a.vocabulary.names == b.vocabulary.names
    for name in a:
        np.testing.assert_array_equal(a[name].reasons[order], b[name].reasons)
        np.testing.assert_array_equal(a[name].values[order], b[name].values)


@settings(max_examples=80, deadline=None)
@given(case(), st.integers(1, 7))
def test_decode_in_row_tiles_equals_one_pass(c: tuple[dict[str, Any], RawTable],
                                             tile: int) -> None:
    # number columns are decoded tile by tile; whatever tile meets a new reason first, the
    # vocabulary takes new reasons in the order one pass over the column meets them
    import pytest

    from wstats.decoding import columns as _column
    from wstats.decoding.decode import decode_column

    book, raw = c
    book_obj = Codebook.from_dict(book)
    whole = decode(raw, book_obj)
    whole_ruled = {n: decode_column(col, book_obj, whole.vocabulary).ruled
                   for n, col in raw.columns.items()}
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(_column, "ROW_TILE", tile)
        tiled = decode(raw, book_obj)
        tiled_ruled = {n: decode_column(col, book_obj, tiled.vocabulary).ruled
                       for n, col in raw.columns.items()}
    assert tiled.vocabulary.names == whole.vocabulary.names
    for name in whole:
        np.testing.assert_array_equal(tiled[name].values, whole[name].values)
        np.testing.assert_array_equal(tiled[name].reasons, whole[name].reasons)
    for name, ruled in whole_ruled.items():
        np.testing.assert_array_equal(tiled_ruled[name], ruled)
