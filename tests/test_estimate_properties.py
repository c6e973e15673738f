"""Properties (hypothesis) and bad input to estimate()."""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from wstats.decoding.columns import Dataset
from wstats.design.declared import Design
from wstats.errors import EstimationError, ExpressionError, WstatsError
from wstats.estimation.estimate import estimate


def _ds(**cols: Any) -> Dataset:
    return Dataset.from_arrays({k: np.asarray(v) for k, v in cols.items()}, source="s.csv")


def _sample(seed: int, n: int) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    y = rng.normal(10, 4, n)
    y[rng.random(n) < 0.1] = np.nan
    # 3 strata x 3 PSUs, every (stratum, PSU) cell filled, in random row order
    cell = rng.permutation(np.arange(n) % 9)
    return {"y": y, "c": rng.integers(1, 4, n).astype(float), "w": rng.uniform(0.2, 5, n),
            "st": cell // 3, "psu": cell % 3, "g": rng.integers(0, 2, n).astype(float)}


_DESIGN = Design("w", strata="st", psu="psu")
_COLS = ["estimate", "se", "ci_low", "ci_high", "deff", "n"]


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 10_000), factor=st.floats(0.01, 1000.0))
def test_scaling_weights_leaves_means_and_proportions_unchanged(seed: int, factor: float) -> None:
    # common practice, no source: ratio estimators are invariant to a constant weight factor
    c = _sample(seed, 60)
    scaled = dict(c, w=c["w"] * factor)
    kw: dict[str, Any] = {"by": ["g"], "categorical": ["c"]}
    a = estimate(_ds(**c), _DESIGN, ["y", "c"], **kw).frame
    b = estimate(_ds(**scaled), _DESIGN, ["y", "c"], **kw).frame
    np.testing.assert_allclose(a[_COLS].to_numpy(float), b[_COLS].to_numpy(float), rtol=1e-9)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 10_000))
def test_level_proportions_sum_to_one(seed: int) -> None:
    c = _sample(seed, 50)
    f = estimate(_ds(**c), _DESIGN, ["c"], categorical=["c"], by=["g"]).frame
    sums = f.groupby(f.g.astype(str), dropna=False).estimate.sum()
    np.testing.assert_allclose(sums.to_numpy(), 1.0, rtol=1e-12)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 10_000), perm_seed=st.integers(0, 10_000))
def test_row_order_changes_nothing(seed: int, perm_seed: int) -> None:
    c = _sample(seed, 45)
    order = np.random.default_rng(perm_seed).permutation(45)
    shuffled = {k: v[order] for k, v in c.items()}
    kw: dict[str, Any] = {"by": ["g"], "statistics": ["mean", "total", "quantile"]}
    a = estimate(_ds(**c), _DESIGN, ["y"], **kw).frame
    b = estimate(_ds(**shuffled), _DESIGN, ["y"], **kw).frame
    np.testing.assert_allclose(a[_COLS].to_numpy(float), b[_COLS].to_numpy(float), rtol=1e-10)


# ---------------------------------------------------------------- bad input


@pytest.mark.parametrize(
    ("kwargs", "error", "match"),
    [
        ({"variables": ["yy"]}, EstimationError, r"variable 'yy' is not in s.csv; did you mean"),
        ({"by": ["G"]}, EstimationError, r"variable 'G' is not in s.csv; did you mean 'g'"),
        ({"statistics": "median"}, EstimationError, r"statistic 'median' is not one of mean"),
        ({"statistics": ["mean", "totl"]}, EstimationError, r"did you mean 'total'"),
        ({"level": 95}, EstimationError, r"confidence level 95 is outside \(0, 1\)"),
        ({"proportion_ci": "kg"}, EstimationError, r"proportion interval 'kg' is not one of"),
        ({"statistics": "quantile", "quantiles": (1.5,)}, EstimationError,
         r"quantile probability 1.5 is outside \[0, 1\]"),
        ({"statistics": "ratio"}, EstimationError, r"needs ratios=\[\(numerator, denominator"),
        ({"where": "g = 1"}, ExpressionError, r"where"),
        ({"where": "gg == 1"}, ExpressionError, r"unknown variable 'gg'"),
        ({"variables": ["t"], "statistics": "mean"}, EstimationError,
         r"variable 't' holds text; a mean needs numbers"),
        ({"variables": ["y"], "categorical": ["y"]}, EstimationError,
         r"variable 'y' has \d+ distinct values; .* limited to 200"),
    ],
)
def test_bad_estimate_input(kwargs: dict[str, Any], error: type[WstatsError], match: str) -> None:
    c = _sample(1, 300)
    ds = _ds(**c, t=np.array(["a"] * 300, dtype=object))
    args = {"variables": ["y"], **kwargs}
    variables = args.pop("variables")
    with pytest.raises(error, match=match):
        estimate(ds, _DESIGN, variables, **args)


def test_too_many_by_cells() -> None:
    n = 300
    ds = _ds(y=np.arange(n, dtype=float), w=np.ones(n), a=np.arange(n) % 150,
             b=np.arange(n) % 101)
    with pytest.raises(EstimationError, match=r"cross into 15150 cells \(limit 10000\)"):
        estimate(ds, Design("w"), ["y"], by=["a", "b"])
