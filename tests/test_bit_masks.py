"""Masked zeroing by bits and the counted column check give what the masked numpy calls gave."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from wstats.decoding.columns import DecodedColumn
from wstats.decoding.reasons import Reasons
from wstats.estimation.many_variables import _zeroed

floats = arrays(np.float64, st.integers(0, 300), elements=st.floats(allow_nan=True,
                                                                    allow_infinity=True))


@given(floats)
@settings(max_examples=200, deadline=None)
def test_zeroed_is_np_where_bit_for_bit(x: np.ndarray) -> None:
    # the reference is numpy's own masked choice (common practice, no source)
    ok = ~np.isnan(x)
    expected = np.where(ok, x, 0.0).view(np.int64)
    assert np.array_equal(_zeroed(x, ok).view(np.int64), expected)
    inplace = x.copy()
    assert _zeroed(inplace, ok, out=inplace) is inplace
    assert np.array_equal(inplace.view(np.int64), expected)


def test_negative_zero_and_infinities_are_kept() -> None:
    x = np.array([-0.0, np.inf, -np.inf, np.nan, 2.5])
    out = _zeroed(x, ~np.isnan(x))
    assert np.signbit(out[0]) and out[1] == np.inf and out[2] == -np.inf
    assert out[3] == 0.0 and not np.signbit(out[3]) and out[4] == 2.5


def test_the_column_check_still_refuses_broken_columns() -> None:
    vocab = Reasons()
    refused = vocab.add("refused")
    values = np.array([1.0, np.nan, 3.0])
    DecodedColumn("x", values, np.array([0, refused, 0], dtype=np.int8), vocab)
    with pytest.raises(ValueError, match="a non-valid row holds a value"):
        DecodedColumn("x", values, np.array([refused, refused, 0], dtype=np.int8), vocab)
    with pytest.raises(ValueError, match="a valid row holds NaN"):
        DecodedColumn("x", values, np.array([0, 0, 0], dtype=np.int8), vocab)
    with pytest.raises(ValueError, match="a non-valid row holds a value"):  # both: as before
        DecodedColumn("x", values, np.array([refused, 0, 0], dtype=np.int8), vocab)


def test_lengths_that_differ_are_refused_first() -> None:
    with pytest.raises(ValueError, match="differ in length"):
        DecodedColumn("x", np.array([1.0, np.nan]), np.zeros(3, dtype=np.int8), Reasons())
