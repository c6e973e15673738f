"""Tests of the fictional TBCHS demo survey: files, design, codes, skips, codebook, truth."""

from __future__ import annotations

import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pyreadstat
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

import demo
from demo.__main__ import main
from demo.answers import unit_code
from demo.items import FAMILY_CODES, ITEMS, decode
from demo.population import Draw, build_frame, household_adults
from demo.write import codebook_text

ROWS = 3000
READERS = {"xpt": pyreadstat.read_xport, "sav": pyreadstat.read_sav, "dta": pyreadstat.read_dta}


@pytest.fixture(scope="module")
def small() -> pd.DataFrame:
    """A small core sample."""
    return demo.build_sample(rows=ROWS)


@pytest.fixture(scope="module")
def written(tmp_path_factory: pytest.TempPathFactory) -> tuple[dict[str, Path], pd.DataFrame]:
    """Demo files written with padding, and the frame they were written from."""
    out = tmp_path_factory.mktemp("tbchs")
    paths = demo.write_demo(out, rows=800, columns=90, seed=7)
    return paths, demo.build_sample(rows=800, columns=90, seed=7)


# --- files ----------------------------------------------------------------------------------


@pytest.mark.parametrize("fmt", ["xpt", "sav", "dta"])
def test_files_read_back_identical(written: tuple[dict[str, Path], pd.DataFrame],
                                   fmt: str) -> None:
    paths, frame = written
    data, meta = READERS[fmt](str(paths[fmt]))
    assert list(data.columns) == list(frame.columns)
    pd.testing.assert_frame_equal(data.astype(float), frame, check_dtype=False)
    assert dict(zip(meta.column_names, meta.column_labels, strict=True)) == frame.attrs[
        "column_labels"]
    if fmt != "xpt":  # transport v5 carries no value labels; the codebook does
        assert meta.variable_value_labels == frame.attrs["value_labels"]


def test_file_limits_of_transport_v5() -> None:
    names = [i.name for i in demo.sample_items(283)]
    assert max(map(len, names)) <= 8 and len(set(names)) == 283
    assert max(len(i.label) for i in demo.sample_items(283)) <= 40


def test_value_labels_explain_every_special_code(small: pd.DataFrame) -> None:
    labels = small.attrs["value_labels"]
    for item in ITEMS:
        if item.digits is not None:
            dk, ref = FAMILY_CODES[item.digits]
            assert labels[item.name][dk].startswith("Don't know")
            assert labels[item.name][ref] == "Refused"
        if item.none is not None:
            assert labels[item.name][item.none] in ("None", "Never")


def test_cli_writes_requested_formats(tmp_path: Path) -> None:
    assert main([str(tmp_path), "--rows", "300", "--formats", "sav"]) == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == [
        "tbchs_analysis.toml", "tbchs_codebook.toml", "tbchs_sample.sav"]
    packaged = Path(demo.__file__).with_name("tbchs_analysis.toml").read_text()
    assert (tmp_path / "tbchs_analysis.toml").read_text() == packaged


