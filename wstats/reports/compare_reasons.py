"""Reasons compared across groups: is item nonresponse different between the groups?

Among the rows asked the item (reason not ``skipped`` nor another not-asked reason), the
item nonresponse rate is the weighted share whose value is not valid (the rate of
:mod:`wstats.reports.nonresponse`). Its differences between groups get design-based SEs from the
covariance engine, and a Rao-Scott test of reason (valid / don't know / refused / other
non-valid reasons that occur) x group among those asked says whether the mix of reasons
differs. Crude (not age-adjusted) rates.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.reasons import DONT_KNOW, NOT_ASKED, REFUSED, VALID
from wstats.estimation.covariance import joint_covariance
from wstats.estimation.influence import indicator_influence
from wstats.reports.compare_rows import difference_rows, rao_scott_table

if TYPE_CHECKING:
    from wstats.decoding.columns import Dataset

__all__ = ["REASON_GROUPS", "reason_rows"]

#: the reason categories of the test, in order (``other``: every other non-valid reason)
REASON_GROUPS = ("valid", "dont_know", "refused", "other")


def reason_rows(data: Dataset, plan: Any, name: str, not_asked: Sequence[str]
                ) -> tuple[list[dict[str, Any]], list[dict[str, Any]]]:
    """Return the nonresponse-rate difference rows and the reason x group test of *name*."""
    eng = plan.groups
    reasons = eng.column(data, name).reasons
    # a default reason the codebook's vocabulary lacks is simply absent, as in nonresponse
    skip = [data.vocabulary.code(r) for r in dict.fromkeys(("skipped", *not_asked))
            if r in data.vocabulary or r not in NOT_ASKED]
    asked = ~np.isin(reasons, skip)
    g = plan.n_groups
    inf = indicator_influence(eng.sums, np.where(asked, (reasons != VALID).astype(np.int64), -1),
                              2)
    cov = joint_covariance(eng.sums, [(inf, np.arange(1, g + 1), np.ones(g, np.int64))])
    head = {"variable": name, "statistic": "nonresponse-rate", "level": None, "by": plan.by,
            "standard": None}
    diffs = difference_rows(cov, plan.pairs, plan.labels, head, plan.level,
                            pair_df=plan.pair_df)
    kind = np.select([reasons == VALID, reasons == DONT_KNOW, reasons == REFUSED],
                     [0, 1, 2], 3)
    cell = eng.sums.domains.cell
    group = np.where(cell >= 0, cell, -1)
    inside = asked & (group >= 0)
    present = np.flatnonzero(np.bincount(kind[inside], minlength=4) > 0)
    rank = np.full(4, -1)
    rank[present] = np.arange(len(present))
    if len(present) < 2:  # every asked row gave the same kind of answer: nothing to test
        return diffs, []
    code = np.where(inside, rank[kind] * g + group, -1)
    test = rao_scott_table(eng.sums, code, (len(present), g),
                           {"variable": name, "by": plan.by, "quantity": "reasons",
                            "level": "+".join(REASON_GROUPS[i] for i in present),
                            "standard": None})
    return diffs, [test]
