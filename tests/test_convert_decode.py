"""decode(convert(x)) == decode(x): the Parquet cache changes nothing a codebook sees."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pyreadstat
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from wstats.decoding.codebook import Codebook
from wstats.readers.cache import convert
from wstats.readers.dispatch import read_raw

CODEBOOK = Codebook.from_dict({
    "family": [{"name": "two", "match": ["Q*"], "codes": {"77": "dont_know", "99": "refused"}}],
    "variables": {"QA": {"codes": {"88": 0}, "range": [0, 30]},
                  "QB": {"kind": "categorical", "labels": {"1": "Yes", "2": "No"}}},
})
CODES = [0.0, 1.0, 2.0, 5.0, 30.0, 31.0, 77.0, 88.0, 99.0, np.nan]


def _write(frame: pd.DataFrame, fmt: str, path: Path) -> None:
    labels = {"QA": "Days of something", "QB": "Yes or no"}
    if fmt == "sav":
        pyreadstat.write_sav(frame, str(path), column_labels=labels,
                             variable_value_labels={"QB": {1.0: "Yes", 2.0: "No"}},
                             missing_ranges={"QB": [99.0]})
    elif fmt == "dta":
        pyreadstat.write_dta(frame, str(path), column_labels=labels,
                             variable_value_labels={"QB": {1.0: "Yes", 2.0: "No"}})
    else:
        pyreadstat.write_xport(frame, str(path), column_labels=labels, file_format_version=5)


@pytest.mark.parametrize("fmt", ["xpt", "sav", "dta"])
@settings(max_examples=10, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_decoding_the_cache_equals_decoding_the_file(tmp_path: Path, fmt: str,
                                                     data: st.DataObject) -> None:
    # An identity of our own design (common practice for caches, no source).
    n = data.draw(st.integers(1, 40))
    qa = data.draw(st.lists(st.sampled_from(CODES), min_size=n, max_size=n))
    qb = data.draw(st.lists(st.sampled_from([1.0, 2.0, 99.0, np.nan]), min_size=n, max_size=n))
    frame = pd.DataFrame({"QA": qa, "QB": qb})
    import tempfile

    folder = Path(tempfile.mkdtemp(dir=tmp_path))
    src = folder / f"s.{fmt}"
    _write(frame, fmt, src)
    direct = CODEBOOK.decode(read_raw(src))
    cached = CODEBOOK.decode(read_raw(convert(src, folder / "c.parquet")))
    assert direct.vocabulary.names == cached.vocabulary.names
    for name in ("QA", "QB"):
        a, b = direct[name], cached[name]
        np.testing.assert_array_equal(a.values, b.values)
        np.testing.assert_array_equal(a.reasons, b.reasons)
        assert (a.label, a.kind, a.value_labels) == (b.label, b.kind, b.value_labels)
