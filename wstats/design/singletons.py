"""Strata with one PSU: the error that lists them, and collapsing them into pools.

Conventions in :mod:`wstats.design.declared` (``singleton``): ``fail`` raises; ``collapse``
pools every singleton stratum with the next stratum in value order (a singleton that is last
joins the pool before it); with pooled files no pool crosses from one file to the next.
``certainty`` and ``center`` act in the variance (:mod:`wstats.estimation.variance`).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from wstats.errors import SingletonStratumError

if TYPE_CHECKING:
    import numpy.typing as npt

    Array = npt.NDArray[np.float64]
    Index = npt.NDArray[np.int64]

__all__ = ["collapse_groups", "singleton_error", "treat_singletons"]

_SHOW = 5  # how many offending strata a message lists


def singleton_error(labels: Sequence[str]) -> SingletonStratumError:
    """Return the error listing strata with one PSU and the alternatives."""
    shown = ", ".join(f"'{s}'" for s in labels[:_SHOW])
    more = f" and {len(labels) - _SHOW} more" if len(labels) > _SHOW else ""
    return SingletonStratumError(
        f"{len(labels)} strata have a single PSU ({shown}{more}); the variance cannot be "
        "estimated there: choose a treatment with --singleton certainty, center or collapse "
        "(in Python: Design(..., singleton='certainty'))"
    )


def treat_singletons(treatment: str, psu_stratum: Index, n_h: Index, f_h: Array,
                labels: list[str], breaks: npt.NDArray[np.bool_] | None = None
                ) -> tuple[Index, Index, Array, list[str]]:
    """Apply the singleton treatment: fail, or collapse strata; others act in the variance.

    *breaks* marks strata that begin another pooled file: no pool crosses them.
    """
    single = n_h == 1
    if not single.any() or treatment in ("certainty", "center"):
        return psu_stratum, n_h, f_h, labels
    if treatment == "fail":
        raise singleton_error([labels[h] for h in np.flatnonzero(single)])
    group = collapse_groups(single, breaks)
    n_g = np.bincount(group, weights=n_h).astype(np.int64)
    with np.errstate(divide="ignore"):
        pop = np.where(f_h > 0, n_h / np.where(f_h > 0, f_h, 1.0), np.inf)
    pop_g = np.bincount(group, weights=pop)
    f_g = np.where(np.isinf(pop_g), 0.0, n_g / np.where(np.isinf(pop_g), 1.0, pop_g))
    names = ["+".join(labels[h] for h in np.flatnonzero(group == g)) for g in range(len(n_g))]
    return group[psu_stratum], n_g, np.asarray(f_g, dtype=np.float64), names


def collapse_groups(single: npt.NDArray[np.bool_],
                     breaks: npt.NDArray[np.bool_] | None = None) -> Index:
    """Return the pool of each stratum: a singleton joins the next stratum (last: previous).

    With *breaks* (strata that begin another file) the rule holds within each file: the last
    singleton of a file joins the pool before it in the same file.
    """
    cut = np.zeros(len(single), dtype=bool) if breaks is None else breaks
    starts = np.r_[True, ~single[:-1]] | cut
    ends = np.r_[starts[1:], True]
    lone = single & starts & ends & ~np.r_[True, cut[1:]]  # alone, a stratum before it
    starts &= ~lone  # joins the pool before it
    return (np.cumsum(starts) - 1).astype(np.int64)
