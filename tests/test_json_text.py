"""The indenting JSON writer gives the bytes of ``json.dumps(indent=2)`` of the cleaned data."""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from wstats.render._json import _clean
from wstats.render._json_text import indented

scalars = st.one_of(
    st.none(), st.booleans(), st.integers(), st.text(),
    st.floats(allow_nan=True, allow_infinity=True),
    st.floats(allow_nan=False).map(np.float64), st.integers(-2**31, 2**31 - 1).map(np.int32),
    st.booleans().map(np.bool_),
)
values = st.recursive(
    scalars,
    lambda inner: st.one_of(st.lists(inner, max_size=4), st.tuples(inner, inner),
                            st.dictionaries(st.one_of(st.text(), st.integers()), inner,
                                            max_size=4)),
    max_leaves=30,
)


def reference(value: Any) -> str:
    """The standard library's pure-Python indenting encoder (common practice, no source)."""
    return json.dumps(_clean(value), indent=2, ensure_ascii=False, allow_nan=False)


@given(values)
@settings(max_examples=300, deadline=None)
def test_same_bytes_as_the_standard_encoder(value: Any) -> None:
    assert indented(value) == reference(value)


def test_a_result_record_with_reasons_and_flags() -> None:
    record = {"variable": "hs_rate", "level": "Gut \u00e9\n\"x\"", "estimate": 0.25,
              "se": float("nan"), "ci_high": math.inf, "ci_low": -math.inf, "n": np.int64(7),
              "reasons": {"refused": 3, "skipped": np.int64(2)}, "flags": ["low-n"],
              "empty": {}, "none": [], "suppress": np.bool_(False)}
    data = {"results": [record, record], "rules": {}}
    text = indented(data)
    assert text == reference(data)
    assert '"se": null' in text and '"ci_high": "inf"' in text and '"ci_low": "-inf"' in text


def test_nested_lines_carry_the_prefix() -> None:
    assert indented({"a": [1, {"b": None}]}, "    ") == (
        '{\n      "a": [\n        1,\n        {\n          "b": null\n        }\n      ]\n    }')


def test_what_json_cannot_hold_is_refused() -> None:
    with pytest.raises(TypeError):
        indented({"a": object()})
