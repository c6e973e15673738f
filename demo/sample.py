"""Draw the TBCHS sample from the fixed population, weight it, pad it; compute the truth.

Design (stratified two-stage, households then one adult):

1. In each of the 52 strata, ``n_h`` clusters (2-6) are drawn by systematic PPS on the
   number of households: P(cluster) = n_h M_hi / M_h.
2. In each selected cluster, an equal take of ``m_h`` households by simple random sampling
   (fewer when the cluster is small), so households are equally likely within a stratum;
   the allocation gives small strata relatively more households (power allocation), so
   base weights differ between strata.
3. One adult at random per household: the base weight multiplies by the number of adults.
4. Unit response depends on age group and district. Respondents beyond the requested
   number are set aside at random (like late returns), which keeps the row count exact.
   The final weight divides the base weight by the weighted response rate of the
   respondent's weighting class (district x age group, classes with no respondent are
   pooled within their district).

Sample randomness comes from ``seed``; the population (and so every person's answers) only
from ``population_seed``, so different seeds re-draw samples from one population.
"""

from __future__ import annotations

from collections.abc import Iterator
from functools import lru_cache

import numpy as np
import pandas as pd

from demo.answers import person_items, unit_code
from demo.items import ITEMS, Item, column_labels, decode, value_labels
from demo.population import (
    POPULATION_SEED,
    Draw,
    Frame,
    age_group,
    build_frame,
    household_adults,
    person_frame,
)

__all__ = [
    "DEFAULT_ROWS",
    "population_households",
    "SAMPLE_SEED",
    "build_sample",
    "draw_samples",
    "extra_items",
    "population_truth",
    "sample_items",
]

DEFAULT_ROWS = 60_000
SAMPLE_SEED = 20261201
_DISTRICT_RR = np.array([0.62, 0.66, 0.70, 0.72, 0.75, 0.78])
_AGE_RR = np.array([0.72, 0.85, 1.00, 1.12, 1.08])
_TEMPLATES = ("yes/no", "scale", "days", "frequency", "follow-up", "reading", "category",
              "minutes")


def response_propensity(district: np.ndarray, group: np.ndarray) -> np.ndarray:
    """Return the probability that a sampled adult responds, by district and age group."""
    return np.asarray(_DISTRICT_RR[district - 1] * _AGE_RR[group - 1], dtype=np.float64)


def _select_clusters(frame: Frame, rng: np.random.Generator) -> np.ndarray:
    """Return a boolean mask of clusters chosen by systematic PPS within each stratum."""
    size = frame.clus_households.astype(np.float64)
    total = frame.stratum_households()
    interval = (total / frame.strat_psus)[frame.clus_stratum]
    start = rng.uniform(0.0, 1.0, frame.n_strata)[frame.clus_stratum] * interval
    end = np.cumsum(size)
    end -= np.concatenate([[0.0], np.cumsum(total)])[frame.clus_stratum]
    hits = np.ceil((end - start) / interval) - np.ceil((end - size - start) / interval)
    if hits.max() > 1:  # a cluster larger than the interval would need certainty selection
        raise RuntimeError("a TBCHS cluster exceeds its sampling interval; check the frame")
    return np.asarray(hits == 1)


def _takes(frame: Frame, chosen: np.ndarray, rows: int) -> tuple[np.ndarray, float]:
    """Return households to take in each chosen cluster and the expected respondents."""
    total = frame.stratum_households()
    expected_rr = _DISTRICT_RR[frame.strat_district - 1] * 0.93
    target = total**0.8 / np.sum(total**0.8) * (rows * 1.08 + 6 * np.sqrt(rows) + 30)
    take = np.ceil(target / (frame.strat_psus * expected_rr))
    size = frame.clus_households[chosen]
    stratum = frame.clus_stratum[chosen]
    m = np.minimum(take[stratum], np.floor(0.85 * size)).astype(np.int64)
    return m, float(np.sum(m * expected_rr[stratum]))


