"""Item nonresponse on the Dask engine: the same table from summed partitions.

The workers make each item's nonresponse indicator and sum every reason's rows and weights
by group (:mod:`wstats.estimation.partition_rates`); the rate and its interval are the Dask
engine's proportion of the indicator, the counts and shares the groups' sums added up by
domain. :mod:`wstats.reports.nonresponse` assembles the table from these parts with its own
code, so both engines give the same columns and numbers.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from wstats.decoding.reasons import NOT_ASKED
from wstats.errors import EstimationError

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.codebook import Codebook
    from wstats.design.declared import Design
    from wstats.estimation.from_sums import Summed
    from wstats.estimation.results import EstimateTable

__all__ = ["DaskParts", "dask_parts"]


def dask_parts(
    data: str | Path | Sequence[str | Path], design: Design, names: Sequence[str],
    suffix: str, *, by: Sequence[str] = (), where: str | None = None, level: float = 0.95,
    count_invalid: bool = True, skip: tuple[str, ...] = ("skipped",),
    codebook: Codebook | str | Path | None = None, scheduler: str | None = None,
) -> DaskParts:
    """Return what :func:`wstats.nonresponse` assembles its table from, computed on Dask.

    *suffix* names each item's indicator (``item + suffix``), as the in-memory report does.
    """
    from wstats.estimation.dask_engine import summed_estimate
    from wstats.estimation.partition_rates import Rates
    from wstats.estimation.reliability import STANDARDS

    if not names:
        raise EstimationError("no variables given; name at least one item")
    rates = Rates(tuple((v, f"{v}{suffix}") for v in names), skip, count_invalid)
    est, summed = summed_estimate(
        data, design, [i for _, i in rates.items], codebook=codebook, statistics="proportion",
        by=by, where=where, level=level, reliability=STANDARDS["none"], scheduler=scheduler,
        rates=rates)
    vocab = summed.vocabulary
    # as in memory: a default reason the data never met is left out; a given one must exist
    kept = tuple(r for r in skip if r in vocab or r not in NOT_ASKED)
    counted = Rates(rates.items, kept, count_invalid).counted(vocab.names)
    return DaskParts(est, {v: _domain_reasons(summed, v) for v in names}, vocab.names,
                     np.array([vocab.code(r) for r in kept], dtype=np.int8), counted, kept)


@dataclass(frozen=True, eq=False)
class DaskParts:
    """The parts of a nonresponse table: the rate estimates, each item's reason sums by
    domain (rows, weights), the reasons, the codes of the skip reasons, the counted ones,
    the skip reasons."""

    est: EstimateTable
    sums: dict[str, tuple[npt.NDArray[np.int64], npt.NDArray[np.float64]]]
    reasons: tuple[str, ...]
    skip_codes: npt.NDArray[np.int8]
    counted: tuple[str, ...]
    skip: tuple[str, ...]


def _domain_reasons(summed: Summed, item: str
                    ) -> tuple[npt.NDArray[np.int64], npt.NDArray[np.float64]]:
    """Return an item's rows and weights per domain and reason: (D x K) each."""
    from wstats.estimation.partition_rates import reason_key

    ws, frame = summed.sums, summed.frame
    names = summed.vocabulary.names
    counts = np.zeros((ws.n_domains, len(names)), dtype=np.int64)
    weights = np.zeros((ws.n_domains, len(names)))
    for k, reason in enumerate(names):  # loop over reasons only
        key = reason_key(item, reason, False)
        if key not in frame.columns:
            continue
        rows = np.nan_to_num(frame[key].to_numpy(float))
        w = np.nan_to_num(frame[reason_key(item, reason, True)].to_numpy(float)) * summed.lam
        both = ws.bucket_domains(ws.bucket_sums([rows, w]))
        counts[:, k] = np.rint(both[:, 0])
        weights[:, k] = both[:, 1]
    return counts, weights
