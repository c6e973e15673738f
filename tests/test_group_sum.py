"""GroupSum adds rows into groups exactly as ``np.add.at`` does, to the bit."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from wstats.estimation.sums import GroupSum


@given(st.integers(0, 40), st.integers(1, 12), st.sampled_from([(), (1,), (3,), (2, 2)]),
       st.integers(0, 2**32 - 1))
@settings(max_examples=150, deadline=None)
def test_group_sums_equal_add_at(k: int, groups: int, tail: tuple[int, ...], seed: int) -> None:
    # the reference is numpy's unbuffered in-order addition (common practice, no source)
    rng = np.random.default_rng(seed)
    rows = k + 1
    source = rng.integers(0, rows, size=k)
    target = rng.integers(0, groups, size=k)
    block = rng.standard_normal((rows, *tail)) * 10.0 ** rng.integers(-8, 8, (rows, *tail))
    expected = np.zeros((groups, *tail))
    np.add.at(expected, target, block[source])
    got = GroupSum(target, source, groups) @ block
    assert got.shape == expected.shape
    assert np.array_equal(got.view(np.int64), expected.view(np.int64))
