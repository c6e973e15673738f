"""The Tamarack Basin: a fictional finite population of adults in households in clusters.

Everything about a person is a pure function of ``(population seed, person id)``: a counter-based
hash (splitmix64) turns ids into uniforms, so any subset of the population can be generated
on its own, in any order, with numpy only. A person id is ``household id * 8 + adult index``.

The frame (strata, clusters, households per cluster) is drawn once per seed. Strata are the
13 planning areas of six districts crossed with four urbanicity bands (52 strata); each stratum
holds 3 x (PSUs it will give) plus 0-2 clusters of 75-130 % of the stratum's mean cluster size,
so that systematic PPS never meets a certainty cluster.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.special import ndtri

__all__ = [
    "AREAS_PER_DISTRICT",
    "DISTRICTS",
    "POPULATION_ADULTS",
    "POPULATION_SEED",
    "URBANICITY",
    "Draw",
    "Frame",
    "age_group",
    "build_frame",
    "household_adults",
    "person_frame",
]

POPULATION_SEED = 20261201
POPULATION_ADULTS = 2_400_000
DISTRICTS = {
    1: "Cedar Hollow",
    2: "Larchmere",
    3: "North Fork",
    4: "Sable Ridge",
    5: "Willowbend",
    6: "Quillan Lakes",
}
URBANICITY = {1: "Basin core", 2: "Inner ring", 3: "Market towns", 4: "Back country"}
AREAS_PER_DISTRICT = (3, 3, 2, 2, 2, 1)
_DISTRICT_SHARE = np.array([0.27, 0.21, 0.17, 0.14, 0.12, 0.09])
# share of each district's adults by urbanicity band (core, inner, towns, back country)
_URBAN_MIX = np.array(
    [
        [0.45, 0.30, 0.15, 0.10],
        [0.30, 0.35, 0.20, 0.15],
        [0.15, 0.30, 0.30, 0.25],
        [0.10, 0.25, 0.35, 0.30],
        [0.10, 0.20, 0.35, 0.35],
        [0.10, 0.15, 0.30, 0.45],
    ]
)
_ADULT_PROBS = np.array([0.31, 0.45, 0.15, 0.09])  # 1, 2, 3, 4 adults per household
_MASK64 = (1 << 64) - 1


def _mix(x: np.ndarray) -> np.ndarray:
    """Scramble uint64 values in place with the splitmix64 finaliser (wrapping arithmetic)."""
    tmp = np.empty_like(x)
    for shift, mult in ((30, 0xBF58476D1CE4E5B9), (27, 0x94D049BB133111EB)):
        np.right_shift(x, np.uint64(shift), out=tmp)
        np.bitwise_xor(x, tmp, out=x)
        np.multiply(x, np.uint64(mult), out=x)
    np.right_shift(x, np.uint64(31), out=tmp)
    np.bitwise_xor(x, tmp, out=x)
    return x


def _key(seed: int, stream: int) -> np.uint64:
    """Return the 64-bit key of one (seed, stream) pair, computed with Python integers."""
    k = (seed * 0x9E3779B97F4A7C15 + stream * 0xD1B54A32D192ED03 + 0x632BE59BD9B4E019) & _MASK64
    return np.uint64(k)


class Draw:
    """Counter-based random numbers: one independent uniform per (id, stream).

    Parameters
    ----------
    ids : non-negative integer ids (person, household or cluster ids).
    seed : the population seed.
    """

    def __init__(self, ids: np.ndarray, seed: int) -> None:
        self.ids = np.asarray(ids, dtype=np.uint64)
        self.seed = seed

    def u(self, stream: int) -> np.ndarray:
        """Return uniforms in (0, 1) for *stream*."""
        x = self.ids * np.uint64(0x9E3779B97F4A7C15)
        x += _key(self.seed, stream)
        x = _mix(x)
        x >>= np.uint64(11)
        out = x.astype(np.float64)
        out += 0.5
        out *= 1.0 / (1 << 53)
        return out

    def z(self, stream: int) -> np.ndarray:
        """Return standard normal deviates for *stream*."""
        return np.asarray(ndtri(self.u(stream)), dtype=np.float64)


@dataclass(frozen=True, eq=False)
class Frame:
    """The sampling frame: strata, clusters and household counts.

    Attributes
    ----------
    seed : population seed.
    scale : multiplier of every cluster's household count (1 = the standard population).
    strat_district, strat_urban : district (1-6) and urbanicity band (1-4) of each stratum.
    strat_psus : number of PSUs the design selects in each stratum (2-6).
    clus_stratum : stratum index (0-based) of each cluster, clusters sorted by stratum.
    clus_households : households in each cluster.
    clus_start : first household id of each cluster, plus the total at the end.
    """

    seed: int
    scale: float
    strat_district: np.ndarray
    strat_urban: np.ndarray
    strat_psus: np.ndarray
    clus_stratum: np.ndarray
    clus_households: np.ndarray
    clus_start: np.ndarray

    @property
    def n_strata(self) -> int:
        """Number of strata."""
        return int(self.strat_district.size)

    @property
    def n_households(self) -> int:
        """Number of households in the population."""
        return int(self.clus_start[-1])

    def stratum_households(self) -> np.ndarray:
        """Return households per stratum."""
        return np.bincount(self.clus_stratum, self.clus_households, self.n_strata)


@lru_cache(maxsize=8)
def build_frame(seed: int = POPULATION_SEED, scale: float = 1.0) -> Frame:
    """Return the frame of the population with *seed*, cluster sizes multiplied by *scale*."""
    rng = np.random.default_rng([seed, 1])
    areas = np.repeat(np.arange(6), AREAS_PER_DISTRICT)
    area_share = _DISTRICT_SHARE[areas] * rng.dirichlet(np.full(13, 6.0))
    area_share /= area_share.sum()
    share = (area_share[:, None] * _URBAN_MIX[areas]).ravel()
    households = share * POPULATION_ADULTS / float(np.dot(_ADULT_PROBS, np.arange(1, 5)))
    psus = np.clip(np.rint(1.5 + 4.5 * np.sqrt(share / share.max())), 2, 6).astype(np.int64)
    n_clus = 3 * psus + rng.integers(0, 3, psus.size)
    clus_stratum = np.repeat(np.arange(psus.size), n_clus)
    rel = rng.uniform(0.75, 1.3, clus_stratum.size)
    rel /= np.bincount(clus_stratum, rel)[clus_stratum]
    sizes = np.maximum(np.rint(rel * households[clus_stratum] * scale), 20).astype(np.int64)
    start = np.concatenate([[0], np.cumsum(sizes)])
    return Frame(
        seed=seed,
        scale=scale,
        strat_district=np.repeat(np.arange(1, 7), np.array(AREAS_PER_DISTRICT) * 4),
        strat_urban=np.tile(np.arange(1, 5), 13),
        strat_psus=psus,
        clus_stratum=clus_stratum,
        clus_households=sizes,
        clus_start=start,
    )


def household_adults(household: np.ndarray, seed: int) -> np.ndarray:
    """Return the number of adults (1-4) living in each household."""
    u = Draw(household, seed).u(1)
    return 1 + np.searchsorted(np.cumsum(_ADULT_PROBS)[:-1], u, side="right")


def age_group(age: np.ndarray) -> np.ndarray:
    """Return the 5 age groups 18-29, 30-44, 45-59, 60-74, 75+ coded 1-5."""
    return 1 + np.searchsorted(np.array([30, 45, 60, 75]), age, side="right")


def person_frame(frame: Frame, pid: np.ndarray) -> dict[str, np.ndarray]:
    """Return where each person lives and who they are: the inputs of every item.

    Returns a dict with ``household``, ``cluster`` (global index), ``stratum`` (0-based),
    ``district``, ``urban``, ``adults``, ``age``, ``sex``, ``health`` (latent, N(0,1)-ish,
    higher = healthier) and ``cz`` (a cluster-level N(0,1) effect shared by neighbours).
    """
    pid = np.asarray(pid, dtype=np.int64)
    household = pid >> 3
    cluster = np.searchsorted(frame.clus_start, household, side="right") - 1
    stratum = frame.clus_stratum[cluster]
    district = frame.strat_district[stratum]
    urban = frame.strat_urban[stratum]
    d = Draw(pid, frame.seed)
    cz = Draw(cluster, frame.seed).z(2)
    # 18-64 uniform, then a thinning tail to 99; rural districts and bands are older
    young = 0.80 - 0.012 * (district - 1) - 0.02 * (urban - 1)
    u = d.u(3)
    tail = 65 + np.floor(35 * ((u - young) / (1 - young)).clip(0, 1 - 1e-12) ** 1.7)
    age = np.where(u < young, 18 + np.floor(47 * u / young), tail).astype(np.int64)
    health = 0.35 * cz + 0.9 * d.z(4) - 0.022 * (age - 45) + 0.12 * (2.5 - urban) / 1.5
    return {
        "household": household,
        "cluster": cluster,
        "stratum": stratum,
        "district": district,
        "urban": urban,
        "adults": household_adults(household, frame.seed),
        "age": age,
        "sex": np.where(d.u(5) < 0.485, 1, 2),
        "health": health,
        "cz": cz,
    }


# ---------------------------------------------------------------------------------------------
# Items: raw codes as the file stores them (NaN = blank, not asked / not measured)
