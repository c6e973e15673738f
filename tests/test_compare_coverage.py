"""Comparisons on the demo population, whose truth is known.

- Coverage: R = 150 independent samples (fixed seeds) of the fictional TBCHS population
  (``demo``), each compared across the age groups (every group against the first) for three
  means and one proportion; the 95 % interval of each difference is checked against the
  population difference (``demo.population_truth``). The issue asks for pooled coverage in
  [0.93, 0.97]. The demo draws PSUs without replacement while the variance is the
  with-replacement one, so coverage a little above 95 % is expected (Wolter 2007,
  Introduction to Variance Estimation, 2nd ed., ch. 6, from memory).
- False positives: in every sample the respondents are split at random into two halves (a
  grouping independent of everything, so every population difference between the halves is
  0); the share of p < 0.05 over R x 3 tests should be near 5 % (binomial MC SE about 1 %).
- Linearization and replicate designs agree: Rao-Wu bootstrap replicates (m_h = n_h - 1;
  Rao & Wu 1988, JASA 83:231-241, from memory) on one demo sample give the same differences
  and SEs within Monte Carlo error (relative SE of a bootstrap SE about 1/sqrt(2B); common
  practice, no source).

Samples are small (1,500 respondents) to keep the run short; the population truth takes a
few seconds once per process (cached by ``demo``).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import demo
from _demo_helpers import demo_codebook, raw_table
from wstats import Dataset, DecodedColumn, Design, compare

R = 150
ROWS = 1500
SEED = 5000
MEANS = ("sl_hours", "bd_bmi", "hs_mood")
PROPORTION = "ac_cover"  # level "Yes" (code 1)
BAND = (0.93, 0.97)

pytestmark = pytest.mark.slow  # about a minute of CPU on a loaded 2-core machine


def _truth_differences() -> dict[tuple[str, str], float]:
    """Return (variable, age group label) -> true difference from the first age group."""
    truth = demo.population_truth()
    sub = truth[truth["domain"] == "dm_age5"]
    labels = demo_codebook().labels_for("dm_age5")
    assert labels is not None
    out = {}
    for var in (*MEANS, PROPORTION):
        rows = sub[(sub["variable"] == var) & sub["category"].isin(["", "1"])]
        values = dict(zip(rows["level"].astype(int), rows["value"], strict=True))
        for code in range(2, 6):
            out[(var, labels[float(code)])] = values[code] - values[1]
    return out


def _with(data: Dataset, extra: dict[str, np.ndarray]) -> Dataset:
    """Return the data with more (valid) number columns."""
    cols = dict(data.columns)
    zero = np.zeros(data.n_rows, dtype=np.int8)
    for name, values in extra.items():
        cols[name] = DecodedColumn(name, values, zero, data.vocabulary)
    return Dataset(cols, data.vocabulary, data.n_rows, data.source)


def _with_random_halves(data: Dataset, rng: np.random.Generator) -> Dataset:
    """Return the data with a column 'half' (1 or 2) drawn independently of everything."""
    return _with(data, {"half": rng.integers(1, 3, data.n_rows).astype(float)})


@pytest.fixture(scope="module")
def runs() -> tuple[pd.DataFrame, np.ndarray]:
    """Difference rows (with truth) and the p-values of the random-halves tests."""
    codebook = demo_codebook()
    assert codebook.design is not None
    design = Design(**codebook.design, singleton="collapse")
    truth = _truth_differences()
    variables = [*MEANS, PROPORTION]
    needed = codebook.raw_columns_for([*variables, "dm_age5", *codebook.design.values()])
    rng = np.random.default_rng(SEED)
    parts, halves = [], []
    for frame in demo.draw_samples(R, seed=SEED, rows=ROWS):
        data = codebook.decode(raw_table(frame, needed))
        rows = compare(data, design, variables, by="dm_age5").differences.to_pandas()
        rows = rows[(rows["statistic"] == "mean") | (rows["level"] == "Yes")]
        rows["truth"] = [truth[(v, g)] for v, g in zip(rows["variable"], rows["group_b"],
                                                         strict=True)]
        parts.append(rows)
        split = compare(_with_random_halves(data, rng), design, [*MEANS[:2], PROPORTION],
                        by="half").differences.to_pandas()
        halves.extend(split.loc[(split["statistic"] == "mean") | (split["level"] == "Yes"),
                                "p"].tolist())
    return pd.concat(parts, ignore_index=True), np.array(halves)


def test_intervals_of_differences_cover_the_truth(runs: tuple[pd.DataFrame, np.ndarray]
                                                  ) -> None:
    found, _ = runs
    covered = (found["ci_low"] <= found["truth"]) & (found["truth"] <= found["ci_high"])
    assert len(found) == R * 4 * 4
    rate = float(covered.mean())
    by_var = covered.groupby(found["variable"]).mean().round(3).to_dict()
    assert BAND[0] <= rate <= BAND[1], f"coverage {rate:.3f}; by variable {by_var}"


def test_false_positive_rate_of_a_null_difference(runs: tuple[pd.DataFrame, np.ndarray]
                                                  ) -> None:
    _, p = runs
    assert len(p) == R * 3
    rate = float((p < 0.05).mean())
    assert 0.025 <= rate <= 0.08, f"false-positive rate {rate:.3f} over {len(p)} tests"


def test_linearization_and_bootstrap_replicates_agree() -> None:
    codebook = demo_codebook()
    assert codebook.design is not None
    needed = codebook.raw_columns_for([*MEANS, PROPORTION, "dm_age5",
                                       *codebook.design.values()])
    data = codebook.decode(raw_table(demo.build_sample(rows=6000, seed=77), needed))
    design = Design(**codebook.design, singleton="collapse")
    lin = compare(data, design, [*MEANS, PROPORTION], by="dm_age5").differences.to_pandas()
    b = 300
    reps = _rao_wu(data, codebook.design, b, np.random.default_rng(3))
    with_reps = _with(data, {f"bw{k:03d}": reps[:, k] for k in range(b)})
    rep_design = Design(codebook.design["weight"], replicates="bw*",
                        replicate_method="bootstrap")
    boot = compare(with_reps, rep_design,
                   [*MEANS, PROPORTION], by="dm_age5").differences.to_pandas()
    assert boot["difference"].to_numpy() == pytest.approx(lin["difference"].to_numpy())
    ratio = boot["se"].to_numpy() / lin["se"].to_numpy()
    mc = 1.0 / np.sqrt(2 * b)  # relative Monte Carlo SE of a bootstrap SE
    assert np.all(np.abs(ratio - 1.0) < 4.5 * mc), ratio.round(3)
    assert abs(float(np.mean(ratio)) - 1.0) < 2.5 * mc


def _rao_wu(data: Dataset, design: dict[str, str], b: int, rng: np.random.Generator
            ) -> np.ndarray:
    """Return (rows, b) Rao-Wu bootstrap weights: n_h - 1 PSUs drawn with replacement."""
    w = data[design["weight"]].values
    strata = data[design["strata"]].values
    psu = data[design["psu"]].values
    keys = np.unique(np.column_stack([strata, psu]), axis=0)
    out = np.empty((len(w), b))
    row_key = {tuple(k): i for i, k in enumerate(keys.tolist())}
    row_psu = np.array([row_key[(s, p)] for s, p in zip(strata.tolist(), psu.tolist(),
                                                        strict=True)])
    for h in np.unique(keys[:, 0]):  # loops over strata, not rows
        ids = np.flatnonzero(keys[:, 0] == h)
        n_h = len(ids)
        draws = rng.integers(0, n_h, (b, n_h - 1))
        times = np.zeros((len(keys), b))
        for r in range(b):
            times[ids, r] = np.bincount(draws[r], minlength=n_h)
        factor = n_h / (n_h - 1) * times
        inside = np.isin(row_psu, ids)
        out[inside] = w[inside, None] * factor[row_psu[inside]]
    return out