def _households(
    frame: Frame, chosen: np.ndarray, m: np.ndarray, rng: np.random.Generator
) -> tuple[np.ndarray, np.ndarray]:
    """Return (household ids, cluster index) of an SRS of m households per chosen cluster."""
    clusters = np.flatnonzero(chosen)
    sizes = frame.clus_households[clusters]
    owner = np.repeat(np.arange(clusters.size), sizes)
    first = np.concatenate([[0], np.cumsum(sizes)])
    offset = np.arange(owner.size) - first[owner]
    order = np.lexsort((rng.random(owner.size), owner))
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size) - first[owner[order]]
    keep = rank < m[owner]
    return frame.clus_start[clusters][owner[keep]] + offset[keep], owner[keep]


def _weight_classes(district: np.ndarray, group: np.ndarray, kept: np.ndarray) -> np.ndarray:
    """Return weighting classes: district x age group, pooled to district where one is empty."""
    cell = district * 10 + group
    has = np.bincount(cell, kept, minlength=70) > 0
    empty_in_district = np.bincount(district, ~has[cell], minlength=7) > 0
    cell = np.where(empty_in_district[district], district * 10, cell)
    if not kept.any() or (np.bincount(cell, kept, minlength=70)[cell] == 0).any():
        return np.zeros_like(cell)
    return cell


def _frame_for(rows: int, population_seed: int) -> Frame:
    """Return the standard frame, or a larger one (bigger clusters) when rows need it."""
    scale = 1.0
    while True:
        frame = build_frame(population_seed, scale)
        probe = np.ones(frame.clus_households.size, dtype=bool)
        m, _ = _takes(frame, probe, rows)
        if np.all(m < np.floor(0.85 * frame.clus_households)):
            return frame
        scale = round(scale * 1.25, 4)


def _draw(rows: int, seed: int, population_seed: int) -> dict[str, np.ndarray]:
    """Draw the sample design: respondents' person ids, stratum, cluster and final weights."""
    frame = _frame_for(rows, population_seed)
    rng = np.random.default_rng([seed, 2])
    chosen = _select_clusters(frame, rng)
    m, _ = _takes(frame, chosen, rows)
    hh, owner = _households(frame, chosen, m, rng)
    adults = household_adults(hh, frame.seed)
    pid = hh * 8 + np.floor(rng.random(hh.size) * adults).astype(np.int64)
    who = person_frame(frame, pid)
    group = age_group(who["age"])
    responded = rng.random(pid.size) < response_propensity(who["district"], group)
    kept = np.zeros(pid.size, dtype=bool)
    pool = np.flatnonzero(responded)
    if pool.size < rows:
        raise RuntimeError(f"only {pool.size} respondents for {rows} rows; lower the rows")
    kept[pool[np.argsort(rng.random(pool.size))[:rows]]] = True
    clusters = np.flatnonzero(chosen)
    stratum = frame.clus_stratum[clusters][owner]
    total = frame.stratum_households()
    base = total[stratum] / (frame.strat_psus[stratum] * m[owner]) * adults
    cell = _weight_classes(who["district"], group, kept)
    adjust = np.bincount(cell, base) / np.maximum(np.bincount(cell, base * kept), 1e-300)
    rank_in_stratum = np.arange(clusters.size) - np.searchsorted(
        frame.clus_stratum[clusters], frame.clus_stratum[clusters])
    return {
        "pid": pid[kept],
        "ds_strat": (stratum + 1)[kept].astype(float),
        "ds_psu": (rank_in_stratum[owner] + 1)[kept].astype(float),
        "wt_base": np.round(base[kept], 4),
        "wt_final": np.round((base * adjust[cell])[kept], 4),
        "frame_scale": np.array([frame.scale]),
    }


