"""Edge cases of wstats.compare and age adjustment a user meets (review of issue 15)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from wstats import Dataset, Design, estimate
from wstats.errors import EstimationError, UsageError
from wstats.reports.compare import compare

DESIGN = Design("w", strata="st", psu="psu")


def _data(seed: int = 1, n: int = 300) -> Dataset:
    """Invented data: strata, PSUs, group g (3 levels), age (3 levels), y, a binary b."""
    rng = np.random.default_rng(seed)
    g = rng.integers(1, 4, n).astype(float)
    age = rng.integers(1, 4, n).astype(float)
    return Dataset.from_arrays({
        "w": rng.uniform(1, 4, n), "st": rng.integers(0, 4, n), "psu": rng.integers(0, 3, n),
        "g": g, "age": age, "y": rng.normal(10 + g + age, 3.0, n),
        "b": (rng.random(n) < 0.3).astype(float)})


def test_where_selecting_no_row_is_a_one_line_error() -> None:
    # common practice, no source: an empty subpopulation is a user mistake, not a crash
    ds = _data()
    with pytest.raises(EstimationError, match=r"'y > 1000' selects no row"):
        compare(ds, DESIGN, ["y"], by="g", where="y > 1000")
    with pytest.raises(EstimationError, match=r"'y > 1000' selects no row"):
        estimate(ds, DESIGN, ["y"], by=["g"], where="y > 1000")


def test_standard_file_with_an_unknown_key_is_refused(tmp_path: Path) -> None:
    # common practice, no source: a misspelt key must not be dropped in silence
    from wstats.estimation.standards import load_standard

    f = tmp_path / "std.toml"
    f.write_text('name = "s"\nsorce = "typo"\nsource = "t"\n[population]\n"1" = 1\n"2" = 3\n')
    with pytest.raises(UsageError, match=r"std.toml: unknown key 'sorce'.*name, source"):
        load_standard(str(f))
