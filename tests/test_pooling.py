"""Pooling several files (periods): weights, strata keys, replicate blocks, checks.

Sources: REFERENCES §16 (NCHS tutorial on combining survey cycles [S]; Botman & Jack 1995
[M]) for the rules; §12-13 for the variance of a change between independent periods.
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from wstats.decoding.columns import Dataset
from wstats.decoding.stacking import NOT_IN_FILE, stack_datasets
from wstats.design.declared import Design
from wstats.design.pooling import change_df, parse_pool, pool_factors, satterthwaite_df
from wstats.errors import DesignError, WstatsWarning
from wstats.estimation.estimate import estimate
from wstats.reports.nonresponse import nonresponse

Cols = dict[str, np.ndarray]


def _period(seed: int, strata: int = 3, psus: int = 3, rows: int = 5,
            first_stratum: int = 1, weight: float = 10.0) -> Cols:
    """Return one period's columns: strata x PSUs x rows, codes starting at *first_stratum*."""
    rng = np.random.default_rng(seed)
    n = strata * psus * rows
    s = np.repeat(np.arange(first_stratum, first_stratum + strata), psus * rows)
    p = np.tile(np.repeat(np.arange(1, psus + 1), rows), strata)
    return {"S": s.astype(float), "P": p.astype(float), "W": rng.uniform(1, 3, n) * weight,
            "y": rng.normal(5, 2, n) + s - first_stratum,
            "b": (rng.uniform(size=n) < 0.4).astype(float)}


def _pooled(*periods: Cols) -> Dataset:
    parts = [Dataset.from_arrays(c) for c in periods]
    names = [f"period{k + 1}.csv" for k in range(len(periods))]
    return stack_datasets(parts, names, None, None, [None] * len(periods))


def _stacked(*periods: Cols) -> Dataset:
    """One file holding every period, strata recoded to be distinct (S + 1000 k)."""
    out = {k: np.concatenate([c[k] + (1000 * i if k == "S" else 0)
                              for i, c in enumerate(periods)]) for k in periods[0]}
    return Dataset.from_arrays(out)


DESIGN = Design("W", strata="S", psu="P")


def _row(t: Any, i: int = 0) -> tuple[float, float, float]:
    f = t.frame
    return float(f.estimate[i]), float(f.se[i]), float(f.df[i])


def test_pooled_mean_equals_the_stacked_file_with_unscaled_weights() -> None:
    # REFERENCES §16 [S, NCHS tutorial]: means are invariant to a common weight factor, so
    # the pooled mean (weights x 1/K) is the stacked file's mean with its own weights
    a, b, c = _period(1), _period(2), _period(3)
    pooled = estimate(_pooled(a, b, c), DESIGN, ["y", "b"])
    stacked = estimate(_stacked(a, b, c), DESIGN, ["y", "b"])
    for i in range(len(pooled.frame)):
        assert _row(pooled, i) == pytest.approx(_row(stacked, i), rel=1e-12)


@settings(max_examples=25, deadline=None)
@given(sizes=st.lists(st.integers(2, 6), min_size=2, max_size=4),
       seed=st.integers(0, 10_000), rule=st.sampled_from(["equal", "rows", "factors"]))
def test_pooled_mean_is_the_weighted_combination_of_period_means(
        sizes: list[int], seed: int, rule: str) -> None:
    # REFERENCES §16: pooled mean = sum_k l_k N_k ybar_k / sum_k l_k N_k (the stacked-file
    # estimator), not the simple average of the period means
    periods = [_period(seed + k, psus=2, rows=s, weight=1 + 5 * k) for k, s in enumerate(sizes)]
    rows = [len(c["y"]) for c in periods]
    lam = (np.full(len(rows), 1 / len(rows)) if rule == "equal" else
           np.asarray(rows) / sum(rows) if rule == "rows" else
           np.arange(1, len(rows) + 1) / np.arange(1, len(rows) + 1).sum())
    design = Design("W", strata="S", psu="P",
                    pool=tuple(lam.tolist()) if rule == "factors" else rule)
    got = float(estimate(_pooled(*periods), design, ["y"]).frame.estimate[0])
    n_k = np.array([c["W"].sum() for c in periods])
    ybar = np.array([np.average(c["y"], weights=c["W"]) for c in periods])
    assert got == pytest.approx(float((lam * n_k * ybar).sum() / (lam * n_k).sum()), rel=1e-10)
    simple = float(ybar.mean())
    if rule == "equal" and abs(n_k[0] - n_k[-1]) > 1e-6 * n_k[0] and abs(ybar[0] - ybar[-1]) > 1e-3:
        assert got != pytest.approx(simple, rel=1e-9)