def extra_items(n: int) -> list[Item]:
    """Return *n* padding items ``px_001``... cycling through eight coded templates."""
    out = []
    for j in range(n):
        name, kind = f"px_{j + 1:03d}", _TEMPLATES[j % len(_TEMPLATES)]
        lab = f"Extra item {j + 1:03d} ({kind})"
        yes_no = {1: "Yes", 2: "No"}
        spec = {
            "yes/no": dict(kind="categorical", digits=1, labels=yes_no, valid=(1, 2)),
            "scale": dict(kind="categorical", digits=1, valid=(1, 5),
                          labels={k: f"Level {k}" for k in range(1, 6)}),
            "days": dict(kind="count", digits=2, valid=(1, 30), none=88),
            "frequency": dict(kind="count", digits=3, valid=(1, 99), none=888, unit=True),
            "follow-up": dict(kind="categorical", digits=1, labels=yes_no, valid=(1, 2),
                              universe=f"px_{j - 3:03d} = 1"),
            "reading": dict(kind="continuous", digits=None, valid=(0, 400),
                            blank="not_measured"),
            "category": dict(kind="categorical", digits=2, valid=(1, 12),
                             labels={k: f"Group {k}" for k in range(1, 13)}),
            "minutes": dict(kind="count", digits=3, valid=(1, 600), none=888),
        }[kind]
        out.append(Item(name, lab, **spec))  # type: ignore[arg-type]
    return out


def _extra_values(items: list[Item], pid: np.ndarray, health: np.ndarray,
                  seed: int) -> dict[str, np.ndarray]:
    """Return raw codes of the padding items for persons *pid* (vectorised per column)."""
    d = Draw(pid, seed)
    out: dict[str, np.ndarray] = {}
    dk_ref = {1: (7, 9), 2: (77, 99), 3: (777, 999)}
    for j, item in enumerate(items):
        kind = _TEMPLATES[j % len(_TEMPLATES)]
        # padding only needs plausible codes: two uniforms per column keep 283 columns quick
        v, w = d.u(5001 + 3 * j), d.u(5002 + 3 * j)
        score = 0.5 * health + 3.4 * (w - 0.5)
        if kind in ("yes/no", "follow-up"):
            raw = np.where(score > 0.3 * (j % 3) - 0.3, 1.0, 2.0)
        elif kind == "scale":
            raw = 1.0 + np.searchsorted(np.array([-1.2, -0.4, 0.4, 1.2]), score)
        elif kind == "days":
            raw = np.where(v < 0.4, 88.0, 1 + np.floor(30 * w**2))
        elif kind == "frequency":
            raw = unit_code(np.where(v < 0.05, 0.0, np.exp(4 + 1.3 * score)), w)
        elif kind == "reading":
            raw = np.where(v < 0.06 + 0.04 * (j % 4), np.nan, np.round(100 + 15 * score, 1))
        elif kind == "category":
            raw = 1.0 + np.floor(12 * w**1.3)
        else:
            raw = np.where(v < 0.3, 888.0, np.clip(5 * np.rint(np.exp(3.4 + 0.7 * score) / 5),
                                                   5, 600))
        if kind == "follow-up":
            raw = np.where(out[items[j - 4].name] == 1, raw, np.nan)
        if item.digits is not None:
            u = d.u(5000 + 3 * j)
            dk, ref = dk_ref[item.digits]
            p = 0.005 + 0.01 * (j % 5)
            raw = np.where(np.isnan(raw), raw, np.where(u < p, dk, np.where(u < 1.4 * p, ref,
                                                                              raw)))
        out[item.name] = raw.astype(np.float64)
    return out


def sample_items(columns: int | None = None) -> list[Item]:
    """Return the items of a sample with *columns* columns (None = the core items only)."""
    core = len(ITEMS)
    if columns is None:
        return list(ITEMS)
    if columns < core:
        raise ValueError(f"columns={columns} is below the {core} core TBCHS items; give more")
    return [*ITEMS, *extra_items(columns - core)]


