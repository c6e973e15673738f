"""Passes over the rows hold one tile's temporaries at a time, whatever the file's length.

A pass in row tiles must free a tile's arrays before the next tile makes its own; otherwise
the peak holds two tiles' worth on a file of several tiles and one on a file of one tile, and
memory seems to grow with the rows. NumPy reports its array buffers to
``tracemalloc``, so the peak of a pass is measured exactly, on one thread (common practice,
no source).
"""

from __future__ import annotations

import tracemalloc
from collections.abc import Callable
from typing import Any

import numpy as np
import pytest

from wstats.decoding import columns as _column
from wstats.decoding.columns import Dataset
from wstats.decoding.decode import _evaluate_in_tiles
from wstats.decoding.expressions import parse_expression
from wstats.design.declared import Design
from wstats.estimation import many_variables as _batch
from wstats.estimation.estimate import _domains
from wstats.estimation.statistics import Context
from wstats.estimation.sums import WeightedSums

TILE = 40_000
TILE_BYTES = TILE * 8  # one float64 temporary of a tile


def _peak(run: Callable[[], Any]) -> float:
    """Return the peak of new allocations while *run* runs, in float64 tiles."""
    tracemalloc.start()
    try:
        start = tracemalloc.get_traced_memory()[0]
        tracemalloc.reset_peak()
        run()
        return (tracemalloc.get_traced_memory()[1] - start) / TILE_BYTES
    finally:
        tracemalloc.stop()


def _context(n: int) -> tuple[Context, Dataset]:
    rng = np.random.default_rng(11)
    y = rng.integers(1, 6, n).astype(np.float64)
    y[rng.random(n) < 0.6] = np.nan  # many rows without a value: the not-valid passes work
    data = Dataset.from_arrays({
        "y": y, "w": rng.uniform(0.5, 3.0, n),
        "s": np.repeat(np.arange(4.0), -(-n // 4))[:n], "p": rng.integers(0, 5, n) * 1.0,
    })
    bound = Design("w", strata="s", psu="p").bind(data)
    domains, _ = _domains(data, bound, [], None)
    columns = {name: bound.column(col) for name, col in data.columns.items()}
    return Context(WeightedSums(bound, domains), columns, data.vocabulary, 0.95), data


def _derived(ctx: Context) -> Callable[[], Any]:
    expr = parse_expression("w / (y / 10) ^ 2", None, "test")
    out = np.empty(len(ctx.columns["y"]))  # the output's memory is given, as a spare input's
    return lambda: _evaluate_in_tiles(expr, dict(ctx.columns), ctx.vocabulary, len(out),
                                      "continuous", out)


def _on(run: Callable[[Context], Any]) -> Callable[[Context], Callable[[], Any]]:
    return lambda ctx: lambda: run(ctx)


# each makes, from a context, the pass to measure
PASSES: dict[str, Callable[[Context], Callable[[], Any]]] = {
    "weighted sums": _on(lambda ctx: ctx.sums.bucket_sums_of(
        lambda rows: [np.nan_to_num(ctx.columns["y"].values[rows]),
                      ~np.isnan(ctx.columns["y"].values[rows])], 2)),
    "not-valid counts": _on(lambda ctx: ctx.sums.invalid_counts(ctx.columns["y"], 8)),
    "level sums": _on(lambda ctx: _batch._levels(ctx, ctx.columns["y"])),
    "a whole mean": _on(lambda ctx: _batch.batch_pieces(ctx, [("y", "mean")],
                                                        "korn-graubard")),
    "a whole proportion": _on(lambda ctx: _batch.batch_pieces(ctx, [("y", "proportion")],
                                                              "korn-graubard")),
    "a derived variable": _derived,
}


@pytest.mark.parametrize("name", list(PASSES))
def test_a_pass_holds_the_same_temporaries_on_longer_files(
        name: str, monkeypatch: pytest.MonkeyPatch) -> None:
    # files of 1, 4 and 8 tiles: the peak of a pass is the same within a twentieth of a
    # tile (bincount outputs, Python objects) and a few tiles at most. A derived variable's
    # result keeps a reason code per row without a value (1 byte): its peak may grow by that.
    monkeypatch.setattr(_column, "ROW_TILE", TILE)
    monkeypatch.setattr(_batch, "_THREADS", 1)  # one thread: a deterministic peak
    PASSES[name](_context(TILE)[0])()  # once first: caches and one-time imports fill here
    peaks, codes = [], []
    for n in (TILE, 4 * TILE, 8 * TILE):
        ctx, _ = _context(n)
        peaks.append(_peak(PASSES[name](ctx)))
        codes.append(ctx.columns["y"].n_missing / TILE_BYTES if name == "a derived variable"
                     else 0.0)
    for peak, grown in zip(peaks[1:], codes[1:], strict=True):
        assert peaks[0] - 0.05 < peak < peaks[0] + (grown - codes[0]) + 0.05, (peaks, codes)
    assert max(peaks) < 8, peaks
