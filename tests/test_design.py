"""Design validation and binding: arrays, FPC, singleton strata, and every user mistake."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from wstats.decoding.columns import Dataset
from wstats.design.declared import Design
from wstats.errors import DesignError, SingletonStratumError, WeightError


def _data(**cols: object) -> Dataset:
    return Dataset.from_arrays(cols, source="survey.csv")


def _basic(**extra: object) -> Dataset:
    cols: dict[str, object] = {
        "w": [1.0, 2.0, 1.0, 3.0, 2.0, 1.0],
        "st": [1, 1, 2, 2, 2, 2],
        "cl": [1, 2, 1, 1, 2, 2],
        "y": [1.0, 2.0, 3.0, 4.0, 5.0, 6.0],
    }
    cols.update(extra)
    return _data(**cols)


# ---------------------------------------------------------------- arrays of a bound design


def test_psu_ids_are_nested_within_strata() -> None:
    # PSU 1 of stratum 1 and PSU 1 of stratum 2 are different PSUs (common practice, no source)
    b = Design("w", strata="st", psu="cl").bind(_basic())
    assert b.n_psu == 4
    assert b.n_strata == 2
    assert b.psu.tolist() == [0, 1, 2, 2, 3, 3]
    assert b.psu_stratum.tolist() == [0, 0, 1, 1]
    assert b.n_h.tolist() == [2, 2]
    assert b.df == 2.0  # PSUs - strata, NCHS variance estimation tutorial


@pytest.mark.parametrize("tile", [262_144, 7, 1])
def test_psu_index_equals_pairs_numbered_in_sorted_order(tile: int,
                                                        monkeypatch: pytest.MonkeyPatch) -> None:
    # common practice, no source: the PSU index is the rank of the (stratum, PSU) pair among
    # the distinct pairs, built in place and in row tiles; checked against numpy.unique on
    # the pairs, for whole-number and text codes, with and without strata
    from wstats.decoding import columns as _column
    monkeypatch.setattr(_column, "ROW_TILE", tile)
    rng = np.random.default_rng(11)
    st = rng.integers(1, 6, 300).astype(float)
    cl = rng.integers(1, 9, 300).astype(float) * 10
    for strata, psu in ((st, cl), (st, cl.astype(str)), (None, cl), (st * 1e9, cl + 0.5)):
        cols: dict[str, object] = {"w": np.ones(300), "cl": psu}
        if strata is not None:
            cols["st"] = strata
        b = Design("w", strata=None if strata is None else "st", psu="cl").bind(_data(**cols))
        pairs = np.column_stack([np.zeros(300) if strata is None else strata,
                                 np.unique(psu, return_inverse=True)[1]])
        _, want = np.unique(pairs, axis=0, return_inverse=True)
        assert b.psu.dtype == np.int32  # half the memory of int64 row indexes
        assert b.psu.tolist() == want.ravel().tolist()
        first = np.unique(want.ravel(), return_index=True)[1]
        st_code = np.unique(pairs[:, 0], return_inverse=True)[1].ravel()
        assert b.psu_stratum.tolist() == st_code[first].tolist()


def test_psu_index_widens_the_key_when_int32_cannot_hold_it() -> None:
    # common practice, no source: stratum code x PSU span beyond 2**31 needs an int64 key
    from wstats.design.binding import _psu_index

    stratum = np.array([70_000, 0, 70_000, 3], dtype=np.int32)
    psu = np.array([40_000, 40_000, 2, 0], dtype=np.int32)
    index, psu_stratum = _psu_index(stratum, psu.copy())
    assert index.tolist() == [3, 0, 2, 1]  # pairs (0,40000) (3,0) (70000,2) (70000,40000)
    assert psu_stratum.tolist() == [0, 3, 70_000, 70_000]


@settings(max_examples=60, deadline=None)
@given(pairs=st.lists(st.tuples(st.integers(0, 70_000), st.integers(0, 40_000)),
                      min_size=1, max_size=40))
def test_psu_index_is_the_rank_of_each_pair(pairs: list[tuple[int, int]]) -> None:
    # common practice, no source: whatever the codes (keys past 2**31 included), a row's PSU
    # index is the rank of its (stratum, PSU) pair among the distinct pairs, and each PSU's
    # stratum is the stratum of its pair
    from wstats.design.binding import _psu_index

    stratum = np.array([h for h, _ in pairs], dtype=np.int32)
    psu = np.array([c for _, c in pairs], dtype=np.int32)
    distinct = sorted(set(pairs))
    index, psu_stratum = _psu_index(stratum, psu.copy())
    assert index.tolist() == [distinct.index(p) for p in pairs]
    assert psu_stratum.tolist() == [h for h, _ in distinct]


def test_unique_inverse_in_place_reuses_the_codes_memory() -> None:
    # common practice, no source: positions among the sorted distinct values, as numpy.unique
    from wstats.design.binding import _unique_inverse

    v = np.array([7, 3, 7, 9, 3], dtype=np.int32)
    uniq, inv = _unique_inverse(v, in_place=True)
    assert uniq.tolist() == [3, 7, 9]
    assert inv.tolist() == [1, 0, 1, 2, 0]
    assert inv is v  # written over the codes: no second column
    w = np.array([7.0, 3.0, 7.5])
    uniq, inv = _unique_inverse(w, in_place=True)  # not whole numbers: a sort, a new array
    assert (uniq.tolist(), inv.tolist(), w.tolist()) == ([3.0, 7.0, 7.5], [1, 0, 2],
                                                          [7.0, 3.0, 7.5])


def test_no_strata_no_psu_means_one_stratum_of_unit_psus() -> None:
    b = Design("w").bind(_basic())
    assert (b.n_strata, b.n_psu, b.df) == (1, 6, 5.0)
    assert b.f_h.tolist() == [0.0]
    assert b.weights.dtype == np.float64


def test_summary_keys_and_values() -> None:
    b = Design("w", strata="st", psu="cl").bind(_basic(w=[0.0, 2.0, 1.0, 3.0, 2.0, 1.0]))
    s = b.summary()
    for key in ("weight", "strata", "psu", "fpc", "n_strata", "n_psu", "df", "singleton",
                "variance_method", "replicate_method", "n_replicates", "n_rows",
                "dropped_rows", "zero_weights"):
        assert key in s
    assert s["zero_weights"] == 1
    assert s["variance_method"] == "linearization"
    assert s["n_rows"] == 6 and s["dropped_rows"] == 0


def test_fpc_counts_and_fractions() -> None:
    # f_h = n_h / N_h for counts > 1, the value itself in (0, 1] (REFERENCES section 1)
    b = Design("w", strata="st", psu="cl", fpc="N").bind(_basic(N=[10, 10, 20, 20, 20, 20]))
    assert b.f_h.tolist() == [0.2, 0.1]
    b = Design("w", strata="st", psu="cl", fpc="N").bind(_basic(N=[.2, .2, .25, .25, .25, .25]))
    assert b.f_h.tolist() == [0.2, 0.25]


def test_fpc_mixing_counts_and_fractions_is_refused() -> None:
    # A column is either counts or fractions; a mix is almost always a data error.
    with pytest.raises(DesignError, match="mixes sampling fractions"):
        Design("w", strata="st", psu="cl", fpc="N").bind(_basic(N=[10, 10, .25, .25, .25, .25]))


def test_drop_incomplete_reports_dropped_rows() -> None:
    d = _basic(w=[1.0, np.nan, 1.0, 3.0, 2.0, 1.0], st=[1, 1, 1, 2, np.nan, 2])
    b = Design("w", strata="st", drop_incomplete=True).bind(d)
    assert b.summary()["dropped_rows"] == 2
    assert b.rows is not None and b.rows.tolist() == [0, 2, 3, 5]
    assert b.column(d["y"]).values.tolist() == [1.0, 3.0, 4.0, 6.0]


def test_text_strata_are_accepted() -> None:
    d = _basic(st=np.array(["b", "b", "a", "a", "a", "a"], dtype=object))
    b = Design("w", strata="st", psu="cl").bind(d)
    assert b.stratum_labels == ("a", "b")
    assert b.n_h.tolist() == [2, 2]


# ---------------------------------------------------------------- singleton strata


def _singletons(n: int) -> Dataset:
    st = np.r_[np.arange(n), [n, n]]
    return _data(w=np.ones(n + 2), st=st, cl=np.r_[np.zeros(n), [0, 1]])


def test_singleton_fail_lists_strata_and_alternatives() -> None:
    with pytest.raises(SingletonStratumError, match=r"2 strata have a single PSU \('0', '1'\)"
                       r".*--singleton certainty, center or collapse"):
        Design("w", strata="st", psu="cl").bind(_singletons(2))


def test_singleton_message_shows_first_few_and_count() -> None:
    with pytest.raises(SingletonStratumError, match=r"^9 strata .*'4' and 4 more\)"):
        Design("w", strata="st", psu="cl").bind(_singletons(9))


def test_collapse_pools_singleton_with_next_stratum() -> None:
    # strata sorted 0..3; 0 and 1 are singletons -> pool {0, 1, 2}; 3 stays (documented rule)
    d = _data(w=np.ones(6), st=[0, 1, 2, 2, 3, 3], cl=[0, 0, 0, 1, 0, 1])
    b = Design("w", strata="st", psu="cl", singleton="collapse").bind(d)
    assert b.n_h.tolist() == [4, 2]
    assert b.stratum_labels == ("0+1+2", "3")
    assert b.df == 4.0


def test_collapse_last_singleton_joins_previous_stratum() -> None:
    d = _data(w=np.ones(5), st=[0, 0, 1, 1, 2], cl=[0, 1, 0, 1, 0])
    b = Design("w", strata="st", psu="cl", singleton="collapse").bind(d)
    assert b.n_h.tolist() == [2, 3]
    assert b.stratum_labels == ("0", "1+2")


def test_collapse_combines_fpc_as_pooled_fraction() -> None:
    # pooled f = sum n_h / sum N_h (our convention, documented in _design)
    d = _data(w=np.ones(3), st=[0, 1, 1], cl=[0, 0, 1], N=[4, 6, 6])
    b = Design("w", strata="st", psu="cl", fpc="N", singleton="collapse").bind(d)
    assert b.f_h.tolist() == [pytest.approx(3 / 10)]


# ---------------------------------------------------------------- user mistakes


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"singleton": "drop"}, r"singleton 'drop' is not one of fail, certainty"),
        ({"domain_df": "dom"}, r"domain_df 'dom' is not one of design, domain"),
        ({"replicate_method": "brr"}, r"without replicate weights"),
        ({"replicates": "rw*"}, r"without replicate_method; choose one of brr"),
        ({"replicates": "rw*", "replicate_method": "bootstrapp"}, r"did you mean 'bootstrap'"),
        ({"replicates": "rw*", "replicate_method": "fay", "fay_rho": 1.0}, r"fay_rho 1.0 is"),
        ({"replicates": "rw*", "replicate_method": "custom"}, r"needs replicate_scale"),
        ({"replicates": "rw*", "replicate_method": "brr", "fpc": "N"}, r"fpc cannot be combined"),
        ({"replicates": "rw*", "replicate_method": "brr", "replicate_center": "median"},
         r"replicate_center 'median'"),
    ],
)
def test_bad_options(kwargs: dict[str, object], match: str) -> None:
    with pytest.raises(DesignError, match=match):
        Design("w", **kwargs)  # type: ignore[arg-type]


def test_empty_weight_name() -> None:
    with pytest.raises(DesignError, match="needs a weight column"):
        Design("")


def test_absent_column_suggests_close_name() -> None:
    with pytest.raises(DesignError, match=r"column 'W' given as weight is not in survey.csv; "
                       r"did you mean 'w'\?"):
        Design("W").bind(_basic())
    with pytest.raises(DesignError, match=r"'stt' given as strata .* did you mean 'st'"):
        Design("w", strata="stt").bind(_basic())


def test_text_weight_column() -> None:
    d = _basic(w=np.array(["a"] * 6, dtype=object))
    with pytest.raises(WeightError, match="weight column 'w' in survey.csv holds text"):
        Design("w").bind(d)


def test_negative_weights_name_count_and_first_row() -> None:
    with pytest.raises(WeightError, match=r"2 negative values \(first: row 3\)"):
        Design("w").bind(_basic(w=[1.0, 1.0, -1.0, 1.0, -2.0, 1.0]))


def test_missing_weights() -> None:
    with pytest.raises(WeightError, match=r"weight column 'w' is missing in 1 rows \(first: row "
                       r"2\); .*drop_incomplete=True"):
        Design("w").bind(_basic(w=[1.0, np.nan, 1.0, 1.0, 1.0, 1.0]))


def test_infinite_weights() -> None:
    with pytest.raises(WeightError, match=r"1 infinite values \(first: row 6\)"):
        Design("w").bind(_basic(w=[1.0, 1.0, 1.0, 1.0, 1.0, np.inf]))


def test_all_zero_weights() -> None:
    with pytest.raises(WeightError, match="is 0 in every row"):
        Design("w").bind(_basic(w=np.zeros(6)))


def test_missing_stratum_and_psu() -> None:
    with pytest.raises(DesignError, match=r"strata column 'st' is missing in 1 rows"):
        Design("w", strata="st").bind(_basic(st=[1, 1, 2, np.nan, 2, 2]))
    with pytest.raises(DesignError, match=r"psu column 'cl' is missing in 2 rows \(first: row 1"):
        Design("w", psu="cl").bind(_basic(cl=[np.nan, 1, 2, np.nan, 2, 2]))


def test_fpc_mistakes() -> None:
    base = Design("w", strata="st", psu="cl", fpc="N")
    with pytest.raises(DesignError, match=r"fpc column 'N' is not constant within stratum '2'"):
        base.bind(_basic(N=[10, 10, 20, 20, 20, 30]))
    with pytest.raises(DesignError, match=r"gives 1.5 PSUs in stratum '1' but 2 were sampled"):
        base.bind(_basic(N=[1.5, 1.5, 20, 20, 20, 20]))
    with pytest.raises(DesignError, match=r"1 values that are not positive \(first: row 4\)"):
        base.bind(_basic(N=[10, 10, 20, -20, 20, 20]))


def test_fewer_than_two_psus() -> None:
    with pytest.raises(DesignError, match=r"1 PSU in survey.csv; a variance needs at least 2"):
        Design("w", psu="cl").bind(_basic(cl=np.ones(6)))


def test_nothing_left_after_dropping() -> None:
    with pytest.raises(DesignError, match="no row has a complete weight"):
        Design("w", drop_incomplete=True).bind(_basic(w=np.full(6, np.nan)))


def test_replicate_glob_matching_nothing_names_glob_and_close_match() -> None:
    d = _basic(repw1=np.ones(6), repw2=np.ones(6))
    with pytest.raises(DesignError, match=r"replicate glob 'rpw\*' matches no column in "
                       r"survey.csv \(fix the glob or list the columns\); did you mean 'repw\d'"):
        Design("w", replicates="rpw*", replicate_method="brr").bind(d)


def test_replicate_list_with_absent_column() -> None:
    d = _basic(repw1=np.ones(6), repw2=np.ones(6))
    with pytest.raises(DesignError, match=r"'repw3' is not in survey.csv; did you mean 'repw"):
        Design("w", replicates=["repw1", "repw3"], replicate_method="brr").bind(d)


def test_replicate_values_checked() -> None:
    d = _basic(r1=np.ones(6), r2=[1.0, 1, 1, -1, 1, 1])
    with pytest.raises(WeightError, match=r"'r2' has a missing, infinite or negative value "
                       r"\(row 4\)"):
        Design("w", replicates="r*", replicate_method="brr").bind(d)


def test_replicate_factor_count() -> None:
    d = _basic(r1=np.ones(6), r2=np.ones(6))
    with pytest.raises(DesignError, match="replicate_factors has 3 values for 2 replicate"):
        Design("w", replicates="r*", replicate_method="custom", replicate_scale=1.0,
               replicate_factors=[1, 1, 1]).bind(d)


def test_jackknife_strata_needs_design_or_factors() -> None:
    d = _basic(r1=np.ones(6), r2=np.ones(6))
    with pytest.raises(DesignError, match="'jackknife-strata' needs strata and psu"):
        Design("w", replicates="r*", replicate_method="jackknife-strata").bind(d)


def test_jackknife_strata_replicate_dropping_nothing() -> None:
    d = _basic(r1=np.ones(6), r2=np.ones(6))
    with pytest.raises(DesignError, match="replicate 1 sets no positively weighted row to 0"):
        Design("w", strata="st", psu="cl", replicates="r*",
               replicate_method="jackknife-strata").bind(d)


def test_text_replicate_column() -> None:
    d = _basic(r1=np.ones(6), r2=np.array(["x"] * 6, dtype=object))
    with pytest.raises(WeightError, match="replicate-weight column 'r2' in survey.csv holds text"):
        Design("w", replicates="r*", replicate_method="brr").bind(d)


def test_labelled_strata_show_labels_in_messages() -> None:
    d = _singletons(1)
    st = d["st"]
    cols = dict(d.columns)
    cols["st"] = st.replace(value_labels={0.0: "North", 1.0: "South"})
    d2 = Dataset(cols, d.vocabulary, d.n_rows, d.source)
    with pytest.raises(SingletonStratumError, match=r"\('North'\)"):
        Design("w", strata="st", psu="cl").bind(d2)


@settings(max_examples=150, deadline=None)
@given(st.lists(st.integers(-5, 60), min_size=1, max_size=30), st.integers(1, 40))
def test_unique_inverse_equals_numpy_unique_for_any_span(values: list[int], stretch: int) -> None:
    # checked against numpy.unique (general-purpose library): the lookup table (span at most
    # two codes a row) and the sort (wider spans) give the same positions
    from wstats.design.binding import _unique_inverse

    v = np.array(values, dtype=np.float64) * stretch  # stretch widens the span past 2n
    uniq, inv = _unique_inverse(v)
    ref_uniq, ref_inv = np.unique(v, return_inverse=True)
    assert uniq.tolist() == ref_uniq.tolist()
    assert inv.tolist() == ref_inv.ravel().tolist()
    assert inv.dtype == np.int32


def test_design_from_a_codebook_names_a_bad_key_and_a_missing_weight() -> None:
    # common practice, no source: the codebook's [design] is checked as spec files' are,
    # by the one Design.from_table, with the file and key in a one-line message
    from wstats.decoding.codebook import Codebook

    cb = Codebook.from_dict({"design": {"weight": "W", "strat": "S"}}, source="cb.toml")
    with pytest.raises(DesignError, match=r"cb\.toml: design\.strat: unknown design key.*"
                       r"did you mean 'strata'"):
        Design.from_codebook(cb)
    bare = Codebook.from_dict({"design": {"strata": "S"}}, source="cb.toml")
    with pytest.raises(DesignError, match=r"cb\.toml: design\.weight: no weight column"):
        Design.from_codebook(bare)
    assert Design.from_codebook(bare, weight="W").strata == "S"