def build_sample(rows: int | None = None, columns: int | None = None, seed: int = SAMPLE_SEED,
                 population_seed: int = POPULATION_SEED) -> pd.DataFrame:
    """Draw one TBCHS sample: a DataFrame of raw codes, one row per respondent.

    Parameters
    ----------
    rows : respondents (default 60,000); the count is exact.
    columns : total columns (default: the core items); extra columns are ``px_001``...
    seed : sample seed (cluster, household, adult selection and response).
    population_seed : the population; keep it fixed to re-draw from the same population.

    Returns
    -------
    pandas.DataFrame
        float64 columns, NaN = blank. ``attrs`` holds ``column_labels`` (name -> label),
        ``value_labels`` (name -> {code: label}), ``items`` (names) and ``frame_scale``
        (1.0 unless the requested rows needed a larger population).

    Examples
    --------
    >>> df = build_sample(rows=2000)
    >>> len(df), df["wt_final"].gt(0).all()
    (2000, np.True_)
    """
    rows = DEFAULT_ROWS if rows is None else int(rows)
    if rows < 1:
        raise ValueError(f"rows={rows}; give at least 1")
    items = sample_items(columns)
    design = _draw(rows, seed, population_seed)
    scale = float(design.pop("frame_scale")[0])
    order = np.lexsort((design["pid"], design["ds_psu"], design["ds_strat"]))
    design = {k: v[order] for k, v in design.items()}  # items are then generated in file order
    frame = build_frame(population_seed, scale)
    pid = design.pop("pid")
    raw = person_items(frame, pid)
    health = person_frame(frame, pid)["health"]
    raw.update(_extra_values(items[len(ITEMS):], pid, health, population_seed))
    raw.update(design)
    raw["id_resp"] = 1_000_001 + np.arange(rows, dtype=np.float64)
    block = np.empty((len(items), rows))  # one float block, column-contiguous: no pandas copy
    for j, item in enumerate(items):
        block[j] = raw.pop(item.name)
    df = pd.DataFrame(block.T, columns=[item.name for item in items], copy=False)
    df.attrs.update(column_labels=dict(zip(df.columns, column_labels(items), strict=True)),
                    value_labels=value_labels(items), items=[i.name for i in items],
                    frame_scale=scale)
    return df


def draw_samples(k: int, seed: int = SAMPLE_SEED, rows: int = 6000,
                 population_seed: int = POPULATION_SEED) -> Iterator[pd.DataFrame]:
    """Yield *k* independent samples (seeds ``seed``, ``seed + 1``, ...) of one population."""
    for i in range(k):
        yield build_sample(rows=rows, seed=seed + i, population_seed=population_seed)


_DOMAINS = ("dm_age5", "ar_dist")
_TRUTH_KINDS = ("categorical", "count", "continuous")
_NOT_ITEMS = {"id_resp", "ds_strat", "ds_psu", "wt_base", "wt_final", "iv_month", "ar_urban"}


def _truth_items() -> list[Item]:
    """Return the items the truth covers: every core item except the design columns."""
    return [item for item in ITEMS if item.name not in _NOT_ITEMS]


def _accumulate(sums: dict[str, np.ndarray], raw: dict[str, np.ndarray]) -> None:
    """Add one chunk of the population to the running sums by cell (age group x district)."""
    cell = (raw["dm_age5"].astype(np.int64) - 1) * 6 + raw["ar_dist"].astype(np.int64) - 1
    values = {item.name: decode(item, raw[item.name]) for item in _truth_items()}
    values["bd_bmi"] = values["bd_mass"] / (values["bd_hgt"] / 100) ** 2
    values["hs_rate_12"] = np.where(np.isnan(values["hs_rate"]), np.nan,
                                    (values["hs_rate"] <= 2).astype(float))
    sums["size"] = sums.get("size", 0) + np.bincount(cell, minlength=30)
    for name, v in values.items():
        ok = ~np.isnan(v)
        cats = _categories(name)
        if cats:
            idx = cell[ok] * len(cats) + np.searchsorted(cats, v[ok])
            add = np.bincount(idx, minlength=30 * len(cats)).reshape(30, len(cats))
        else:
            add = np.stack([np.bincount(cell[ok], minlength=30),
                            np.bincount(cell[ok], v[ok], minlength=30)], axis=1)
        sums[name] = sums.get(name, 0) + add


