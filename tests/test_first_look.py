"""A first look at a file: ``wstats columns`` (overview) and ``wstats look`` (variables).

Files are written with pyreadstat and pandas, never with wstats; expected counts are
recomputed here with plain numpy/pandas from the frame that was written.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pyreadstat
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import wstats.readers.overview as overview
from conftest import run_wstats
from test_render import check_golden
from wstats.render._columns import columns_csv, columns_json, columns_terminal
from wstats.render._look import look_json, look_terminal
from wstats.reports.look import look

LONG = ("How many hours do you sleep on a usual weeknight, counting naps taken before "
        "the evening meal?")


def _frame(n: int = 400, seed: int = 3) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    sleep = rng.integers(4, 11, n).astype(float)
    sleep[rng.random(n) < 0.05] = 77.0
    sleep[rng.random(n) < 0.03] = 99.0
    sleep[rng.random(n) < 0.04] = np.nan
    health = rng.integers(1, 6, n).astype(float)
    health[rng.random(n) < 0.04] = 8.0  # a code with no label and no declaration
    return pd.DataFrame({
        "SLEEP_HRS": sleep,
        "HEALTH": health,
        "WT": rng.uniform(0.5, 3.0, n).round(3),
        "TOWN": rng.choice(["north", "south", "", "east"], n),
    })


@pytest.fixture()
def sav(tmp_path: Path) -> tuple[Path, pd.DataFrame]:
    frame = _frame()
    path = tmp_path / "look.sav"
    pyreadstat.write_sav(
        frame, str(path),
        column_labels={"SLEEP_HRS": LONG, "HEALTH": "General health, self-rated",
                       "WT": "Final weight", "TOWN": "Town of residence"},
        variable_value_labels={"SLEEP_HRS": {77: "Don't know", 99: "Refused"},
                               "HEALTH": {1: "Excellent", 2: "Very good", 3: "Good",
                                          4: "Fair", 5: "Poor"}},
        missing_ranges={"SLEEP_HRS": [77, 99]})
    return path, frame


# --- columns ----------------------------------------------------------------------------


def test_columns_counts_match_pandas(sav: tuple[Path, pd.DataFrame]) -> None:
    path, frame = sav
    view = overview.describe_columns(path)
    facts = {c.name: c for c in view.columns}
    assert view.n_rows == len(frame) and view.n_file_columns == 4
    for name in ("SLEEP_HRS", "HEALTH", "WT"):
        # pandas counts NaN as blank and distinct among the rest (common practice, no source)
        assert facts[name].blanks == int(frame[name].isna().sum())
        assert facts[name].distinct == frame[name].nunique(dropna=True)
    town = frame["TOWN"]
    assert facts["TOWN"].blanks == int((town == "").sum())
    assert facts["TOWN"].distinct == town[town != ""].nunique()
    assert facts["TOWN"].storage == "text" and facts["WT"].storage == "number"
    assert facts["SLEEP_HRS"].missing_codes == ("77", "99")
    assert facts["HEALTH"].value_labels == 5 and facts["WT"].value_labels == 0


def test_columns_search_is_case_insensitive_on_name_or_label(
        sav: tuple[Path, pd.DataFrame], monkeypatch: pytest.MonkeyPatch) -> None:
    path, _ = sav
    read: list[Any] = []
    real = overview.read_raw

    def spy(*args: Any, **kwargs: Any) -> Any:
        read.append(kwargs.get("columns"))
        return real(*args, **kwargs)

    monkeypatch.setattr(overview, "read_raw", spy)
    view = overview.describe_columns(path, search=["WEEKNIGHT", "naps"])
    assert [c.name for c in view.columns] == ["SLEEP_HRS"]
    assert read[-1] == ["SLEEP_HRS"]  # only the matching column's data were read
    assert [c.name for c in overview.describe_columns(path, search=["wt"]).columns] == ["WT"]
    assert overview.describe_columns(path, search=["nothing-like-this"]).columns == ()


def test_columns_in_tiles_equal_one_read(tmp_path: Path, monkeypatch: pytest.MonkeyPatch
                                         ) -> None:
    frame = _frame().drop(columns="TOWN").rename(columns={"SLEEP_HRS": "SLEEP"})
    path = tmp_path / "tiles.xpt"
    pyreadstat.write_xport(frame, str(path), file_format_version=5)
    whole = overview.describe_columns(path)
    monkeypatch.setattr(overview, "TILE_COLUMNS", 1)
    assert overview.describe_columns(path) == whole


def test_tagged_missing_letters_are_codes_not_blanks(tmp_path: Path) -> None:
    frame = pd.DataFrame({"Q": [1.0, 2.0, "a", "b", None, 1.0, "a"]}, dtype=object)
    path = tmp_path / "tags.dta"
    pyreadstat.write_dta(frame, str(path), missing_user_values={"Q": ["a", "b"]},
                         variable_value_labels={"Q": {1: "Yes", 2: "No"}})
    (q,) = overview.describe_columns(path).columns
    assert (q.blanks, q.distinct, q.missing_codes) == (1, 4, (".a", ".b"))


def test_columns_screen_fits_80_and_files_keep_full_text(sav: tuple[Path, pd.DataFrame]
                                                         ) -> None:
    path, _ = sav
    view = overview.describe_columns(path)
    text = columns_terminal(view, width=80)
    assert max(len(line) for line in text.splitlines()) <= 80
    assert "…" in text and LONG not in text
    assert json.loads(columns_json(view))["columns"][0]["label"] == LONG
    assert LONG in columns_csv(view)
    narrow = columns_terminal(view, width=60)
    assert max(len(line) for line in narrow.splitlines()) <= 60


def test_columns_command(sav: tuple[Path, pd.DataFrame]) -> None:
    path, _ = sav
    res = run_wstats("columns", path, "--search", "health")
    assert res.returncode == 0, res.stderr
    lines = res.stdout.splitlines()
    assert "400 rows" in lines[0] and any(line.startswith("HEALTH ") for line in lines)
    assert not any(line.startswith("WT ") for line in lines)
    names = run_wstats("columns", path, "--names-only")
    assert names.stdout.split() == ["SLEEP_HRS", "HEALTH", "WT", "TOWN"]


# --- look -------------------------------------------------------------------------------


def test_look_codes_counts_and_decoding(sav: tuple[Path, pd.DataFrame]) -> None:
    path, frame = sav
    res = look(path, ["SLEEP_HRS", "HEALTH"], weight="WT")
    sleep, health = res.variables
    rows = {c.code: c for c in sleep.codes}
    x = frame["SLEEP_HRS"]
    assert rows["77"].rows == int((x == 77).sum()) and rows["77"].reason == "dont_know"
    assert rows["99"].reason == "refused" and rows["99"].label == "Refused"
    assert rows["blank"].rows == int(x.isna().sum()) and rows["blank"].reason == "skipped"
    assert rows["5"].value == 5.0 and rows["5"].reason == "valid"
    assert rows["5"].weighted == pytest.approx(frame["WT"][x == 5].sum())
    assert sum(c.rows for c in sleep.codes) == len(frame)
    eight = {c.code: c for c in health.codes}["8"]
    assert not eight.explained  # a categorical code with no label and no rule
    assert all(c.explained for c in health.codes if c.code != "8")


def test_look_summary_against_numpy(sav: tuple[Path, pd.DataFrame]) -> None:
    path, frame = sav
    (var,) = look(path, ["SLEEP_HRS"], weight="WT").variables
    x, w = frame["SLEEP_HRS"].to_numpy(), frame["WT"].to_numpy()
    ok = ~np.isnan(x) & (x < 77)
    assert var.n_valid == int(ok.sum())
    assert var.mean == pytest.approx(x[ok].mean(), rel=1e-12)
    assert var.weighted_mean == pytest.approx(np.average(x[ok], weights=w[ok]), rel=1e-12)
    # lower weighted quantile min{y : F(y) >= p}, from the definition (docs/estimation.md)
    order = np.argsort(x[ok], kind="stable")
    cum = np.cumsum(w[ok][order]) / w[ok].sum()
    for p, q in zip((0.25, 0.5, 0.75), var.quartiles, strict=True):
        assert q == x[ok][order][np.searchsorted(cum, p - 1e-12)]
    assert (var.minimum, var.maximum) == (x[ok].min(), x[ok].max())
    assert var.reasons == {"skipped": int(np.isnan(x).sum()), "dont_know": int((x == 77).sum()),
                           "refused": int((x == 99).sum())}
    assert var.chart == "histogram"
    assert sum(b.share for b in var.bars) == pytest.approx(1.0)
    six = next(b for b in var.bars if b.low == 6.0)  # few values: one bar each
    assert six.share == pytest.approx(w[ok & (x == 6)].sum() / w[ok].sum())


def test_look_reads_only_the_named_columns(sav: tuple[Path, pd.DataFrame],
                                           monkeypatch: pytest.MonkeyPatch) -> None:
    import wstats.reports.look as module

    path, _ = sav
    asked: list[Any] = []
    real = module.read_raw

    def spy(*args: Any, **kwargs: Any) -> Any:
        asked.append(kwargs["columns"])
        return real(*args, **kwargs)

    monkeypatch.setattr(module, "read_raw", spy)
    look(path, ["HEALTH"], weight="WT")
    assert asked == [["HEALTH", "WT"]]


def test_look_long_code_lists_share_a_row(tmp_path: Path) -> None:
    x = np.r_[np.arange(1.0, 61.0), [999.0] * 3]
    path = tmp_path / "many.csv"
    pd.DataFrame({"AGE": x}).to_csv(path, index=False)
    (var,) = look(path, ["AGE"], codebook=_book(tmp_path)).variables
    assert [c.code for c in var.codes] == ["1..60", "999"]
    assert var.codes[0].codes == 60 and var.codes[0].rows == 60
    assert var.codes[1].reason == "refused"


def _book(tmp_path: Path) -> Path:
    path = tmp_path / "book.toml"
    path.write_text('[variables.AGE]\nkind = "continuous"\ncodes = { 999 = "refused" }\n',
                    encoding="utf-8")
    return path


def test_look_text_and_categorical_charts(sav: tuple[Path, pd.DataFrame]) -> None:
    path, frame = sav
    town, health = look(path, ["TOWN", "HEALTH"]).variables
    assert town.chart == "frequency" and {b.text for b in town.bars} == {"north", "south", "east"}
    assert {c.code: c.reason for c in town.codes}["blank"] == "skipped"
    assert [b.text for b in health.bars] == ["Excellent", "Very good", "Good", "Fair", "Poor",
                                             "8"]  # valid, though unlabelled
    h = frame["HEALTH"]
    assert health.bars[0].share == pytest.approx((h == 1).sum() / h.isin([1, 2, 3, 4, 5, 8])
                                                 .sum())


def test_look_screen_fits_80_and_json(sav: tuple[Path, pd.DataFrame]) -> None:
    path, _ = sav
    res = look(path, ["SLEEP_HRS", "HEALTH", "TOWN"], weight="WT")
    text = look_terminal(res, width=80)
    assert max(len(line) for line in text.splitlines()) <= 80
    assert "? no codebook rule or label explains this code" in text
    doc = json.loads(look_json(res))
    assert doc["weight"] == "WT" and doc["variables"][0]["label"] == LONG


def test_look_command(sav: tuple[Path, pd.DataFrame]) -> None:
    path, _ = sav
    res = run_wstats("look", path, "HEALTH", "--weight", "WT", "--format", "json")
    assert res.returncode == 0, res.stderr
    (var,) = json.loads(res.stdout)["variables"]
    assert var["variable"] == "HEALTH" and var["chart"] == "frequency"
    bad = run_wstats("look", path, "HELTH")
    assert bad.returncode != 0 and "did you mean 'HEALTH'" in bad.stderr
    assert len(bad.stderr.strip().splitlines()) == 1


def test_look_at_a_derived_variable_names_its_inputs(tmp_path: Path) -> None:
    from wstats.errors import ColumnError

    path = tmp_path / "d.csv"
    pd.DataFrame({"H": [1.0, 2.0], "W": [3.0, 4.0]}).to_csv(path, index=False)
    book = tmp_path / "book.toml"
    book.write_text('[derived.R]\nexpr = "W / H"\n', encoding="utf-8")
    with pytest.raises(ColumnError, match=r"R is a derived variable .* inputs \(H, W\)"):
        look(path, ["R"], codebook=book)


def test_look_many_distinct_values_and_texts_share_rows(tmp_path: Path) -> None:
    rng = np.random.default_rng(5)
    n = 5000
    frame = pd.DataFrame({"W": rng.uniform(0.5, 2.0, n),  # every value distinct
                          "NOTE": [f"note {i}" for i in range(n - 10)] + ["REFUSED"] * 10})
    path = tmp_path / "wide.csv"
    frame.to_csv(path, index=False)
    book = tmp_path / "b.toml"
    book.write_text('[variables.NOTE]\ncodes = { "REFUSED" = "refused" }\n', encoding="utf-8")
    weight, note = look(path, ["W", "NOTE"], codebook=book).variables
    (span,) = weight.codes
    assert span.codes == frame["W"].nunique() and span.rows == n and span.explained
    assert [c.code for c in note.codes] == ["REFUSED", f"{n - 10:,} other texts"]
    assert note.codes[0].reason == "refused" and note.codes[1].rows == n - 10


def test_columns_of_a_file_without_rows_says_so(tmp_path: Path) -> None:
    from wstats.errors import ReadError

    path = tmp_path / "empty.csv"
    path.write_text("A,B\n", encoding="utf-8")
    with pytest.raises(ReadError, match=r"empty\.csv' has no rows; nothing to analyse"):
        overview.describe_columns(path)


@pytest.mark.parametrize("width", [80, 120])
def test_first_look_screens_golden(sav: tuple[Path, pd.DataFrame], width: int,
                                   monkeypatch: pytest.MonkeyPatch) -> None:
    path, _ = sav
    monkeypatch.chdir(path.parent)  # the screens name the file as given: keep it short
    columns = columns_terminal(overview.describe_columns(path.name), width=width)
    looked = look_terminal(look(path.name, ["SLEEP_HRS", "HEALTH", "TOWN"], weight="WT"),
                           width=width)
    for name, text in (("columns", columns), ("look", looked)):
        assert max(len(line) for line in text.splitlines()) <= width
        check_golden(f"first_look_{name}_{width}.txt", text)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 30), st.floats(0.01, 50.0)), min_size=1, max_size=60))
def test_quartiles_agree_with_numpy(pairs: list[tuple[int, float]]) -> None:
    from wstats.reports.look_parts import _Distribution

    y = np.array([float(a) for a, _ in pairs])
    w = np.array([b for _, b in pairs])
    # the lower weighted quantile min{y : F(y) >= p}: numpy's inverted_cdf with weights
    # (numpy documentation, numpy.quantile; Hyndman & Fan 1996, definition 1)
    want = np.quantile(y, [0.25, 0.5, 0.75], weights=w, method="inverted_cdf")
    assert _Distribution.of(y, w).quantiles([0.25, 0.5, 0.75]) == tuple(want.tolist())


def test_histogram_bins_have_round_edges(tmp_path: Path) -> None:
    rng = np.random.default_rng(9)
    path = tmp_path / "ages.csv"
    ages = rng.integers(18, 100, 2000).astype(float)
    pd.DataFrame({"AGE": ages}).to_csv(path, index=False)
    (var,) = look(path, ["AGE"]).variables
    lows = [b.low for b in var.bars]
    assert lows == [10.0, 20.0, 30.0, 40.0, 50.0, 60.0, 70.0, 80.0, 90.0]
    assert var.bars[-1].high == 100.0 and var.bars[0].text == "10 to 20"
    # rows per bin [a, b), counted here with numpy (common practice, no source)
    assert [b.rows for b in var.bars] == np.histogram(ages, bins=np.arange(10, 101, 10))[0].tolist()
    assert "holds a up to, not including, b" in look_terminal(look(path, ["AGE"]))


def test_look_refuses_a_text_weight(sav: tuple[Path, pd.DataFrame]) -> None:
    from wstats.errors import WeightError

    path, _ = sav
    with pytest.raises(WeightError, match=r"weight column 'TOWN' holds text"):
        look(path, ["HEALTH"], weight="TOWN")


def test_rows_without_a_positive_weight_count_zero_and_are_reported(tmp_path: Path) -> None:
    path = tmp_path / "w.csv"
    pd.DataFrame({"Y": [1.0, 2.0, 3.0, 4.0], "W": [1.0, 0.0, "", 3.0]}).to_csv(path, index=False)
    res = look(path, ["Y"], weight="W")
    assert res.unweighted_rows == 2
    # weighted mean over the rows with a positive weight: (1*1 + 4*3) / 4 (by hand)
    assert res.variables[0].weighted_mean == pytest.approx(13 / 4)
    assert res.variables[0].mean == pytest.approx(2.5)
    assert "2 rows have no positive weight" in look_terminal(res)
