"""Scaling extreme magnitudes before estimation, and back afterwards.

Variances square weighted values: with weights near 1e160 or values near 1e300 the squares
overflow to infinity, and with weights near 1e-200 they underflow to zero, although the
estimates and their standard errors are ordinary finite numbers. A column whose largest
magnitude is outside ``[2**-LIMIT, 2**LIMIT]`` is therefore divided by a power of two near
that magnitude before the sums are taken, and the results are multiplied back: a mean,
quantile and its SE by the value scale c (SE(c*y) = c*SE(y)), a total by the weight scale
times the value scale, a ratio by the numerator's scale over the denominator's, a weighted
count by the weight scale; proportions do not change. Powers of two divide and multiply
exactly, so apart from overflow the numbers are the ones the unscaled data would give, and
ordinary data (every magnitude within the limits) are not copied at all.
"""

from __future__ import annotations

import dataclasses
import warnings
from collections.abc import Iterable, Mapping, Sequence
from typing import TYPE_CHECKING

import numpy as np

from wstats.decoding.columns import Dataset, row_tiles
from wstats.errors import EstimationError, WstatsWarning

if TYPE_CHECKING:
    from wstats.estimation.statistics import Piece

__all__ = ["LIMIT", "as_numbers", "scale_dataset", "scales_for", "unscale"]

#: Magnitudes up to 2**LIMIT (about 1.3e30) and down to 2**-LIMIT are used as they are.
LIMIT = 100


def scales_for(data: Dataset, names: Iterable[str]) -> dict[str, float]:
    """Return name -> power of two to divide by, for the number columns that need one."""
    out: dict[str, float] = {}
    for name in dict.fromkeys(names):
        col = data.columns.get(name)
        if col is None or col.values.dtype.kind != "f":
            continue
        top = _largest(col.values)
        if top > 0 and np.isfinite(top) and not 2.0**-LIMIT <= top <= 2.0**LIMIT:
            out[name] = float(2.0 ** np.ceil(np.log2(top)))
    return out


def _largest(values: np.ndarray) -> float:
    """Return the largest magnitude of a column (NaN ignored), in one pass without copies.

    Infinity gives infinity (such a column is not scaled).
    """
    top = 0.0
    for tile in row_tiles(len(values)):  # loop over row tiles, not rows
        part = values[tile]
        top = max(top, float(np.fmax.reduce(part, initial=-np.inf)),
                  -float(np.fmin.reduce(part, initial=np.inf)))
    return top


def as_numbers(data: Dataset, names: Iterable[str]) -> Dataset:
    """Return *data* with its whole-number identifiers beyond 2**53 among *names* as floats.

    Such a column is kept as exact decimal text (so that PSUs and strata stay distinct);
    analysed as a number it can only be rounded to float64, which is said once.
    """
    exact = set(data.metadata.get("exact_integers", ())) & set(names)
    wanted = [n for n in names if n in exact and data.columns[n].kind == "text"]
    if not wanted:
        return data
    import pandas as pd

    cols = dict(data.columns)
    for name in dict.fromkeys(wanted):
        col = cols[name]
        values = pd.to_numeric(pd.Series(col.values, dtype=object).replace("", None),
                               errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
        cols[name] = col.replace(values=values, reasons=col.reasons, kind="continuous")
        warnings.warn(
            f"variable {name} holds whole numbers beyond 2^53 (9,007,199,254,740,992), which "
            "a float cannot keep exactly: its estimates use them rounded to about 16 "
            "significant digits (as identifiers, in --strata/--psu/--by, they stay exact)",
            WstatsWarning, stacklevel=3)
    return dataclasses.replace(data, columns=cols)


def scale_dataset(data: Dataset, scales: Mapping[str, float]) -> Dataset:
    """Return *data* with the named columns divided by their scale (the others shared)."""
    if not scales:
        return data
    cols = {name: col.replace(values=col.values / scales[name]) if name in scales else col
            for name, col in data.columns.items()}
    return dataclasses.replace(data, columns=cols)


def unscale(pieces: Sequence[Piece], scales: Mapping[str, float], weight: str) -> list[Piece]:
    """Return the pieces with estimates, SEs, limits and weighted counts scaled back."""
    if not scales:
        return list(pieces)
    w = scales.get(weight, 1.0)
    return [_unscale_one(p, _factor(p, scales, w), w) for p in pieces]


def _factor(piece: Piece, scales: Mapping[str, float], w: float) -> float:
    """Return the factor the estimate of *piece* was divided by."""
    if piece.statistic == "proportion":
        return 1.0
    if piece.statistic == "ratio":
        num, _, den = piece.variable.partition("/")
        return scales.get(num, 1.0) / scales.get(den, 1.0)
    y = scales.get(piece.variable, 1.0)
    return y * w if piece.statistic == "total" else y


def _unscale_one(piece: Piece, factor: float, w: float) -> Piece:
    """Multiply one piece's scaled fields back."""
    if factor == 1.0 and w == 1.0:
        return piece
    with np.errstate(over="ignore"):
        estimate = piece.estimate * factor
    if np.any(np.isfinite(piece.estimate) & ~np.isfinite(estimate)):
        raise EstimationError(
            f"the {piece.statistic} of {piece.variable} is larger than the largest number a "
            f"computer float holds (about 1.8e308); divide {piece.variable} (or the weights) "
            "by a power of ten, e.g. in a derived variable, and scale the result back")
    return dataclasses.replace(
        piece, estimate=estimate, se=piece.se * factor,
        ci_low=piece.ci_low * factor, ci_high=piece.ci_high * factor,
        weighted_n=piece.weighted_n * w)
