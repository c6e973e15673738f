"""Data-sanity warnings: each fires on its condition, on both sides of its threshold."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from wstats.decoding.columns import Dataset
from wstats.design.declared import Design
from wstats.errors import WstatsWarning
from wstats.estimation.estimate import estimate
from wstats.estimation.sanity import (
    KISH_DEFF_THRESHOLD,
    MIN_GROUP_SIZE,
    check_group_sizes,
    check_presubset,
    check_special_codes,
    check_weight_spread,
)


def test_presubset_fires_above_the_single_psu_share() -> None:
    # 2 of 8 strata single (25%) is not "more than 25%"; 3 of 8 is.
    assert check_presubset(np.array([1, 1, 2, 2, 2, 2, 2, 2]), 10.0, None, "f") == []
    msgs = check_presubset(np.array([1, 1, 1, 2, 2, 2, 2, 2]), 10.0, None, "f")
    assert len(msgs) == 1 and "3 of 8 strata" in msgs[0]


def test_presubset_compares_weight_sum_with_stated_population() -> None:
    assert check_presubset(np.array([2, 2]), 600.0, 1000.0, "f") == []
    msgs = check_presubset(np.array([2, 2]), 400.0, 1000.0, "f")
    assert len(msgs) == 1 and "1,000" in msgs[0]


def test_weight_spread_uses_kish_deff() -> None:
    # Kish (1992): deff_w = n sum(w^2) / (sum w)^2; w = (1,1,2,4) gives 1.375 (REFERENCES s.7).
    assert check_weight_spread(np.array([1.0, 1.0, 2.0, 4.0]), "w") == []
    # one weight of 100 among 9 ones: deff = 10 * 10009 / 109^2 = 8.42 > 3
    msgs = check_weight_spread(np.array([1.0] * 9 + [100.0]), "w")
    assert len(msgs) == 1 and "8.42" in msgs[0] and f"{KISH_DEFF_THRESHOLD:g}" in msgs[0]


def test_weight_spread_in_row_tiles_skips_zero_weights(monkeypatch: pytest.MonkeyPatch) -> None:
    # Kish (1992) deff_w over the positive weights, summed tile by tile: the 9 ones and 100 of
    # the test above with zeros between them give the same 8.42 with tiles of 3 rows
    from wstats.decoding import columns as _column
    monkeypatch.setattr(_column, "ROW_TILE", 3)
    w = np.array([1.0, 0.0] * 9 + [0.0, 100.0])
    msgs = check_weight_spread(w, "w")
    assert len(msgs) == 1 and "8.42" in msgs[0]
    assert check_weight_spread(np.array([0.0, 5.0, 0.0]), "w") == []  # one positive weight


def test_small_groups_are_named() -> None:
    counts = np.array([MIN_GROUP_SIZE, MIN_GROUP_SIZE - 1])
    msgs = check_group_sizes(["a", "b"], counts)
    assert len(msgs) == 1 and f"b (n={MIN_GROUP_SIZE - 1})" in msgs[0] and "a (" not in msgs[0]


def test_unexplained_999_spike_is_reported_and_ordinary_values_are_not() -> None:
    rng = np.random.default_rng(1)
    plain = rng.integers(0, 30, 500).astype(float)
    coded = np.concatenate([plain, np.full(40, 999.0)])
    data = Dataset.from_arrays({"x": coded, "y": np.resize(plain, len(coded))})
    msgs = check_special_codes(data.columns, skip=())
    assert len(msgs) == 1 and "variable x" in msgs[0] and "999 (40 rows)" in msgs[0]
    assert check_special_codes(data.columns, skip=("x",)) == []


def test_estimate_issues_each_warning_once() -> None:
    y = np.concatenate([np.arange(100.0) % 20, np.full(10, 99.0)])
    g = np.repeat([1.0, 2.0], [105, 5])
    data = Dataset.from_arrays({"y": y, "g": g, "w": np.ones(110)})
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", WstatsWarning)
        estimate(data, Design("w"), ["y"], by=["g"])
    texts = [str(w.message) for w in caught if issubclass(w.category, WstatsWarning)]
    assert sum("look like special codes" in t for t in texts) == 1
    assert sum("fewer than 30 respondents" in t for t in texts) == 1


def test_warnings_are_never_fatal() -> None:
    data = Dataset.from_arrays({"y": np.r_[np.arange(50.0), [99.0] * 9], "w": np.ones(59)})
    with pytest.warns(WstatsWarning):
        table = estimate(data, Design("w"), ["y"])
    assert table.frame["n"].iloc[0] == 59
