"""The degrees of freedom of a change between pooled periods (``compare --period-df``).

``sum`` gives a change the df of the two periods compared added up, d_a + d_b (with two
files, the pooled design's df); ``satterthwaite`` gives each change
(v_a+v_b)^2/(v_a^2/d_a + v_b^2/d_b) from the two periods' variances and own df
(REFERENCES §16; :func:`wstats.design.pooling.change_df`).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.design.pooling import FILE_COLUMN, PERIOD_DF_RULES, change_df
from wstats.errors import EstimationError, UsageError, did_you_mean

if TYPE_CHECKING:
    from wstats.reports.compare_rows import PairDf

__all__ = ["period_pair_df"]


def period_pair_df(by: str, labels: Sequence[str], design: Mapping[str, Any], rule: str
                   ) -> PairDf | None:
    """Return the df of each change between two groups, or None for the design df.

    *labels* are the groups (the periods' labels when *by* is ``_file``), *design* the
    design summary (its ``pool.df_per_file``).
    """
    if rule not in PERIOD_DF_RULES:
        raise UsageError(f"period df '{rule}' is not one of {', '.join(PERIOD_DF_RULES)}"
                         f"{did_you_mean(rule, PERIOD_DF_RULES)}")
    pool = design.get("pool") or {}
    if rule == "sum":  # d_a + d_b: the two periods compared (all files' df with two files)
        if by != FILE_COLUMN or not pool.get("df_per_file") or len(pool["df_per_file"]) < 3:
            return None
        per = dict(zip(pool["periods"], pool["df_per_file"].values(), strict=True))
        own = [float(per.get(lab, np.nan)) for lab in labels]
        return lambda a, b, va, vb: change_df([va, vb], [own[a], own[b]], "sum")
    if by != FILE_COLUMN or not pool.get("df_per_file"):
        raise EstimationError("the Satterthwaite df of a change needs pooled files compared by "
                              "_file, with strata per file and linearization; drop it or use "
                              "by='_file'")
    per_period = dict(zip(pool["periods"], pool["df_per_file"].values(), strict=True))
    dfs = [float(per_period.get(lab, np.nan)) for lab in labels]
    return lambda a, b, va, vb: change_df([va, vb], [dfs[a], dfs[b]], "satterthwaite")