def test_cli_rejects_too_few_columns(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main([str(tmp_path), "--rows", "300", "--columns", "10"]) == 2
    assert "columns=10 is below the" in capsys.readouterr().err


# --- design ---------------------------------------------------------------------------------


def test_design_structure(small: pd.DataFrame) -> None:
    psus = small.groupby("ds_strat")["ds_psu"].agg(["nunique", "max"])
    assert 40 <= len(psus) <= 60
    assert psus["nunique"].between(2, 6).all()
    assert (psus["nunique"] == psus["max"]).all()  # numbered 1..n_h within the stratum
    assert (small["wt_final"] > 0).all() and (small["wt_base"] > 0).all()
    adjustment = small["wt_final"] / small["wt_base"]
    assert adjustment.min() >= 1 and adjustment.nunique() >= 10


def test_base_weight_is_inverse_selection_probability(small: pd.DataFrame) -> None:
    # PPS clusters x equal household take x one adult of A: w = M_h / (n_h m_h) * A, so
    # w / A is one number per PSU (common practice, no source)
    per_adult = small["wt_base"] / small["dm_adult"]
    spread = per_adult.groupby([small["ds_strat"], small["ds_psu"]]).agg(np.ptp)
    assert spread.max() < 1e-3


def test_weights_sum_to_the_population(small: pd.DataFrame) -> None:
    adults = sum(int(household_adults(np.arange(lo, min(lo + 500_000, n)), demo.POPULATION_SEED)
                     .sum()) for n in [build_frame().n_households] for lo in range(0, n, 500_000))
    assert small["wt_final"].sum() == pytest.approx(adults, rel=0.05)


def test_nonresponse_depends_on_age(small: pd.DataFrame) -> None:
    # the young respond least, so their weights are adjusted up most
    adjustment = (small["wt_final"] / small["wt_base"]).groupby(small["dm_age5"]).mean()
    assert adjustment[1] > adjustment[4] * 1.2


def test_same_seed_same_bytes_other_seed_other_sample(small: pd.DataFrame) -> None:
    again = demo.build_sample(rows=ROWS)
    pd.testing.assert_frame_equal(again, small)
    assert again.to_numpy().tobytes() == small.to_numpy().tobytes()
    other = demo.build_sample(rows=ROWS, seed=demo.SAMPLE_SEED + 1)
    assert not np.array_equal(other["wt_final"].to_numpy(), small["wt_final"].to_numpy())


def test_draw_samples_redraws_from_one_population() -> None:
    a, b = demo.draw_samples(2, seed=11, rows=500)
    pd.testing.assert_frame_equal(a, demo.build_sample(rows=500, seed=11))
    pd.testing.assert_frame_equal(b, demo.build_sample(rows=500, seed=12))


# --- codes and skips ------------------------------------------------------------------------


def test_codes_present_in_each_family(small: pd.DataFrame) -> None:
    for digits, codes in FAMILY_CODES.items():
        members = small[[i.name for i in ITEMS if i.digits == digits]]
        for code in codes:
            assert (members == code).to_numpy().sum() > 0, (digits, code)
    assert (small["pa_hday"] == 888).any() and (small["hs_body"] == 88).any()
    assert (small["so_belt"] == 8).any()  # does not apply: never in a car
    units = np.unique(small["fd_fruit"][small["fd_fruit"] < 500] // 100)
    assert units.tolist() == [1, 2, 3, 4]


@pytest.mark.parametrize(
    ("follow_up", "asked"),
    [
        ("tc_now", lambda d: d["tc_ever"] == 1),
        ("tc_start", lambda d: d["tc_ever"] == 1),
        ("tc_cigs", lambda d: d["tc_now"].isin([1, 2])),
        ("tc_quit", lambda d: d["tc_now"].isin([1, 2])),
        ("dx_bptrt", lambda d: d["dx_bp"] == 1),
        ("dx_lipid", lambda d: d["ac_lipid"] == 1),
        ("dx_jpain", lambda d: d["dx_joint"] == 1),
        ("al_amt", lambda d: d["al_days"].between(1, 30)),
        ("pa_hmin", lambda d: d["pa_hday"].between(1, 7)),
        ("ac_flumo", lambda d: d["ac_flu"] == 1),
        ("so_trip", lambda d: d["dm_work"].isin([1, 2])),
    ],
)
def test_skip_pattern(small: pd.DataFrame, follow_up: str, asked: object) -> None:
    mask = asked(small)  # type: ignore[operator]
    assert small.loc[~mask, follow_up].isna().all()
    assert small.loc[mask, follow_up].notna().all()
    assert 0 < mask.mean() < 1


def test_item_nonresponse_differs_by_domain(small: pd.DataFrame) -> None:
    refused = (small["dm_incbd"] == 99).groupby(small["dm_age5"]).mean()
    assert refused[5] > 1.5 * refused[1]


def test_padding_gives_exact_shape() -> None:
    df = demo.build_sample(rows=2000, columns=120)
    assert df.shape == (2000, 120)
    assert list(df.columns[-52:]) == [f"px_{i:03d}" for i in range(1, 53)]
    follow = [i for i in demo.sample_items(120) if i.universe.startswith("px_")]
    for item in follow:
        screener = item.universe.split(" ")[0]
        assert df.loc[df[screener] != 1, item.name].isna().all()
    with pytest.raises(ValueError, match="below the 68 core"):
        demo.build_sample(rows=100, columns=50)


@settings(max_examples=60, deadline=None)
@given(st.floats(min_value=1.0, max_value=99 * 365.0))
def test_unit_code_round_trip(rate: float) -> None:
    # decoding a count-with-unit code loses at most the rounding of the count (count >= 1)
    item = next(i for i in ITEMS if i.name == "fd_fruit")
    for u in (0.1, 0.9):
        code = unit_code(np.array([rate]), np.array([u]))
        assert 101 <= code[0] <= 499 and 1 <= code[0] % 100 <= 99
        assert 2 / 3 <= decode(item, code)[0] / rate <= 4 / 3


def test_draw_uniforms_are_uniform_and_stable() -> None:
    ids = np.arange(50_000)
    u = Draw(ids, 5).u(3)
    assert np.array_equal(u, Draw(ids, 5).u(3))
    assert stats.kstest(u, "uniform").pvalue > 1e-4  # scipy one-sample KS
    assert abs(np.corrcoef(u, Draw(ids, 5).u(4))[0, 1]) < 0.02


# --- codebook -------------------------------------------------------------------------------


def test_packaged_codebook_is_the_generated_one() -> None:
    packaged = Path(demo.__file__).with_name("tbchs_codebook.toml").read_text()
    assert packaged == codebook_text(ITEMS)
    parsed = tomllib.loads(packaged)
    assert parsed["design"] == {"weight": "wt_final", "strata": "ds_strat", "psu": "ds_psu"}


def test_codebook_decodes_like_the_demo(written: tuple[dict[str, Path], pd.DataFrame]) -> None:
    from wstats.decoding.codebook import load_codebook
    from wstats.decoding.load import read

    paths, frame = written
    cb = load_codebook(paths["codebook"])
    data = read(paths["sav"], codebook=cb)
    for item in demo.sample_items(90):
        col = data.columns[item.name]
        expected = decode(item, frame[item.name].to_numpy())
        np.testing.assert_array_equal(col.values, expected, err_msg=item.name)
        reasons = np.array([data.vocabulary.name(int(r)) for r in col.reasons])
        raw = frame[item.name].to_numpy()
        assert (reasons[np.isnan(raw)] == item.blank).all(), item.name
        if item.digits is not None:
            dk, ref = FAMILY_CODES[item.digits]
            assert (reasons[raw == dk] == "dont_know").all(), item.name
            assert (reasons[raw == ref] == "refused").all(), item.name


# --- population truth -----------------------------------------------------------------------


@pytest.fixture(scope="module")
def truth() -> pd.DataFrame:
    """The population truth (computed once; about 15 s)."""
    return demo.population_truth()


@pytest.mark.slow
def test_truth_is_consistent_with_the_population(truth: pd.DataFrame) -> None:
    frame = build_frame()
    adults = sum(household_adults(np.arange(lo, min(lo + 500_000, frame.n_households)),
                                  frame.seed).sum()
                 for lo in range(0, frame.n_households, 500_000))
    overall = truth[truth["domain"] == "all"]
    assert (overall["n_persons"] == adults).all()
    props = truth[(truth["statistic"] == "proportion") & (truth["category"] != "1,2")]
    sums = props.groupby(["variable", "domain", "level"])["value"].sum()
    np.testing.assert_allclose(sums, 1.0, rtol=1e-12)
    means = truth[truth["statistic"] == "mean"].set_index(["variable", "domain", "level"])
    for dom in ("dm_age5", "ar_dist"):
        part = means.xs(dom, level="domain")
        pooled = (part["value"] * part["n_valid"]).groupby("variable").sum() / part[
            "n_valid"].groupby("variable").sum()
        np.testing.assert_allclose(pooled, means.xs("all", level="domain")["value"]
                                   .droplevel("level").loc[pooled.index], rtol=1e-10)


@pytest.mark.slow
def test_truth_recomputed_directly(truth: pd.DataFrame) -> None:
    # the smallest district, regenerated household by household and averaged with plain numpy
    from demo.answers import person_items

    frame = build_frame()
    clusters = np.flatnonzero(frame.strat_district[frame.clus_stratum] == 6)
    hh = np.arange(frame.clus_start[clusters[0]], frame.clus_start[clusters[-1] + 1])
    adults = household_adults(hh, frame.seed)
    within = np.arange(adults.sum()) - np.repeat(np.cumsum(adults) - adults, adults)
    pid = np.repeat(hh * 8, adults) + within
    raw = person_items(frame, pid)
    assert (raw["ar_dist"] == 6).all()
    item = next(i for i in ITEMS if i.name == "mx_sys")
    v = decode(item, raw["mx_sys"])
    row = truth.query("variable == 'mx_sys' and domain == 'ar_dist' and level == 6").iloc[0]
    assert row["value"] == pytest.approx(np.nanmean(v), rel=1e-12)
    assert row["n_valid"] == np.count_nonzero(~np.isnan(v))
    assert row["n_persons"] == pid.size


def _design_mean(df: pd.DataFrame, y: np.ndarray) -> tuple[float, float]:
    """Weighted mean and its with-replacement linearization SE (REFERENCES.md section 1)."""
    # Woodruff (1971) JASA 66:411-414; Wolter (2007) Introduction to Variance Estimation, ch. 6
    ok = ~np.isnan(y)
    w = df["wt_final"].to_numpy() * ok
    yy = np.where(ok, y, 0.0)
    mean = np.sum(w * yy) / np.sum(w)
    z = pd.Series(w * (yy - mean) / np.sum(w)).groupby(
        [df["ds_strat"].to_numpy(), df["ds_psu"].to_numpy()]).sum()
    by_stratum = z.groupby(level=0)
    n_h = by_stratum.transform("size")
    dev = z - by_stratum.transform("mean")
    return mean, float(np.sqrt(np.sum(n_h / (n_h - 1) * dev**2)))


@pytest.mark.slow
def test_default_sample_estimates_cover_truth(truth: pd.DataFrame) -> None:
    df = demo.build_sample()
    assert df.shape == (60_000, len(ITEMS))
    overall = truth[truth["domain"] == "all"]
    checks = {"mx_sys": "", "fd_fruit": "", "hs_body": "", "pa_hday": "", "tc_now": "1"}
    for name, cat in checks.items():
        item = next(i for i in ITEMS if i.name == name)
        y = decode(item, df[name].to_numpy())
        if cat:
            y = np.where(np.isnan(y), np.nan, (y == float(cat)).astype(float))
        est, se = _design_mean(df, y)
        true = overall.query("variable == @name and category == @cat")["value"].iloc[0]
        assert abs(est - true) < 4 * se, (name, est, true, se)