def test_totals_follow_the_one_over_k_rule() -> None:
    # REFERENCES §16 [S, NCHS tutorial]: each cycle's weight x 1/K, so the pooled weights sum
    # to the population of an average period and totals are average-per-period totals
    a, b, c = _period(4), _period(5, weight=12.0), _period(6, weight=8.0)
    t = estimate(_pooled(a, b, c), DESIGN, ["y"], statistics="total")
    singles = [float(estimate(Dataset.from_arrays(p), DESIGN, ["y"], statistics="total")
                     .frame.estimate[0]) for p in (a, b, c)]
    assert float(t.frame.estimate[0]) == pytest.approx(np.mean(singles), rel=1e-12)
    assert float(t.frame.weighted_n[0]) == pytest.approx(
        np.mean([p["W"].sum() for p in (a, b, c)]), rel=1e-12)


def _change_variable(*periods: Cols) -> Dataset:
    """The pooled data with d = y in period 2, -y in period 1: total(d) = T2 - T1."""
    data = _pooled(*periods)
    f = data.columns["_file"].values
    y = data.columns["y"].values
    d = np.where(f == 2, y, -y)
    cols = {**{n: data.columns[n] for n in data.columns},
            "d": data.columns["y"].replace(name="d", values=d)}
    return Dataset(cols, data.vocabulary, data.n_rows, data.source, data.metadata)


@settings(max_examples=20, deadline=None)
@given(seed=st.integers(0, 10_000), psus=st.integers(2, 4))
def test_change_se_of_independent_files_is_root_of_summed_variances(seed: int,
                                                                     psus: int) -> None:
    # REFERENCES §13, §16: independent periods, v(T2 - T1) = v1 + v2 (covariance 0); the
    # change in totals is the total of d = y (period 2) - y (period 1)
    a, b = _period(seed, psus=psus), _period(seed + 1, psus=psus)
    data = _change_variable(a, b)
    change = estimate(data, DESIGN, ["d"], statistics="total").frame
    per_file = estimate(data, DESIGN, ["y"], statistics="total", by=["_file"]).frame
    v1, v2 = float(per_file.se[1]) ** 2, float(per_file.se[2]) ** 2
    assert float(change.se[0]) == pytest.approx(np.sqrt(v1 + v2), rel=1e-10)
    # each period's domain equals that file alone, weights x 1/2 (REFERENCES §2, §16)
    alone = estimate(Dataset.from_arrays(a), DESIGN, ["y"], statistics="total").frame
    assert float(per_file.se[1]) == pytest.approx(0.5 * float(alone.se[0]), rel=1e-10)
    # df of the pooled design are the sum of the files' df (REFERENCES §16)
    assert float(change.df[0]) == 2 * float(alone.df[0])


def test_colliding_stratum_codes_change_nothing_unless_psus_are_shared() -> None:
    # REFERENCES §16: strata keyed by (file, stratum) by default, so recoding file 2's strata
    # to file 1's codes changes nothing; shared PSUs (Botman & Jack 1995 [M]) estimate the
    # covariance between periods, so v(change) is no longer v1 + v2
    a = _period(7)
    b_own, b_same = _period(8, first_stratum=11), _period(8, first_stratum=1)
    own = estimate(_change_variable(a, b_own), DESIGN, ["d", "y"], statistics="total").frame
    same = estimate(_change_variable(a, b_same), DESIGN, ["d", "y"], statistics="total").frame
    for col in ("estimate", "se", "df"):
        np.testing.assert_allclose(own[col].to_numpy(float), same[col].to_numpy(float),
                                   rtol=1e-12)
    shared = Design("W", strata="S", psu="P", shared_psus=True)
    data = _change_variable(a, b_same)
    change = estimate(data, shared, ["d"], statistics="total").frame
    per_file = estimate(data, shared, ["y"], statistics="total", by=["_file"]).frame
    v1, v2 = float(per_file.se[1]) ** 2, float(per_file.se[2]) ** 2
    cov = (v1 + v2 - float(change.se[0]) ** 2) / 2
    assert abs(cov) > 1e-6 * (v1 + v2)
    assert float(change.df[0]) == 9 - 3  # 9 shared PSUs in 3 shared strata


