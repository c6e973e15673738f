"""Item nonresponse on partitions: the nonresponse indicator of each item and its reasons.

For ``wstats nonresponse --engine dask`` a worker adds, for each item, the indicator the
in-memory report estimates (:mod:`wstats.reports.nonresponse`): 1 where the reason is
counted as nonresponse, 0 where the item was answered (or the reason is not counted), not
valid where the item was not asked (its reason kept); and the row count and weight of every
reason of the item, summed by group like every other column.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.reasons import VALID

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.columns import Dataset

    Array = npt.NDArray[np.float64]

__all__ = ["RATE_LABELS", "Rates", "rate_columns", "reason_key", "reason_sums"]

#: value labels of the indicator (the in-memory report uses the same)
RATE_LABELS = {0.0: "answered", 1.0: "nonresponse"}


@dataclass(frozen=True)
class Rates:
    """Which items get a nonresponse indicator, and which reasons count.

    Attributes
    ----------
    items : (item, indicator name) pairs.
    skip : reasons meaning the item was not asked (out of its universe).
    count_invalid : ``invalid`` answers count as nonresponse.
    """

    items: tuple[tuple[str, str], ...]
    skip: tuple[str, ...]
    count_invalid: bool

    def counted(self, names: tuple[str, ...]) -> tuple[str, ...]:
        """Return the reasons of a vocabulary counted as nonresponse."""
        drop = {"valid", *self.skip} | (set() if self.count_invalid else {"invalid"})
        return tuple(r for r in names if r not in drop)


def reason_key(item: str, reason: str, weighted: bool) -> str:
    """Return the column key of an item's row count (or weight) with *reason*."""
    return f"{'cw' if weighted else 'c'}:{item}:{reason}"


def rate_columns(data: Dataset, rates: Rates) -> Dataset:
    """Return *data* with the nonresponse indicator of every item added."""
    from wstats.decoding.columns import Dataset, DecodedColumn

    names = data.vocabulary.names
    code = {n: i for i, n in enumerate(names)}
    counted = np.array([code[r] for r in rates.counted(names)], dtype=np.int8)
    skip = np.array([code[r] for r in rates.skip if r in code], dtype=np.int8)
    cols = dict(data.columns)
    for item, indicator in rates.items:  # loop over items
        r = data.columns[item].reasons
        asked = ~np.isin(r, skip)
        values = np.where(asked, np.isin(r, counted).astype(np.float64), np.nan)
        cols[indicator] = DecodedColumn(indicator, values,
                                        np.where(asked, VALID, r).astype(np.int8),
                                        data.vocabulary, kind="binary",
                                        value_labels=dict(RATE_LABELS))
    return Dataset(cols, data.vocabulary, data.n_rows, data.source, data.metadata)


def reason_sums(data: Dataset, rates: Rates, w: Array) -> Iterator[tuple[str, Any]]:
    """Yield the row count and weight of every reason of every item, one column at a time."""
    names = data.vocabulary.names
    for item, _ in rates.items:  # loop over items and the reasons met
        r = data.columns[item].reasons
        for c in np.unique(r).tolist():
            hit = r == c
            yield reason_key(item, names[int(c)], False), hit.astype(np.float64)
            yield reason_key(item, names[int(c)], True), np.where(hit, w, 0.0)
