"""Warnings that matter: printed once, never fatal.

Each check returns plain message strings; :func:`warn_all` issues them as
:class:`WstatsWarning` so that a Python caller can filter them and the command line prints
each one once. Thresholds are documented in ``docs/warnings.md``.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from wstats.decoding.columns import row_tiles
from wstats.errors import WstatsWarning

if TYPE_CHECKING:
    from wstats.decoding.columns import Dataset, DecodedColumn

__all__ = [
    "DesignFacts",
    "KISH_DEFF_THRESHOLD",
    "MIN_GROUP_SIZE",
    "POPULATION_SHORTFALL",
    "SINGLE_PSU_SHARE",
    "WstatsWarning",
    "check_group_sizes",
    "check_presubset",
    "check_special_codes",
    "estimation_warnings",
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
    """Return a warning when Kish's weighting design effect exceeds the threshold.

    Over the positive weights, in row tiles (no copy of the weight column). The weights are
    divided by the largest one first, so that weights near the ends of the float range
    (1e200 or 1e-200) neither overflow when squared nor vanish: the ratio does not change.
    """
    top = max((float(weights[t].max(initial=0.0)) for t in row_tiles(len(weights))),
              default=0.0)
    if not top > 0 or not np.isfinite(top):
        return []
    n, total, squares = 0, 0.0, 0.0
    for tile in row_tiles(len(weights)):  # loop over row tiles, not rows
        w = weights[tile]
        w = w[w > 0] / top
        n, total, squares = n + len(w), total + float(w.sum()), squares + float(w @ w)
    if n < 2:
        return []
    deff = n * squares / total**2
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


def check_special_codes(columns: Mapping[str, DecodedColumn], skip: Iterable[str]) -> list[str]:
    """Warn about valid values that look like unexplained don't-know/refused/none codes.

    Only numeric, non-categorical variables that the codebook does not describe are looked at,
    and only when their largest valid value is a candidate code (a cheap filter: the full
    spike test of ``codebook draft`` runs on those few).
    """
    described = set(skip)
    looked_at = [(name, col) for name, col in columns.items()
                 if name not in described and col.kind in ("continuous", "count")]
    if not looked_at:
        return []  # without importing the draft module (a few ms of every run)
    from wstats.decoding.draft import CANDIDATES, suspected_codes

    out: list[str] = []
    for name, col in looked_at:
        if not len(col.values) or float(np.fmax.reduce(col.values)) not in CANDIDATES:
            continue  # the largest valid value (NaN where not valid) is no candidate code
        v = col.values[col.valid]
        found = _at_the_top(v, suspected_codes(v), CANDIDATES)
        if found:
            codes = ", ".join(f"{c:g} ({k} rows)" for c, k in found)
            out.append(f"variable {name}: values {codes} look like special codes (don't know/"
                       "refused/none) that no codebook rule explains; they are averaged as "
                       "numbers - map them in the codebook (see 'wstats codebook draft')")
    return out


def _at_the_top(v: np.ndarray, found: list[tuple[float, int]],
                candidates: Sequence[float]) -> list[tuple[float, int]]:
    """Keep suspects above every ordinary value; a one-digit code also needs a gap below it.

    A warning must not cry wolf: 7 hours of sleep is an answer, 7 after a 1-5 scale is not.
    """
    ordinary = v[~np.isin(v, candidates)]
    top = float(ordinary.max()) if len(ordinary) else -np.inf
    return [(c, k) for c, k in found if c > top and (c >= 10 or c > top + 1)]


@dataclass(frozen=True)
class DesignFacts:
    """What the design checks need: PSUs per stratum, the weights, the weight's name."""

    psu_per_stratum: np.ndarray
    weights: np.ndarray
    weight_name: str


def estimation_warnings(data: Dataset, facts: DesignFacts, variables: Sequence[str],
                        groups: tuple[Sequence[str], np.ndarray] | None) -> list[str]:
    """Return every warning that applies to one estimation call."""
    where = data.source or "the data"
    population = data.metadata.get("population")
    out = check_presubset(facts.psu_per_stratum, float(facts.weights.sum()), population, where)
    out += check_weight_spread(facts.weights, facts.weight_name)
    cols = {n: data.columns[n] for n in variables if n in data.columns}
    out += check_special_codes(cols, data.metadata.get("described", ()))
    if groups is not None:
        out += check_group_sizes(*groups)
    return out