def _jackknife(c: Cols) -> Cols:
    """Delete-one-PSU jackknife replicates over the (stratum, PSU) clusters of one file."""
    cluster = (c["S"] * 100 + c["P"]).astype(int)
    ids = np.unique(cluster)
    g = len(ids)
    out = dict(c)
    for r, cid in enumerate(ids):
        out[f"R{r + 1:02d}"] = np.where(cluster == cid, 0.0, c["W"] * g / (g - 1))
    return out


def test_replicate_files_form_one_block_each() -> None:
    # REFERENCES §16: one block of replicates per period, records outside the block keep the
    # full-sample weight, each block its own coefficient; §8 jackknife scale (R-1)/R
    a, b = _jackknife(_period(9)), _jackknife(_period(10, weight=30.0))
    design = Design("W", replicates="R*", replicate_method="jackknife")
    pooled = estimate(_pooled(a, b), design, ["y"], statistics="total", by=["_file"]).frame
    alone = [estimate(Dataset.from_arrays(c), design, ["y"], statistics="total").frame
             for c in (a, b)]
    for k in (1, 2):
        assert float(pooled.se[k]) == pytest.approx(0.5 * float(alone[k - 1].se[0]), rel=1e-10)
    v = sum((0.5 * float(t.se[0])) ** 2 for t in alone)
    assert float(pooled.se[0]) == pytest.approx(np.sqrt(v), rel=1e-10)
    assert float(pooled.df[0]) == sum(float(t.df[0]) for t in alone)


def test_replicate_and_strata_files_do_not_mix() -> None:
    a = _jackknife(_period(11))
    b = _period(12)
    with pytest.warns(WstatsWarning, match="not in period2"):
        data = _pooled(a, b)
    design = Design("W", replicates="R*", replicate_method="jackknife")
    with pytest.raises(DesignError, match="period2.csv has no replicate weight 'R01'.*cannot "
                       "be pooled"):
        estimate(data, design, ["y"])


def test_a_variable_missing_from_one_file_is_nonresponse_not_a_skip() -> None:
    a, b = _period(13), _period(14)
    b.pop("b")
    with pytest.warns(WstatsWarning, match="variable 'b' is not in period2.csv; its rows there "
                      "get the reason not_in_file"):
        data = _pooled(a, b)
    counts = data.columns["b"].reason_counts()
    assert counts[NOT_IN_FILE] == len(b["y"])
    assert counts["skipped"] == 0
    table = nonresponse(data, DESIGN, ["b"])
    row = table.frame.iloc[0]
    assert row[f"count_{NOT_IN_FILE}"] == len(b["y"])
    assert row["asked"] == len(a["y"]) + len(b["y"])  # not out of the universe
    assert row["nonresponse_rate"] == pytest.approx(row[f"share_{NOT_IN_FILE}"], rel=1e-12)


def test_design_column_missing_from_a_file_is_named() -> None:
    a, b = _period(15), _period(16)
    b.pop("P")
    with pytest.warns(WstatsWarning):
        data = _pooled(a, b)
    with pytest.raises(DesignError, match="psu column 'P' is not in period2.csv"):
        estimate(data, DESIGN, ["y"])


def test_weight_sums_more_than_two_fold_apart_warn() -> None:
    data = _pooled(_period(17), _period(18, weight=35.0))
    with pytest.warns(WstatsWarning,
                      match=r"weights of period2.csv sum to .* \(more than 2-fold\)"):
        estimate(data, DESIGN, ["y"])


def test_value_labels_differing_between_files_warn() -> None:
    parts = [Dataset.from_arrays(_period(19)), Dataset.from_arrays(_period(20))]
    cols = dict(parts[1].columns)
    cols["b"] = cols["b"].replace(value_labels={0.0: "No", 1.0: "Yes, often"})
    parts[0] = Dataset({**parts[0].columns, "b": parts[0].columns["b"].replace(
        value_labels={0.0: "No", 1.0: "Yes"})}, parts[0].vocabulary, parts[0].n_rows)
    parts[1] = Dataset(cols, parts[1].vocabulary, parts[1].n_rows)
    with pytest.warns(WstatsWarning,
                      match="value labels of codes 1 differ between a.sav and b.sav"):
        stack_datasets(parts, ["x/a.sav", "y/b.sav"], None, None, [None, None])