def _categories(name: str) -> list[int]:
    """Return the valid categories of a categorical truth variable ([] for means)."""
    if name == "hs_rate_12":
        return [0, 1]
    item = next((i for i in ITEMS if i.name == name), None)
    if item is None or item.kind != "categorical":
        return []
    return sorted(k for k in item.labels if k != item.na)


def _margins(table: np.ndarray) -> list[tuple[str, np.ndarray, np.ndarray]]:
    """Return (domain, levels, rows) of a (30, k) cell table: all, by dm_age5, by ar_dist."""
    cube = table.reshape(5, 6, -1)
    return [("all", np.array([0]), cube.sum(axis=(0, 1))[None, :]),
            ("dm_age5", np.arange(1, 6), cube.sum(axis=1)),
            ("ar_dist", np.arange(1, 7), cube.sum(axis=0))]


def _truth_rows(sums: dict[str, np.ndarray]) -> pd.DataFrame:
    """Turn the running cell sums into the tidy truth table."""
    sizes = {dom: rows[:, 0] for dom, _, rows in _margins(sums["size"][:, None])}
    parts = []
    for name, table in sums.items():
        if name == "size":
            continue
        cats = _categories(name)
        for dom, levels, rows in _margins(table):
            n = rows.sum(axis=1) if cats else rows[:, 0]
            base = {"variable": name.removesuffix("_12"), "domain": dom, "level": levels,
                    "n_valid": n, "n_persons": sizes[dom]}
            if not cats:
                parts.append(pd.DataFrame({**base, "statistic": "mean", "category": "",
                                           "value": rows[:, 1] / n}))
            for j, c in enumerate(cats):
                if name == "hs_rate_12" and c == 0:
                    continue
                cat = "1,2" if name == "hs_rate_12" else str(c)
                parts.append(pd.DataFrame({**base, "statistic": "proportion", "category": cat,
                                           "value": rows[:, j] / n}))
    cols = ["variable", "statistic", "category", "domain", "level", "value", "n_valid",
            "n_persons"]
    return pd.concat(parts, ignore_index=True)[cols]


def population_households(frame: Frame, chunk: int = 250_000) -> Iterator[np.ndarray]:
    """Yield the person ids of the whole population, in chunks of *chunk* households."""
    for lo in range(0, frame.n_households, chunk):
        hh = np.arange(lo, min(lo + chunk, frame.n_households), dtype=np.int64)
        adults = household_adults(hh, frame.seed)
        first = np.repeat(hh * 8, adults)
        within = np.arange(first.size) - np.repeat(np.cumsum(adults) - adults, adults)
        yield first + within


@lru_cache(maxsize=4)
def _truth(population_seed: int) -> pd.DataFrame:
    """Compute (once per seed) the population truth table."""
    frame = build_frame(population_seed, 1.0)
    sums: dict[str, np.ndarray] = {}
    for pid in population_households(frame):
        _accumulate(sums, person_items(frame, pid))
    return _truth_rows(sums)


def population_truth(seed: int = POPULATION_SEED) -> pd.DataFrame:
    """Return true finite-population means and proportions of the decoded TBCHS items.

    The truth is computed over every adult of the standard population (about 2.4 million),
    among the persons with a *valid* answer: the population has its own don't-know, refusal,
    not-asked and not-measured answers, and those persons are left out of the denominator,
    exactly as an estimator does with the sample. Decoded means: "none" codes count as 0,
    unit-coded frequencies are per year, skip-pattern items cover only those asked.

    Parameters
    ----------
    seed : the population seed.

    Returns
    -------
    pandas.DataFrame
        Columns ``variable``, ``statistic`` (mean | proportion), ``category`` (the code as a
        string, "1,2" for hs_rate excellent or very good, "" for means), ``domain`` (all |
        dm_age5 | ar_dist), ``level`` (domain code; 0 for all), ``value``, ``n_valid``
        (persons with a valid answer in the domain), ``n_persons`` (persons in the domain).
        Also ``bd_bmi`` (from self-reported height and weight). The first call takes a few
        seconds; results are cached.
    """
    return _truth(seed).copy()
