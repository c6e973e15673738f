"""How a decoded column holds its reasons: the codes of its NaN rows only, never lost.

A number value is NaN exactly where its reason is not valid, so a number column keeps one
reason code per NaN row and makes the per-row reasons on demand (common practice, no source:
the same idea as a sparse vector keyed by the NaN positions).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from wstats.decoding import columns as _column
from wstats.decoding.columns import Dataset, DecodedColumn, row_tiles
from wstats.decoding.reasons import INVALID, MISSING, REFUSED, SKIPPED, VALID, Reasons

VOCAB = Reasons(["not_eligible"])  # codes 0-5 core, 6 added

# a column as (reason codes per row); the values follow: NaN where not valid
rows = st.lists(st.sampled_from([VALID, VALID, VALID, SKIPPED, REFUSED, INVALID, MISSING, 6]),
                max_size=40)


def _column_of(codes: list[int]) -> DecodedColumn:
    reasons = np.array(codes, dtype=np.int8)
    values = np.where(reasons == VALID, np.arange(len(codes), dtype=np.float64), np.nan)
    return DecodedColumn("X", values, reasons, VOCAB)


@settings(max_examples=200, deadline=None)
@given(codes=rows, tile=st.integers(1, 7))
def test_reasons_are_kept_exactly_and_tiles_agree(codes: list[int], tile: int) -> None:
    # every row's reason comes back; counts add up to the rows; tiles cover the rows in order
    col = _column_of(codes)
    reasons = np.array(codes, dtype=np.int8)
    np.testing.assert_array_equal(col.reasons, reasons)
    np.testing.assert_array_equal(col.valid, reasons == VALID)
    assert col.missing_codes.nbytes == int(np.count_nonzero(reasons))  # no byte per valid row
    counts = col.reason_counts()
    assert sum(counts.values()) == len(codes)
    assert counts["not_eligible"] == codes.count(6)
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(_column, "ROW_TILE", tile)
        pieces = list(col.tiles())
        found = list(col.not_valid_rows())
    joined = np.concatenate([p.reasons for _, p in pieces]) if pieces else np.zeros(0, np.int8)
    np.testing.assert_array_equal(joined, reasons)
    at = np.concatenate([r for r, _ in found]) if found else np.zeros(0, np.int64)
    got = np.concatenate([c for _, c in found]) if found else np.zeros(0, np.int8)
    np.testing.assert_array_equal(at, np.flatnonzero(reasons))
    np.testing.assert_array_equal(got, reasons[reasons != VALID])


def test_a_valid_row_cannot_hold_nan_nor_a_reason_a_value() -> None:
    with pytest.raises(ValueError, match="a valid row holds NaN"):
        DecodedColumn("X", np.array([1.0, np.nan]), np.zeros(2, np.int8), VOCAB)
    with pytest.raises(ValueError, match="a non-valid row holds a value"):
        DecodedColumn("X", np.array([1.0, 2.0]), np.array([0, REFUSED], np.int8), VOCAB)


def test_text_columns_keep_a_reason_per_row() -> None:
    values = np.array(["a", None, "b"], dtype=object)
    col = DecodedColumn("T", values, np.array([0, SKIPPED, 0], np.int8), VOCAB, kind="text")
    np.testing.assert_array_equal(col.reasons, [0, SKIPPED, 0])
    np.testing.assert_array_equal(col.valid, [True, False, True])
    assert col.n_missing == 1
    assert [(r.tolist(), c.tolist()) for r, c in col.not_valid_rows()] == [([1], [SKIPPED])]


def test_replace_shares_arrays_and_recomputes_codes_from_new_reasons() -> None:
    col = _column_of([VALID, REFUSED, VALID])
    relabelled = col.replace(label="Age")
    assert relabelled.values is col.values and relabelled.missing_codes is col.missing_codes
    assert relabelled.label == "Age" and col.label is None
    fewer = col.replace(values=col.values[[0, 2]], reasons=np.zeros(2, np.int8))
    assert fewer.n_missing == 0 and len(fewer) == 2
    with pytest.raises(AttributeError, match="immutable"):
        col.label = "x"  # type: ignore[misc]
    with pytest.raises(TypeError, match="no attribute 'colour'"):
        col.replace(colour="red")


def test_membership_of_a_dataset_is_a_plain_answer() -> None:
    ds = Dataset.from_arrays({"A": [1.0, np.nan]})
    assert "A" in ds and "B" not in ds
    assert ds["A"].reason_counts()["missing"] == 1


def test_a_column_copies_and_pickles_whole() -> None:
    import copy
    import pickle

    col = _column_of([VALID, REFUSED, 6, VALID])
    for twin in (copy.copy(col), copy.deepcopy(col), pickle.loads(pickle.dumps(col))):
        np.testing.assert_array_equal(twin.values, col.values)
        np.testing.assert_array_equal(twin.reasons, col.reasons)
        assert twin.vocabulary.names == col.vocabulary.names and twin.name == "X"


@settings(max_examples=300, deadline=None)
@given(n=st.integers(0, 5000), tile=st.integers(1, 700))
def test_row_tiles_are_few_equal_and_cover_the_rows_in_order(n: int, tile: int) -> None:
    # common practice, no source: ceil(n / tile) tiles whose sizes differ by at most a row
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(_column, "ROW_TILE", tile)
        tiles = row_tiles(n)
    assert len(tiles) == -(-n // tile)
    assert [t.start for t in tiles[1:]] == [t.stop for t in tiles[:-1]]
    assert (tiles[0].start, tiles[-1].stop) == (0, n) if n else tiles == []
    sizes = [t.stop - t.start for t in tiles]
    assert all(0 < size <= tile for size in sizes)
    assert max(sizes, default=0) - min(sizes, default=0) <= 1