def test_pool_rules() -> None:
    assert pool_factors("equal", [10, 30, 60]).tolist() == pytest.approx([1 / 3] * 3)
    assert pool_factors("rows", [10, 30, 60]).tolist() == pytest.approx([0.1, 0.3, 0.6])
    assert parse_pool("0.5,0.25,0.25") == (0.5, 0.25, 0.25)
    with pytest.raises(DesignError, match="sum to 0.9, not 1"):
        Design("W", pool=(0.5, 0.4))
    with pytest.raises(DesignError, match="2 pool factors were given for 3 files"):
        pool_factors((0.5, 0.5), [1, 2, 3])
    with pytest.raises(DesignError, match="is not equal, rows"):
        parse_pool("halves")


def test_satterthwaite_df_of_two_periods() -> None:
    # REFERENCES §16: (v1+v2)^2 / (v1^2/d1 + v2^2/d2) (Satterthwaite 1946 [M])
    assert satterthwaite_df([4.0, 1.0], [10.0, 30.0]) == pytest.approx(
        25.0 / (16.0 / 10.0 + 1.0 / 30.0), rel=1e-12)
    assert satterthwaite_df([2.0, 2.0], [12.0, 12.0]) == pytest.approx(24.0)


def test_one_file_is_not_pooled() -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        t = estimate(Dataset.from_arrays(_period(21)), DESIGN, ["y"])
    assert "pool" not in t.design


def _mean_change(data: Dataset, design: Design) -> tuple[float, float, float]:
    """Return SE of (mean 2 - mean 1) through its linearized variable, and the two SEs.

    The change's influence is u = d2 (y - ybar2)/N2 - d1 (y - ybar1)/N1 (REFERENCES §1,
    §12: a domain mean's linearized variable; a difference's is the difference); the SE of
    the total of u under the design is the SE of the change.
    """
    per = estimate(data, design, ["y"], by=["_file"]).frame
    f = data.columns["_file"].values
    y = data.columns["y"].values
    u = np.zeros(len(y))
    for k, sign in ((1, -1.0), (2, 1.0)):
        ybar, n_w = float(per.estimate[k]), float(per.weighted_n[k])
        u += np.where(f == k, sign * (y - ybar) / n_w, 0.0)
    cols = {**data.columns, "u": data.columns["y"].replace(name="u", values=u)}
    with_u = Dataset(cols, data.vocabulary, data.n_rows, data.source, data.metadata)
    change = estimate(with_u, design, ["u"], statistics="total").frame
    return float(change.se[0]), float(per.se[1]), float(per.se[2])


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 10_000))
def test_change_in_means_of_independent_files_has_no_covariance(seed: int) -> None:
    # REFERENCES §13, §16 (NCES 2006-075 App. A [S]): independent periods, v(D) = v1 + v2
    data = _pooled(_period(seed), _period(seed + 1, weight=14.0))
    se, se1, se2 = _mean_change(data, DESIGN)
    assert se == pytest.approx(np.sqrt(se1**2 + se2**2), rel=1e-10)
    shared = Design("W", strata="S", psu="P", shared_psus=True)
    se_s, se1_s, se2_s = _mean_change(data, shared)
    assert abs(se_s**2 - se1_s**2 - se2_s**2) > 1e-9 * (se1_s**2 + se2_s**2)


def _csv(path: Any, cols: Cols) -> Any:
    import pandas as pd

    pd.DataFrame(cols).to_csv(path, index=False)
    return path


def test_per_file_codebooks_with_different_missing_codes_warn(tmp_path: Any) -> None:
    from wstats import Codebook, read

    a = _period(30)
    b = _period(31)
    a["q"] = np.where(np.arange(len(a["y"])) % 10 == 0, 9.0, 1.0)
    b["q"] = np.where(np.arange(len(b["y"])) % 10 == 0, 99.0, 2.0)
    files = [_csv(tmp_path / "y1.csv", a), _csv(tmp_path / "y2.csv", b)]
    cb1 = Codebook.from_dict({"variables": {"q": {"codes": {"9": "refused"}}}})
    cb2 = Codebook.from_dict({"variables": {"q": {"codes": {"99": "refused"}}}})
    with pytest.warns(WstatsWarning, match=r"variable 'q': declared missing codes differ "
                      r"between y1.csv \(9 'refused'\) and y2.csv \(99 'refused'\)"):
        data = read(files, ["q", "W", "S", "P"], [cb1, cb2])
    expected = 2 * int((np.arange(len(a["y"])) % 10 == 0).sum())  # each file its own codes
    assert data.columns["q"].reason_counts()["refused"] == expected
    with pytest.warns(WstatsWarning, match="a codebook applies to y1.csv but not to y2.csv"):
        read(files, ["y", "W"], [cb1, None])


