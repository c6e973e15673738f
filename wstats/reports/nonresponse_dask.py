"""Item nonresponse on the Dask engine: the same table from summed partitions.

The workers make each item's nonresponse indicator and sum every reason's rows and weights
by group (:mod:`wstats.estimation.partition_rates`); the rate and its interval are the Dask
engine's proportion of the indicator, the counts and shares the groups' sums added up by
domain. The table is assembled by :mod:`wstats.reports.nonresponse`'s own code, so both
engines give the same columns and numbers.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from wstats.errors import EstimationError

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.codebook import Codebook
    from wstats.design.declared import Design
    from wstats.estimation.from_sums import Summed
    from wstats.reports.nonresponse import NonresponseTable

__all__ = ["nonresponse_dask"]


def nonresponse_dask(
    data: str | Path | Sequence[str | Path], design: Design, variables: Sequence[str], *,
    by: Sequence[str] = (), where: str | None = None, level: float = 0.95,
    count_invalid: bool = True, sort_worst: bool = False,
    not_asked: Sequence[str] = ("skipped",), codebook: Codebook | str | Path | None = None,
    scheduler: str | None = None,
) -> NonresponseTable:
    """Return :func:`wstats.nonresponse`'s table computed on the Dask engine (same options)."""
    from wstats.estimation.dask_engine import summed_estimate
    from wstats.estimation.partition_rates import Rates
    from wstats.estimation.reliability import STANDARDS
    from wstats.reports.nonresponse import (
        _RATE,
        NonresponseTable,
        _assemble,
        _settings,
        _worst_first,
    )

    names = list(dict.fromkeys(variables))
    if not names:
        raise EstimationError("no variables given; name at least one item")
    skip = tuple(dict.fromkeys(("skipped", *not_asked)))
    rates = Rates(tuple((v, f"{v}{_RATE}") for v in names), skip, count_invalid)
    est, summed = summed_estimate(
        data, design, [i for _, i in rates.items], codebook=codebook, statistics="proportion",
        by=by, where=where, level=level, reliability=STANDARDS["none"], scheduler=scheduler,
        rates=rates)
    vocab = summed.vocabulary
    skip_codes = np.array([vocab.code(r) for r in skip], dtype=np.int8)
    sums = {v: _domain_reasons(summed, v) for v in names}
    frame = _assemble(est, sums, vocab.names, by, skip_codes)
    if sort_worst:
        frame = _worst_first(frame, names)
    settings = {**_settings(rates.counted(vocab.names), skip, count_invalid, est, design),
                "engine": "dask"}
    return NonresponseTable(frame, tuple(by), vocab.names, est.level, est.design, settings)


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
