"""Coverage simulation: do wstats' 95% intervals cover the truth 95% of the time?

R independent samples (fixed seeds) are drawn from ONE finite population, the fictional TBCHS
(``demo``), each decoded with the demo codebook and analysed with the codebook's default design
(wt_final, strata ds_strat, PSUs ds_psu). Every mean and proportion below is estimated for the
whole population and for each age group and each district, and its interval is compared with
the population value (``demo.population_truth``: valid answers only, "none" codes as 0, unit-
coded frequencies per year, skip-pattern items among those asked, as wstats estimates them).

Expected coverage, from the sources:
- means, Wald-t interval est +- t(df) SE with the linearized SE and df = PSUs - strata: the
  nominal 95% in large samples, Wolter (2007) Introduction to Variance Estimation, 2nd ed.,
  ch. 6, and Lohr (2010) Sampling: Design and Analysis, 2nd ed., ch. 9 (both from memory);
- proportions, Korn & Graubard (1998) Survey Methodology 24(2):193-201, "Confidence intervals
  for proportions with small expected number of positive counts estimated from survey data":
  a Clopper-Pearson interval on the effective sample size, at or somewhat above the nominal
  level (Clopper-Pearson is conservative; from memory).
The demo selects PSUs without replacement (about a third of each stratum's clusters) while the
variance formula is the with-replacement one, which overstates the between-PSU part (Wolter
2007, ch. 6, from memory): coverage a little above 95% is expected, below it is not.

The requirement of the issue: pooled coverage of means and, separately, of proportions in
[0.93, 0.97]. Estimands of one sample are correlated, so the Monte Carlo SE of a pooled
coverage is the SD of the per-sample coverage fractions over sqrt(R) (the samples are
independent; common practice, no source); with R = 150 it is about 0.002, so the band is more
than 4 SE away from 0.95 and from the 0.96 the Korn-Graubard interval gives here (two runs of
300 other samples gave 0.949 and 0.948 for means, 0.961 and 0.958 for proportions).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import demo
from _demo_helpers import demo_codebook, raw_table
from demo.items import value_labels
from wstats import Design, estimate

R = 150  # samples
ROWS = 6000  # respondents per sample
SEED = 1000  # samples use seeds SEED, SEED + 1, ..., SEED + R - 1
BAND = (0.93, 0.97)
DOMAINS = ("dm_age5", "ar_dist")
# means: a count, a unit-coded frequency (per year), a measurement (not_measured blanks), a
# derived variable, a count with "none" = 0, and a skip-pattern follow-up (drinkers only).
# fd_fruit per year is very skewed (skewness about 6): in domains of 500-1500 respondents its
# intervals cover about 93% (a miss is mostly an interval below the truth), as expected where
# n < 25 G1^2 (Cochran 1977, Sampling Techniques, 3rd ed., sec. 2.15; from memory)
MEANS = ("sl_hours", "fd_fruit", "mx_sys", "bd_bmi", "hs_body", "al_amt")
# proportions: every level of a 5-level item and of a skip-pattern follow-up (tc_now, asked
# of ever-users); "Yes" only for binary items, whose "No" interval is the mirror image
PROPORTIONS = {"hs_rate": (1, 2, 3, 4, 5), "pa_sport": (1,), "ac_cover": (1,), "tc_now": (1, 2, 3)}
KEY = ["variable", "statistic", "category", "domain", "level"]

pytestmark = pytest.mark.slow  # about 45 s of CPU; still part of the default run


def _codes() -> dict[str, dict[str, int]]:
    """Return variable -> {value label -> code} from the demo's own item table."""
    return {name: {text: int(code) for code, text in labels.items()}
            for name, labels in value_labels(demo.ITEMS).items()}


def _tidy(frame: pd.DataFrame, by: str, codes: dict[str, dict[str, int]]) -> pd.DataFrame:
    """Return the wanted rows of one estimate frame keyed like the truth table."""
    whole = frame[by].isna().to_numpy()
    out = pd.DataFrame({
        "variable": frame["variable"].to_numpy(),
        "statistic": frame["statistic"].to_numpy(),
        "category": ["" if s == "mean" else str(codes[v][lab]) for v, s, lab in
                     zip(frame["variable"], frame["statistic"], frame["level"], strict=True)],
        "domain": np.where(whole, "all", by),
        "level": [0 if w else codes[by][lab] for w, lab in zip(whole, frame[by], strict=True)],
        **{c: frame[c].to_numpy() for c in ("estimate", "se", "ci_low", "ci_high")},
    })
    wanted = out["statistic"].eq("mean") | pd.Series(
        [c != "" and int(c) in PROPORTIONS.get(v, ()) for v, c in
         zip(out["variable"], out["category"], strict=True)])
    if by != DOMAINS[0]:
        wanted &= out["domain"].ne("all")  # the whole population once per sample
    return out[wanted.to_numpy()]