def test_several_files_from_a_glob_a_list_or_a_folder(tmp_path: Any) -> None:
    from wstats import read
    from wstats.errors import ColumnError, ReadError

    _csv(tmp_path / "p1.csv", _period(32))
    _csv(tmp_path / "p2.csv", _period(33))
    by_glob = read(str(tmp_path / "p*.csv"), ["y", "_file"])
    by_folder = read(tmp_path, ["y", "_file"])
    by_list = read([tmp_path / "p2.csv", tmp_path / "p1.csv"], ["y", "_file"])
    assert by_glob.metadata["pool"].stems == ("p1", "p2") == by_folder.metadata["pool"].stems
    assert by_list.metadata["pool"].stems == ("p2", "p1")  # a list keeps its order
    assert by_list.columns["_file"].value_labels == {1.0: "p2", 2.0: "p1"}
    with pytest.raises(ColumnError, match="variable 'yy' is in none of the 2 files"):
        read(str(tmp_path / "p*.csv"), ["yy"])
    with pytest.raises(ReadError, match="'.*q\\*.csv' matches no file"):
        read(str(tmp_path / "q*.csv"), ["y"])
    with pytest.raises(ReadError, match="a file is named twice"):
        read([tmp_path / "p1.csv", tmp_path / "p1.csv"], ["y"])


def test_a_codebook_labels_the_periods(tmp_path: Any) -> None:
    from wstats import Codebook, read

    _csv(tmp_path / "p1.csv", _period(34))
    _csv(tmp_path / "p2.csv", _period(35))
    cb = Codebook.from_dict({"variables": {"_file": {"kind": "categorical",
                                                     "labels": {"1": "2023", "2": "2024"}}}})
    data = read(str(tmp_path / "p*.csv"), ["y", "W", "S", "P", "_file"], cb)
    t = estimate(data, DESIGN, ["y"], by=["_file"])
    assert t.frame["_file"].tolist() == [None, "2023", "2024"]
    assert data.metadata["pool"].labels == ("2023", "2024")


def test_each_file_keeps_its_own_df_and_a_change_df_rule() -> None:
    # REFERENCES §16: df of independent periods add up; Satterthwaite as an option
    a, b = _period(40, psus=3), _period(41, strata=4, psus=2)
    t = estimate(_pooled(a, b), DESIGN, ["y"])
    alone = [float(estimate(Dataset.from_arrays(c), DESIGN, ["y"]).frame.df[0]) for c in (a, b)]
    assert t.design["pool"]["df_per_file"] == {"period1": alone[0], "period2": alone[1]}
    assert float(t.frame.df[0]) == sum(alone)
    assert change_df([2.0, 1.0], alone) == sum(alone)
    assert change_df([2.0, 1.0], alone, "satterthwaite") == pytest.approx(
        9.0 / (4.0 / alone[0] + 1.0 / alone[1]), rel=1e-12)
    with pytest.raises(DesignError, match="period df rule 'pooled' is not one of sum"):
        change_df([1.0, 1.0], alone, "pooled")


def test_collapsed_strata_stay_within_their_file() -> None:
    # a singleton stratum pools with a stratum of its own file (REFERENCES §4, §16): the
    # files stay independent, so the change's variance is still v1 + v2
    a, b = _period(50), _period(51)
    last = a["S"] == 3  # file 1's last stratum keeps one PSU
    a = {k: v[~last | (a["P"] == 1)] for k, v in a.items()}
    design = Design("W", strata="S", psu="P", singleton="collapse")
    data = _change_variable(a, b)
    change = estimate(data, design, ["d"], statistics="total").frame
    per_file = estimate(data, design, ["y"], statistics="total", by=["_file"]).frame
    assert float(change.se[0]) == pytest.approx(
        np.hypot(float(per_file.se[1]), float(per_file.se[2])), rel=1e-10)
    alone = estimate(Dataset.from_arrays(a), design, ["y"], statistics="total").frame
    assert float(per_file.se[1]) == pytest.approx(0.5 * float(alone.se[0]), rel=1e-10)


