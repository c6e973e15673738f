"""The Dask engine gives the in-memory engine's numbers (to 1e-10 relative) or refuses.

Oracle: the in-memory engine itself (tested elsewhere against published formulas); the
Dask engine sums partitions and must agree with it up to the order of the additions.
One small local cluster (2 worker processes) serves every test of this module.
"""

from __future__ import annotations

import sys
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest

pytest.importorskip("distributed")

from demo.periods import write_periods  # noqa: E402
from wstats import Design, estimate, read  # noqa: E402
from wstats.errors import DesignError, EngineError  # noqa: E402

NUMBERS = ("estimate", "se", "ci_low", "ci_high", "df", "deff", "deff_weight", "n_eff", "n",
           "weighted_n", "cv")
DEMO = Design("wt_final", strata="ds_strat", psu="ds_psu")


@pytest.fixture(scope="module")
def cluster() -> Iterator[str]:
    import logging

    from distributed import LocalCluster

    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                      dashboard_address=None, silence_logs=logging.ERROR) as c:
        yield str(c.scheduler_address)


@pytest.fixture(scope="module")
def periods(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = tmp_path_factory.mktemp("dask_periods")
    write_periods(folder, periods=2, rows=3000)
    return folder


def _same(memory: Any, dask: Any) -> None:
    a, b = memory.frame, dask.frame
    assert list(a.columns) == list(b.columns)
    assert len(a) == len(b)
    for col in NUMBERS:
        np.testing.assert_allclose(b[col].to_numpy(float), a[col].to_numpy(float),
                                   rtol=1e-10, atol=0, equal_nan=True, err_msg=col)
    for col in ("variable", "statistic", "level", "reasons", "flags", "suppress"):
        assert a[col].tolist() == b[col].tolist(), col
    for by in memory.by:
        assert a[by].tolist() == b[by].tolist()


def _both(files: Any, design: Design, variables: list[str], scheduler: str,
          codebook: Path | None, **options: Any) -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the data-sanity lines are the in-memory engine's
        memory = estimate(files, design, variables, codebook=codebook, **options)
    dask = estimate(files, design, variables, codebook=codebook, engine="dask",
                    scheduler=scheduler, **options)
    _same(memory, dask)
    assert dask.settings["engine"] == "dask"
    assert memory.settings == {k: v for k, v in dask.settings.items() if k != "engine"}
    assert dict(memory.design) == dict(dask.design)  # strata, PSUs, df, the pooling


def test_demo_means_and_proportions_by_domain(periods: Path, cluster: str) -> None:
    cb = periods / "tbchs_codebook.toml"
    _both(periods / "period1.xpt", DEMO, ["sl_hours", "hs_rate", "hs_body"], cluster, cb,
          by=["dm_age5", "dm_sex"], where="dm_age >= 30")


def test_demo_ratios(periods: Path, cluster: str) -> None:
    cb = periods / "tbchs_codebook.toml"
    _both(periods / "period1.xpt", DEMO, ["sl_hours"], cluster, cb, by=["dm_age5"],
          ratios=[("hs_body", "sl_hours"), ("bd_mass", "bd_hgt")])


def test_demo_totals_and_centred_singletons(periods: Path, cluster: str) -> None:
    cb = periods / "tbchs_codebook.toml"
    design = Design("wt_final", strata="ds_strat", psu="ds_psu", singleton="certainty")
    _both(periods / "period2.xpt", design, ["sl_hours", "hs_mood"], cluster, cb,
          statistics="total", by=["ar_dist"])


def test_pooled_periods_by_file(periods: Path, cluster: str) -> None:
    cb = periods / "tbchs_codebook.toml"
    files = str(periods / "period*.xpt")
    _both(files, DEMO, ["sl_hours", "hs_rate"], cluster, cb, by=["_file"])
    shared = Design("wt_final", strata="ds_strat", psu="ds_psu", shared_psus=True,
                    pool="rows")
    _both(files, shared, ["sl_hours"], cluster, cb, by=["_file", "dm_age5"])


def _replicate_file(folder: Path, seed: int, name: str) -> Path:
    """A small survey with delete-one-cluster jackknife replicates, as Parquet."""
    import pandas as pd

    rng = np.random.default_rng(seed)
    n = 600
    cluster = np.repeat(np.arange(12), n // 12)
    w = rng.uniform(1, 4, n)
    frame = {"W": w, "C": cluster.astype(float), "y": rng.normal(10, 3, n),
             "g": rng.integers(1, 4, n).astype(float), "d": rng.integers(1, 3, n).astype(float)}
    frame["y"][rng.uniform(size=n) < 0.05] = np.nan
    for r in range(12):
        frame[f"RW{r + 1:02d}"] = np.where(cluster == r, 0.0, w * 12 / 11)
    path = folder / name
    pd.DataFrame(frame).to_parquet(path, row_group_size=100)  # 6 row groups
    return path


def test_replicate_design_in_partitions(tmp_path: Path, cluster: str) -> None:
    # REFERENCES §8 jackknife; a Parquet file cut into 3 partitions of 200 rows
    from wstats.estimation.dask_engine import parquet_ranges

    path = _replicate_file(tmp_path, 1, "reps.parquet")
    assert parquet_ranges(str(path), 200) == [(0, 200), (200, 400), (400, 600)]
    assert parquet_ranges(str(path), 250) == [(0, 300), (300, 600)]
    assert parquet_ranges(str(path), 10_000) == [(0, None)]
    design = Design("W", replicates="RW*", replicate_method="jackknife")
    memory = estimate(path, design, ["y", "g"], categorical=["g"], by=["d"],
                      ratios=[("y", "W")])
    from wstats.estimation.dask_engine import estimate_dask

    dask = estimate_dask(path, design, ["y", "g"], categorical=["g"], by=["d"],
                         ratios=[("y", "W")], scheduler=cluster, partition_rows=200)
    _same(memory, dask)


def test_pooled_replicate_files_in_blocks(tmp_path: Path, cluster: str) -> None:
    # REFERENCES §16: one block of replicates per file
    _replicate_file(tmp_path, 2, "year1.parquet")
    _replicate_file(tmp_path, 3, "year2.parquet")
    design = Design("W", replicates="RW*", replicate_method="jackknife")
    files = str(tmp_path / "year*.parquet")
    _both(files, design, ["y"], cluster, None, by=["_file"], statistics=["mean", "total"],
          ratios=[("y", "g")])


def test_quantiles_exactly_with_woodruff_intervals(periods: Path, cluster: str) -> None:
    # exact lower quantiles and Woodruff (1952) intervals from the (group, value) sums
    cb = periods / "tbchs_codebook.toml"
    _both(periods / "period1.xpt", DEMO, ["sl_hours", "bd_bmi", "dm_age"], cluster, cb,
          statistics="quantile", quantiles=[0.25, 0.5, 0.9], by=["dm_age5"])
    _both(str(periods / "period*.xpt"), DEMO, ["sl_hours"], cluster, cb,
          statistics=["mean", "quantile"], by=["_file"], where="dm_sex == 2")


@pytest.mark.parametrize(("options", "message"), [
    ({"design": Design("wt_final", strata="ds_strat", psu="ds_psu", fpc="ds_strat")},
     "the Dask engine does not support fpc yet"),
    ({"design": Design("wt_final")}, "a linearization design without a PSU column"),
    ({"design": Design("wt_final", replicates=["wt_final", "wt_base"],
                       replicate_method="jackknife"), "statistics": "quantile"},
     "quantiles of a replicate design are not available on the Dask engine"),
])
def test_what_the_engine_cannot_do_is_refused(periods: Path, options: dict[str, Any],
                                              message: str) -> None:
    design = options.pop("design", DEMO)
    with pytest.raises(DesignError, match=message):
        estimate(periods / "period1.xpt", design, ["sl_hours"], engine="dask",
                 codebook=periods / "tbchs_codebook.toml", scheduler="tcp://127.0.0.1:1",
                 **options)


def test_without_dask_the_engine_says_how_to_install(monkeypatch: pytest.MonkeyPatch,
                                                     periods: Path) -> None:
    monkeypatch.setitem(sys.modules, "distributed", None)
    with pytest.raises(EngineError, match=r"pip install 'wstats\[dask\]'"):
        estimate(periods / "period1.xpt", DEMO, ["sl_hours"], engine="dask")


def test_a_dataset_is_not_given_to_the_dask_engine(periods: Path) -> None:
    from wstats.errors import EstimationError

    data = read(periods / "period1.xpt", ["sl_hours", "wt_final", "ds_strat", "ds_psu"])
    with pytest.raises(EstimationError, match="give their paths"):
        estimate(data, DEMO, ["sl_hours"], engine="dask")


@pytest.mark.parametrize("singleton", ["center", "collapse"])
def test_singleton_strata_treated_as_in_memory(tmp_path: Path, cluster: str,
                                               singleton: str) -> None:
    # the same treatment code (wstats.design.binding) on the summed groups
    import pandas as pd

    rng = np.random.default_rng(4)
    n = 300
    stratum = np.repeat([1.0, 2.0, 3.0, 4.0], [90, 60, 90, 60])
    psu = np.concatenate([np.repeat([1.0, 2.0, 3.0], 30), np.ones(60),
                          np.repeat([1.0, 2.0, 3.0], 30), np.ones(60)])
    frame = pd.DataFrame({"W": rng.uniform(1, 3, n), "S": stratum, "P": psu,
                          "y": rng.normal(size=n), "g": rng.integers(1, 3, n).astype(float)})
    path = tmp_path / "single.parquet"
    frame.to_parquet(path)
    design = Design("W", strata="S", psu="P", singleton=singleton)
    _both(path, design, ["y"], cluster, None, by=["g"], statistics=["mean", "total"])


def test_a_variable_missing_from_one_pooled_file(tmp_path: Path, cluster: str) -> None:
    # its rows there are not_in_file (nonresponse), as pooling in memory makes them
    import pandas as pd

    for k, drop in ((1, False), (2, True)):
        rng = np.random.default_rng(k)
        n = 240
        frame = pd.DataFrame({"W": rng.uniform(1, 3, n), "S": np.repeat([1.0, 2.0], n // 2),
                              "P": np.tile(np.repeat([1.0, 2.0, 3.0], n // 6), 2),
                              "y": rng.normal(size=n), "z": rng.normal(size=n),
                              "g": rng.integers(1, 4, n).astype(float)})
        (frame.drop(columns=["z", "g"]) if drop else frame).to_parquet(tmp_path / f"f{k}.parquet")
    design = Design("W", strata="S", psu="P")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        _both(str(tmp_path / "f*.parquet"), design, ["y", "z"], cluster, None,
              by=["_file", "g"])
    from wstats.errors import WstatsWarning

    with pytest.warns(WstatsWarning, match="variable 'g' is not in f2.parquet; its rows there "
                      "get the reason not_in_file"):
        estimate(str(tmp_path / "f*.parquet"), design, ["y"], by=["g"], engine="dask",
                 scheduler=cluster)


def test_an_unreachable_scheduler_is_one_line(monkeypatch: pytest.MonkeyPatch,
                                              periods: Path) -> None:
    import distributed

    def refuse(*_: Any, **__: Any) -> Any:
        raise OSError("Timed out trying to connect")

    monkeypatch.setattr(distributed, "Client", refuse)
    with pytest.raises(EngineError, match=r"cannot reach the Dask scheduler at "
                       r"tcp://10.9.9.9:8786 \(Timed out trying to connect\); check the address"):
        estimate(periods / "period1.xpt", DEMO, ["sl_hours"], engine="dask",
                 codebook=periods / "tbchs_codebook.toml", scheduler="tcp://10.9.9.9:8786")


def _same_nonresponse(memory: Any, dask: Any) -> None:
    a, b = memory.frame, dask.frame
    assert list(a.columns) == list(b.columns)
    for col in a.columns:
        if a[col].dtype.kind == "f":
            np.testing.assert_allclose(b[col].to_numpy(float), a[col].to_numpy(float),
                                       rtol=1e-10, atol=0, equal_nan=True, err_msg=col)
        else:
            assert a[col].tolist() == b[col].tolist(), col
    assert memory.settings == {k: v for k, v in dask.settings.items() if k != "engine"}
    assert dask.settings["engine"] == "dask"


def test_nonresponse_tables_on_dask(periods: Path, cluster: str) -> None:
    from wstats import nonresponse

    cb = periods / "tbchs_codebook.toml"
    options: dict[str, Any] = {"by": ["dm_age5"], "codebook": cb, "sort_worst": True}
    for files in (periods / "period1.xpt", str(periods / "period*.xpt")):
        memory = nonresponse(files, DEMO, ["sl_hours", "hs_rate", "tc_now"], **options)
        dask = nonresponse(files, DEMO, ["sl_hours", "hs_rate", "tc_now"], engine="dask",
                           scheduler=cluster, **options)
        _same_nonresponse(memory, dask)


def test_a_condition_on_the_file(periods: Path, cluster: str) -> None:
    cb = periods / "tbchs_codebook.toml"
    _both(str(periods / "period*.xpt"), DEMO, ["sl_hours"], cluster, cb, where="_file == 2",
          by=["dm_sex"])


def test_margins_of_crossed_domains(periods: Path, cluster: str) -> None:
    cb = periods / "tbchs_codebook.toml"
    _both(periods / "period1.xpt", DEMO, ["sl_hours", "hs_rate"], cluster, cb,
          by=["dm_sex", "dm_age5"], margins=True)