@pytest.fixture(scope="module")
def truth() -> pd.DataFrame:
    """The population truth (about 30 s the first time in a process; then cached by demo)."""
    return demo.population_truth()


@pytest.fixture(scope="module")
def runs(truth: pd.DataFrame) -> pd.DataFrame:
    """One row per sample x estimand: estimate, SE, interval, truth and whether it covers."""
    codebook = demo_codebook()
    assert codebook.design is not None
    design = Design(**codebook.design)
    variables = [*MEANS, *PROPORTIONS]
    needed = codebook.raw_columns_for([*variables, *DOMAINS, *codebook.design.values()])
    codes = _codes()
    parts = []
    for rep, frame in enumerate(demo.draw_samples(R, seed=SEED, rows=ROWS)):
        data = codebook.decode(raw_table(frame, needed))
        for by in DOMAINS:
            table = estimate(data, design, variables, by=[by])
            parts.append(_tidy(table.frame, by, codes).assign(rep=rep))
    found = pd.concat(parts, ignore_index=True)
    merged = found.merge(truth[[*KEY, "value"]].rename(columns={"value": "truth"}), on=KEY,
                         how="left", validate="many_to_one")
    merged["covered"] = (merged["ci_low"] <= merged["truth"]) & (
        merged["truth"] <= merged["ci_high"])
    return merged


def _report(part: pd.DataFrame) -> str:
    """Return per-estimand coverage (whole population, age groups, districts) as text."""
    table = part.groupby(["variable", "category", "domain"])["covered"].mean().unstack()
    lines = [f"{v}{'=' + c if c else ''}: " + ", ".join(
        f"{d} {row[d]:.3f}" for d in ("all", *DOMAINS)) for (v, c), row in table.iterrows()]
    return "; ".join(lines)


def _check_band(runs: pd.DataFrame, statistic: str) -> None:
    """Assert the pooled coverage of *statistic* lies in BAND; say what each estimand did."""
    part = runs[runs["statistic"] == statistic]
    per_sample = part.groupby("rep")["covered"].mean()
    pooled = float(part["covered"].mean())
    mc_se = float(per_sample.std(ddof=1) / np.sqrt(R))
    assert BAND[0] <= pooled <= BAND[1], (
        f"pooled coverage of {statistic}s {pooled:.4f} (Monte Carlo SE {mc_se:.4f}, "
        f"{len(part)} intervals) outside {BAND}; per estimand: {_report(part)}")


def test_every_estimand_found_its_truth(runs: pd.DataFrame) -> None:
    n_props = sum(len(c) for c in PROPORTIONS.values())
    per_sample = (len(MEANS) + n_props) * (1 + 5 + 6)  # whole, 5 age groups, 6 districts
    assert len(runs) == R * per_sample
    assert runs["truth"].notna().all()
    assert np.isfinite(runs[["estimate", "se", "ci_low", "ci_high"]].to_numpy()).all()
    assert (runs["ci_low"] < runs["ci_high"]).all()


def test_mean_intervals_cover_at_the_nominal_level(runs: pd.DataFrame) -> None:
    # Wald-t with linearized SE: nominal 95% (Wolter 2007 ch. 6; Lohr 2010 ch. 9; from memory)
    _check_band(runs, "mean")


def test_proportion_intervals_cover_at_the_nominal_level(runs: pd.DataFrame) -> None:
    # Korn & Graubard (1998) Survey Methodology 24(2):193-201: at or above 95% (from memory)
    _check_band(runs, "proportion")


def test_no_estimand_is_biased(runs: pd.DataFrame) -> None:
    # Coverage can pass while an estimator is biased and its SE too wide; so each estimand's
    # mean over R samples must be within a Bonferroni bound (family error 0.001) of the truth,
    # z = (mean - truth) / (SD / sqrt(R)) ~ t(R - 1) when unbiased (common practice, no source).
    # The weights are nonresponse adjusted within district x age group, the classes in which
    # the demo's response probability is constant, so no estimand should be biased.
    groups = runs.groupby(KEY)
    summary = groups.agg(mean=("estimate", "mean"), sd=("estimate", "std"),
                         truth=("truth", "first"), se=("se", "mean"))
    z = (summary["mean"] - summary["truth"]) / (summary["sd"] / np.sqrt(R))
    bound = float(stats.t.ppf(1 - 0.001 / 2 / len(z), R - 1))
    worst = z.abs().sort_values(ascending=False).head(5)
    assert z.abs().max() < bound, (
        f"bias |z| above {bound:.2f}: {worst.round(2).to_dict()}; SE/SD there: "
        f"{(summary['se'] / summary['sd']).loc[worst.index].round(3).to_dict()}")