def test_compare_between_two_periods() -> None:
    # REFERENCES §13 (NCES 2006-075 App. A [S]): independent periods, SE(D) = sqrt(v1 + v2);
    # df d1 + d2, here the pooled design's df (two files, §16)
    from wstats.reports import compare as compare_module

    a, b = _period(60), _period(61, weight=13.0)
    data = _pooled(a, b)
    result = compare_module.compare(data, DESIGN, ["y"], by="_file")
    row = dict(result.differences.rows[0])
    per = estimate(data, DESIGN, ["y"], by=["_file"]).frame
    assert row["se"] == pytest.approx(np.hypot(float(per.se[1]), float(per.se[2])), rel=1e-10)
    assert row["difference"] == pytest.approx(float(per.estimate[2] - per.estimate[1]),
                                              rel=1e-10)
    assert row["df"] == float(per.df[0])


def test_satterthwaite_df_of_a_change_between_periods() -> None:
    # REFERENCES §16: df of a change, (v1+v2)^2 / (v1^2/d1 + v2^2/d2) as an option; the p
    # value on that df (t distribution: scipy.stats.t, a general library)
    from scipy import stats

    from wstats.reports.compare import compare

    a, b = _period(70, psus=3), _period(71, strata=4, psus=2, weight=12.0)
    data = _pooled(a, b)
    row = dict(compare(data, DESIGN, ["y"], by="_file", period_df="satterthwaite")
               .differences.rows[0])
    per = estimate(data, DESIGN, ["y"], by=["_file"])
    v1, v2 = float(per.frame.se[1]) ** 2, float(per.frame.se[2]) ** 2
    d1, d2 = per.design["pool"]["df_per_file"].values()
    expected = (v1 + v2) ** 2 / (v1 * v1 / d1 + v2 * v2 / d2)
    assert row["df"] == pytest.approx(expected, rel=1e-10)
    assert row["p"] == pytest.approx(2 * stats.t.sf(abs(row["t"]), expected), rel=1e-8)
    summed = dict(compare(data, DESIGN, ["y"], by="_file").differences.rows[0])
    assert summed["df"] == d1 + d2
    with pytest.raises(DesignError, match="period df rule"):
        change_df([1.0], [1.0], "mean")
    from wstats.errors import EstimationError

    with pytest.raises(EstimationError, match="Satterthwaite df of a change needs pooled files "
                       "compared by _file"):
        compare(Dataset.from_arrays(a), DESIGN, ["y"], by="S", period_df="satterthwaite")


def test_a_partitioned_folder_names_its_periods_by_their_folders(tmp_path: Any) -> None:
    import pandas as pd

    from wstats import read

    for year, seed in ((2020, 80), (2021, 81)):
        (tmp_path / f"year={year}").mkdir()
        pd.DataFrame(_period(seed)).to_parquet(tmp_path / f"year={year}" / "part-0.parquet")
    data = read(tmp_path, ["y", "W", "S", "P", "_file"])
    assert data.metadata["pool"].labels == ("year=2020/part-0", "year=2021/part-0")
    t = estimate(data, DESIGN, ["y"], by=["_file"])
    assert t.frame["_file"].tolist() == [None, "year=2020/part-0", "year=2021/part-0"]


def test_the_methods_paragraph_says_how_files_were_pooled() -> None:
    from wstats.reports.methods import methods_paragraph

    t = estimate(_pooled(_period(90), _period(91)), Design("W", strata="S", psu="P",
                                                           pool="rows"), ["y"])
    text = methods_paragraph(t.design, t.settings, {}, None, "period*.csv", None)
    assert ("Records of 2 files were pooled; each file's weights were multiplied by a share "
            "proportional to its rows (period1 0.5, period2 0.5), so totals describe an "
            "average period, not the sum of the periods; strata and PSUs were kept distinct "
            "per file, so the files count as independent samples.") in text


def test_a_change_between_two_of_three_periods_has_their_own_df() -> None:
    # REFERENCES §16: df of a change d1 + d2 by default: the two periods compared, not every
    # file's df (here d = (3 strata x 3 PSUs - 3) = 6 per period: 12, not the pooled 18);
    # the global test across all periods keeps the pooled design's df (sum over files)
    from wstats.reports.compare import compare

    data = _pooled(_period(80), _period(81), _period(82))
    result = compare(data, DESIGN, ["y"], by="_file")
    per = estimate(data, DESIGN, ["y"], by=["_file"])
    d = list(per.design["pool"]["df_per_file"].values())
    assert d == [6.0, 6.0, 6.0]
    assert [row["df"] for row in result.differences.rows] == [12.0, 12.0]
    wald = next(row for row in result.tests.rows if row["test"] == "wald")
    assert wald["df2"] == pytest.approx(18 - 3 + 2)
