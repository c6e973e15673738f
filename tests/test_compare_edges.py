"""Edge cases of wstats.compare and age adjustment a user meets (review of issue 15)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from wstats import Dataset, Design, estimate
from wstats.errors import EstimationError, UsageError
from wstats.reports.compare import compare

DESIGN = Design("w", strata="st", psu="psu")


def _data(seed: int = 1, n: int = 300) -> Dataset:
    """Invented data: strata, PSUs, group g (3 levels), age (3 levels), y, a binary b."""
    rng = np.random.default_rng(seed)
    g = rng.integers(1, 4, n).astype(float)
    age = rng.integers(1, 4, n).astype(float)
    return Dataset.from_arrays({
        "w": rng.uniform(1, 4, n), "st": rng.integers(0, 4, n), "psu": rng.integers(0, 3, n),
        "g": g, "age": age, "y": rng.normal(10 + g + age, 3.0, n),
        "b": (rng.random(n) < 0.3).astype(float)})


def test_where_selecting_no_row_is_an_empty_answer_not_a_crash() -> None:
    # common practice, no source: an empty subpopulation is a legitimate answer (n = 0, no
    # estimate, a note), never a traceback; every row and test says why it has no number
    from wstats.errors import WstatsWarning

    ds = _data()
    with pytest.warns(WstatsWarning, match=r"selects no row"):
        r = compare(ds, DESIGN, ["y", "b"], by="g", where="y > 1000", categorical=["b"])
    assert len(r.differences) == 6 and len(r.tests) == 2
    for row in [*r.differences.rows, *r.tests.rows]:
        assert "no-estimate" in row["flags"] and "se-zero" not in row["flags"]
        assert row["p"] is None or np.isnan(row["p"])
    with pytest.warns(WstatsWarning, match=r"selects no row"):
        e = estimate(ds, DESIGN, ["y"], by=["g"], where="y > 1000")
    assert list(e.to_pandas()["n"]) == [0, 0, 0, 0]


def test_standard_file_with_an_unknown_key_is_refused(tmp_path: Path) -> None:
    # common practice, no source: a misspelt key must not be dropped in silence
    from wstats.estimation.standards import load_standard

    f = tmp_path / "std.toml"
    f.write_text('name = "s"\nsorce = "typo"\nsource = "t"\n[population]\n"1" = 1\n"2" = 3\n')
    with pytest.raises(UsageError, match=r"std.toml: unknown key 'sorce'.*name, source"):
        load_standard(str(f))


def test_all_missing_variable_gives_empty_rows_without_a_df_flag() -> None:
    # Korn & Graubard (1990): 'wald-unstable' means d - k + 2 <= 0; with no group estimated
    # there is no F at all, which is not a matter of degrees of freedom
    ds = _data()
    cols = {k: ds[k].values for k in ds.columns}
    cols["y"] = np.full(len(cols["y"]), np.nan)
    r = compare(Dataset.from_arrays(cols), DESIGN, ["y"], by="g")
    assert all(np.isnan(x["difference"]) and "no-estimate" in x["flags"]
               for x in r.differences.rows)
    wald = r.tests.rows[0]
    assert np.isnan(wald["statistic"]) and "wald-unstable" not in wald["flags"]
    assert "no-estimate" in wald["flags"] and "se-zero" not in wald["flags"]


def test_trend_leaves_out_a_group_without_respondents() -> None:
    # REFERENCES §13: L = c'theta over the levels that have an estimate (as the Wald F
    # leaves an empty group out); the contrast equals the one of the data without the level
    ds = _data()
    labelled = Dataset.from_arrays({k: ds[k].values for k in ds.columns})
    labelled["g"].value_labels.update({1.0: "a", 2.0: "b", 3.0: "c", 4.0: "d"})
    with_empty = compare(labelled, DESIGN, ["y"], by="g", trend=True)
    plain = compare(ds, DESIGN, ["y"], by="g", trend=True)
    got = [t for t in with_empty.tests.rows if t["test"] == "trend-linear"][0]
    want = [t for t in plain.tests.rows if t["test"] == "trend-linear"][0]
    assert got["estimate"] == pytest.approx(want["estimate"], rel=1e-12)
    assert got["se"] == pytest.approx(want["se"], rel=1e-12)
    assert not any(t["test"] == "trend-quadratic" for t in with_empty.tests.rows)


def test_trend_across_text_groups_is_refused() -> None:
    # common practice, no source: text levels have no order or spacing to score
    ds = _data()
    cols = {k: ds[k].values for k in ds.columns}
    cols["g"] = np.array(["north", "south", "east"])[cols["g"].astype(int) - 1]
    with pytest.raises(UsageError, match="trend across the levels of g.*text"):
        compare(Dataset.from_arrays(cols), DESIGN, ["y"], by="g", trend=True)


def test_age_variable_that_is_also_the_group_or_a_variable_is_refused() -> None:
    # REFERENCES §15: adjusting over the levels of the variable that forms the groups (or
    # that is estimated) has no meaning; the message says which role to drop
    ds = _data()
    with pytest.raises(UsageError, match="'age' is both the grouping variable and the age"):
        compare(ds, DESIGN, ["y"], by="age", age_adjust="age", standard="us2000-adults20")
    with pytest.raises(UsageError, match="'age' is both compared and the age variable"):
        compare(ds, DESIGN, ["age"], by="g", age_adjust="age", standard="us2000-adults20")
    with pytest.raises(UsageError, match="'age' is both a by-variable and the age variable"):
        estimate(ds, DESIGN, ["y"], by=["age"], age_adjust="age", standard="us2000-adults20")
    with pytest.raises(UsageError, match="'age' is both estimated and the age variable"):
        estimate(ds, DESIGN, ["age"], age_adjust="age", standard="us2000-adults20")


def test_continuous_age_with_a_built_in_standard_gets_a_short_message(tmp_path: Path) -> None:
    # common practice, no source: single years of age are allowed with a standard file
    # keyed by year, but a built-in standard cannot match them; the message stays one
    # readable line (no list of 70 levels) and says how to group the ages
    ds = _data()
    cols = {k: ds[k].values for k in ds.columns}
    cols["years"] = 18.0 + np.arange(len(cols["y"])) % 70
    data = Dataset.from_arrays(cols)
    with pytest.raises(EstimationError, match=r"70 levels \(18, 19, .*, 87\); group") as err:
        compare(data, DESIGN, ["y"], by="g", age_adjust="years", standard="us2000-adults20")
    assert len(str(err.value)) < 300
    f = tmp_path / "s.toml"
    f.write_text('name = "s"\nsource = "t"\n[population]\n"1" = 1\n"2" = 3\n')
    with pytest.raises(EstimationError, match=r"codes: 18, 19, .*, 87\)") as err:
        compare(data, DESIGN, ["y"], by="g", age_adjust="years", standard=str(f))
    assert len(str(err.value)) < 300


def test_rows_with_zero_weight_do_not_count_in_the_rao_scott_n() -> None:
    # REFERENCES §14: n is the records in the (weighted) table; a record of weight 0 is
    # not in it. X2 and delta-bar scale with n, the corrected F does not (Rao & Scott 1981)
    ds = _data(3)
    cols = {k: ds[k].values.copy() for k in ds.columns}
    cols["b"][::7] = np.nan  # some item nonresponse, so that reasons are tested too
    ds = Dataset.from_arrays(cols)
    more = {k: np.concatenate([v, v[:100]]) for k, v in cols.items()}
    more["w"][len(cols["w"]):] = 0.0
    one = compare(ds, DESIGN, ["b"], by="g", categorical=["b"], reasons=True).tests.rows
    two = compare(Dataset.from_arrays(more), DESIGN, ["b"], by="g", categorical=["b"],
                  reasons=True).tests.rows
    assert [t["quantity"] for t in one] == ["proportion", "reasons"]
    for a, b in zip(one, two, strict=True):
        for key in ("pearson_chisq", "mean_deff", "statistic", "p"):
            if a[key] is not None:
                assert b[key] == pytest.approx(a[key], rel=1e-9), key


def test_age_group_with_respondents_missing_from_the_standard_is_an_error(
        tmp_path: Path) -> None:
    # REFERENCES §15: the adjusted value standardises every age group analysed; an age group
    # with respondents that the standard leaves out would drop them in silence (the crude and
    # adjusted values would describe different populations)
    f = tmp_path / "two.toml"
    f.write_text('name = "two"\nsource = "t"\n[population]\n"1" = 300\n"2" = 100\n')
    ds = _data()
    with pytest.raises(EstimationError, match=r"age group '3' of age has respondents but no "
                       r"share in standard 'two'.*where"):
        compare(ds, DESIGN, ["y"], by="g", age_adjust="age", standard=str(f))
    with pytest.raises(EstimationError, match=r"age group '3' of age .* standard 'two'"):
        estimate(ds, DESIGN, ["y"], age_adjust="age", standard=str(f))
    # leaving those rows out is the documented way
    r = compare(ds, DESIGN, ["y"], by="g", age_adjust="age", standard=str(f), where="age != 3")
    means = estimate(ds, DESIGN, ["y"], by=["g", "age"], where="age != 3").frame
    cell = means[means["g"].notna() & means["age"].notna()]
    first = cell[cell["g"].astype(float) == 1.0]["estimate"].to_numpy()[:2]
    assert r.differences.rows[0]["estimate_a"] == pytest.approx(0.75 * first[0] + 0.25 * first[1])


def test_wald_with_too_few_df_is_flagged_once() -> None:
    # Korn & Graubard (1990): F on (k-1, d-k+2) is undefined for d - k + 2 <= 0; that is
    # the reason given (not an SE of 0)
    rng = np.random.default_rng(4)
    n = 400
    ds = Dataset.from_arrays({"w": np.ones(n), "st": rng.integers(0, 2, n),
                              "psu": rng.integers(0, 3, n), "g": rng.integers(1, 9, n),
                              "y": rng.normal(size=n)})
    wald = compare(ds, DESIGN, ["y"], by="g").tests.rows[0]
    assert (wald["df1"], wald["df2"]) == (7.0, -2.0)
    assert wald["flags"] == ["wald-unstable", "df<8"]


def test_crude_nonresponse_rows_are_said_crude_under_an_age_adjusted_title() -> None:
    # docs/compare.md: rates are crude, even in an age-adjusted comparison; the text formats
    # whose title says "age-adjusted" must say which rows are not
    from wstats.render._compare import compare_notes

    ds = _data()
    cols = {k: ds[k].values.copy() for k in ds.columns}
    cols["y"][::9] = np.nan
    r = compare(Dataset.from_arrays(cols), DESIGN, ["y"], by="g", age_adjust="age",
                standard="us2000-adults20", reasons=True)
    assert any("nonresponse rates and the reasons tests are crude" in n
               for n in compare_notes(r))
    plain = compare(Dataset.from_arrays(cols), DESIGN, ["y"], by="g", age_adjust="age",
                    standard="us2000-adults20")
    assert not any("crude" in n for n in compare_notes(plain))


def test_table_mean_row_of_a_categorical_variable_gets_its_p_value(tmp_path: Path) -> None:
    # Korn & Graubard (1990): a mean row's p is the adjusted Wald F of the means, also when
    # the variable's kind is categorical (the row asks for its mean); it was left blank
    from wstats.reports.table_specs import load_table_spec
    from wstats.reports.tables import build_table

    ds = _data()
    frame = pd.DataFrame({k: ds[k].values for k in ds.columns})
    frame.to_csv(tmp_path / "s.csv", index=False)
    (tmp_path / "cb.toml").write_text(
        '[design]\nweight = "w"\nstrata = "st"\npsu = "psu"\n'
        '[variables.age]\nkind = "categorical"\nlabels = { 1 = "a", 2 = "b", 3 = "c" }\n')
    (tmp_path / "t.toml").write_text(
        'data = "s.csv"\ncodebook = "cb.toml"\ntitle = "T"\n'
        'rows = [{ variable = "age", statistic = "mean" }]\n'
        '[columns]\nby = ["g"]\np_value = true\n')
    table = build_table(load_table_spec(tmp_path / "t.toml"), time=False)
    data = Dataset.from_arrays({k: ds[k].values for k in ds.columns})
    want = compare(data, DESIGN, ["age"], by="g", continuous=["age"]).tests.rows[0]
    assert want["test"] == "wald"
    assert table.numbers["p:g"].iloc[0] == pytest.approx(want["p"], rel=1e-12)


def test_unavailable_output_format_names_the_format_option_values(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # common practice, no source: the message lists values --format accepts ('table', not
    # the registry's internal name 'terminal')
    from wstats.cli.main import main

    ds = _data()
    pd.DataFrame({k: ds[k].values for k in ds.columns}).to_csv(tmp_path / "s.csv", index=False)
    code = main(["compare", str(tmp_path / "s.csv"), "y", "--by", "g", "--weight", "w",
                 "-o", str(tmp_path / "out.html")])
    err = capsys.readouterr().err
    assert code != 0 and "choose one of csv, json, markdown, table" in err
    assert len(err.strip().splitlines()) == 1


def test_python_callers_may_pass_one_name_and_a_numeric_reference() -> None:
    # common practice, no source: as estimate(), one variable may be given as a string; a
    # reference may be the level's code as a number; an unknown name says where it is not
    ds = _data()
    one = compare(ds, DESIGN, "y", by="g")
    assert [r["variable"] for r in one.differences.rows] == ["y", "y"]
    for ref in (2, 2.0, "2"):
        r = compare(ds, DESIGN, ["y"], by="g", reference=ref)  # type: ignore[arg-type]
        assert [x["group_a"] for x in r.differences.rows] == ["2", "2"]
    with pytest.raises(UsageError, match="reference '5' is not a level of g"):
        compare(ds, DESIGN, ["y"], by="g", reference=5)  # type: ignore[arg-type]
    with pytest.raises(EstimationError, match=r"variable 'nope' is not in the data"):
        compare(ds, DESIGN, ["nope"], by="g")


def test_built_in_standard_follows_the_codes_not_the_label_order() -> None:
    # REFERENCES §15 (us2000-adults20: 0.396579 / 0.371795 / 0.231626 for 20-39 / 40-59 /
    # 60+): codes in age order get the weights in order whatever order the labels are
    # listed in; labels equal to the group names are matched by name; text levels that are
    # not the group names cannot be put in age order and are refused
    from wstats.estimation.standards import STANDARDS, adjustment_weights

    std = STANDARDS["us2000-adults20"]
    want = std.shares
    # labels listed 60+ first (levels in label order 3, 1, 2)
    c = adjustment_weights(std, [3.0, 1.0, 2.0], ["60+", "20-39", "40-59"], "AGE")
    assert c == pytest.approx(want[[2, 0, 1]], abs=1e-12)
    # only code 2 labelled: levels 2, 1, 3
    c = adjustment_weights(std, [2.0, 1.0, 3.0], ["middle", "1", "3"], "AGE")
    assert c == pytest.approx(want[[1, 0, 2]], abs=1e-12)
    # text levels named as the groups, in sorted text order
    c = adjustment_weights(std, ["20-39", "40-59", "60+"][::-1], ["60+", "40-59", "20-39"],
                           "AGE")
    assert c == pytest.approx(want[::-1], abs=1e-12)
    with pytest.raises(EstimationError, match="text levels .* age order"):
        adjustment_weights(std, ["old", "young", "mid"], ["old", "young", "mid"], "AGE")
    # end to end: the same data with the age labels listed backwards gives the same values
    ds = _data()
    back = Dataset.from_arrays({k: ds[k].values for k in ds.columns})
    back["age"].value_labels.update({3.0: "c", 2.0: "b", 1.0: "a"})
    r1 = compare(ds, DESIGN, ["y"], by="g", age_adjust="age", standard="us2000-adults20")
    r2 = compare(back, DESIGN, ["y"], by="g", age_adjust="age", standard="us2000-adults20")
    assert [x["estimate_b"] for x in r2.differences.rows] == pytest.approx(
        [x["estimate_b"] for x in r1.differences.rows], rel=1e-12)


def test_not_asked_reasons_reach_compare_from_the_cli_and_analysis_files(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # docs/nonresponse.md: the rate's denominator is the rows asked; a reason such as
    # not_applicable that puts a row outside the item must be givable to compare --reasons
    # as to nonresponse, or the two commands report different rates for the same item
    import json

    from wstats.cli.main import main
    from wstats.decoding.load import read

    ds = _data()
    frame = pd.DataFrame({k: ds[k].values for k in ds.columns})
    frame["q"] = np.where(np.arange(len(frame)) % 5 == 0, 8.0,
                          np.where(np.arange(len(frame)) % 11 == 0, 9.0, frame["b"] + 1))
    frame.to_csv(tmp_path / "s.csv", index=False)
    (tmp_path / "cb.toml").write_text(
        '[design]\nweight = "w"\nstrata = "st"\npsu = "psu"\n'
        '[reasons]\nnot_applicable = "does not apply"\n'
        '[variables.q]\nkind = "categorical"\ncodes = { 8 = "not_applicable", 9 = "refused" }\n'
        'labels = { 1 = "no", 2 = "yes" }\n')
    data = read(tmp_path / "s.csv", None, tmp_path / "cb.toml")
    want = compare(data, DESIGN, ["q"], by="g", reasons=True,
                   not_asked=["not_applicable"]).differences.rows[-1]
    crude = compare(data, DESIGN, ["q"], by="g", reasons=True,
                    not_asked=["skipped"]).differences.rows[-1]
    assert want["statistic"] == "nonresponse-rate" and want["estimate_b"] < crude["estimate_b"]
    # not_applicable is outside the item by default, as in nonresponse (issue 19)
    default = compare(data, DESIGN, ["q"], by="g", reasons=True).differences.rows[-1]
    assert default["estimate_b"] == pytest.approx(want["estimate_b"], rel=1e-12)
    out = tmp_path / "c.json"
    assert main(["compare", str(tmp_path / "s.csv"), "q", "--by", "g", "--codebook",
                 str(tmp_path / "cb.toml"), "--reasons", "--not-asked",
                 "skipped,not_applicable", "-o", str(out)]) == 0
    got = json.loads(out.read_text())["differences"][-1]
    assert got["estimate_b"] == pytest.approx(want["estimate_b"], rel=1e-12)
    (tmp_path / "a.toml").write_text(
        'data = "s.csv"\ncodebook = "cb.toml"\n[[compare]]\nvariables = ["q"]\nby = "g"\n'
        'reasons = true\nnot_asked = ["not_applicable"]\noutput = "a.json"\n')
    assert main(["run", str(tmp_path / "a.toml")]) == 0
    got = json.loads((tmp_path / "a.json").read_text())["differences"][-1]
    assert got["estimate_b"] == pytest.approx(want["estimate_b"], rel=1e-12)
