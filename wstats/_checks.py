"""Warnings that matter: printed once, never fatal.

Each check returns plain message strings; :func:`warn_all` issues them as
:class:`WstatsWarning` so that a Python caller can filter them and the command line prints
each one once. Thresholds are documented in ``docs/warnings.md``.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterable

import numpy as np

from wstats.errors import WstatsWarning

__all__ = [
    "KISH_DEFF_THRESHOLD",
    "MIN_GROUP_SIZE",
    "POPULATION_SHORTFALL",
    "SINGLE_PSU_SHARE",
    "WstatsWarning",
    "check_group_sizes",
    "check_presubset",
    "check_weight_spread",
    "warn_all",
]

#: Share of strata holding one sampled PSU above which the file looks like a subset.
SINGLE_PSU_SHARE = 0.25
#: Weight sum below this share of the codebook's stated population looks like a subset.
POPULATION_SHORTFALL = 0.5
#: Kish weighting design effect above which the weights are called extreme.
KISH_DEFF_THRESHOLD = 3.0
#: By-groups with fewer respondents than this get a warning.
MIN_GROUP_SIZE = 30


def check_presubset(
    psu_per_stratum: np.ndarray, weight_sum: float, population: float | None, where: str
) -> list[str]:
    """Return warnings when the data look like a subset of the full sample file."""
    out: list[str] = []
    n_strata = len(psu_per_stratum)
    singles = int(np.count_nonzero(psu_per_stratum == 1))
    if n_strata >= 4 and singles / n_strata > SINGLE_PSU_SHARE:
        out.append(
            f"{where}: {singles} of {n_strata} strata hold a single PSU; the file may be a "
            "subset of the full sample - estimate domains on the full file (use --by/--where)"
        )
    if population and weight_sum < POPULATION_SHORTFALL * population:
        out.append(
            f"{where}: the weights sum to {weight_sum:,.0f}, far below the codebook's stated "
            f"population {population:,.0f}; the file may be a subset or the weight the wrong one"
        )
    return out


def check_weight_spread(weights: np.ndarray, name: str) -> list[str]:
    """Return a warning when Kish's weighting design effect exceeds the threshold."""
    w = weights[weights > 0]
    if len(w) < 2:
        return []
    deff = len(w) * float(np.sum(w * w)) / float(np.sum(w)) ** 2
    if deff > KISH_DEFF_THRESHOLD:
        return [
            f"weight {name}: Kish weighting design effect {deff:.2f} exceeds "
            f"{KISH_DEFF_THRESHOLD:g}; a few rows carry much of the total - check it is the "
            "final analysis weight"
        ]
    return []


def check_group_sizes(labels: Iterable[str], counts: np.ndarray) -> list[str]:
    """Return one warning naming the by-groups with fewer than MIN_GROUP_SIZE respondents."""
    small = [f"{lab} (n={int(c)})" for lab, c in zip(labels, counts, strict=True)
             if c < MIN_GROUP_SIZE]
    if not small:
        return []
    shown = ", ".join(small[:5]) + (f" and {len(small) - 5} more" if len(small) > 5 else "")
    return [f"{len(small)} by-group(s) have fewer than {MIN_GROUP_SIZE} respondents: {shown}; "
            "their estimates are unstable"]


def warn_all(messages: Iterable[str]) -> None:
    """Issue each message once as a WstatsWarning."""
    for message in dict.fromkeys(messages):
        warnings.warn(message, WstatsWarning, stacklevel=3)
