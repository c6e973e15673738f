"""The methods paragraph: every required fact is stated, in each target format."""

from __future__ import annotations

import pytest

from wstats.errors import UsageError
from wstats.estimation.reliability import STANDARDS
from wstats.reports.methods import methods_paragraph

DESIGN = {"weight": "wt_final", "strata": "ds_strat", "psu": "ds_psu", "fpc": None,
          "n_strata": 12, "n_psu": 36, "df": 24, "singleton": "center", "singleton_strata": 2,
          "variance_method": "linearization", "replicate_method": None, "n_replicates": 0}
SETTINGS = {"level": 0.9, "proportion_ci": "korn-graubard"}
REASONS = {"skipped": 903, "dont_know": 41, "refused": 12, "invalid": 0, "not_eligible": 7}


def _text(fmt: str = "text", **kw: object) -> str:
    args = {"design_summary": DESIGN, "settings": SETTINGS, "reasons_used": REASONS,
            "nonresponse_range": (0.012, 0.184), "data_name": "tbchs_sample.xpt",
            "standard": STANDARDS["nchs-2017"], "fmt": fmt,
            "recodes": ["EXER_FREQ: 888 → 0"]}
    args.update(kw)
    return methods_paragraph(**args)  # type: ignore[arg-type]


def test_states_every_required_fact() -> None:
    text = _text()
    for fact in ("tbchs_sample.xpt", "weighted by wt_final", "Taylor linearization",
                 "12 strata, 36 PSUs, 24 degrees of freedom",
                 "2 strata with a single PSU were given a variance contribution measured "
                 "around the mean of all PSU totals",
                 "90% level", "Korn–Graubard", "not asked an item",
                 "don't know, refused and not eligible were",
                 "EXER_FREQ: 888 → 0", "from 1.2% to 18.4%", "'nchs-2017'",
                 "survey's own documentation", "agency publishing the estimates"):
        assert fact in text, fact
    assert "invalid" not in text  # a reason with zero rows is not mentioned
    assert "\n" not in text


def test_replicate_designs_name_the_method() -> None:
    d = {**DESIGN, "variance_method": "replicate", "replicate_method": "jackknife",
         "n_replicates": 80, "df": 79}
    text = _text(design_summary=d)
    assert "80 replicate weights (delete-one-PSU jackknife)" in text
    assert "Taylor" not in text


def test_no_standard_and_no_reasons() -> None:
    text = _text(standard=None, reasons_used=[], nonresponse_range=None, recodes=[])
    assert "No reliability standard was applied" in text
    assert "nonresponse" not in text.lower().replace("counted as item nonresponse", "")


def test_latex_and_markdown_escape() -> None:
    latex = _text("latex")
    assert r"90\% level" in latex and r"EXER\_FREQ" in latex and "$\\rightarrow$" in latex
    md = _text("markdown")
    assert r"EXER\_FREQ" in md and "90% level" in md


def test_unknown_format_is_a_usage_error() -> None:
    with pytest.raises(UsageError, match="methods format 'rtf' is unknown"):
        _text("rtf")


def test_says_how_subpopulation_domains_zero_weights_and_quantiles_were_handled() -> None:
    settings = {**SETTINGS, "where": "AGE >= 65", "domains": ["SEX"], "df_rule": "domain",
                "df_range": [9.0, 14.0], "statistics": ["mean", "quantile"]}
    text = _text(settings=settings, design_summary={**DESIGN, "zero_weights": 3})
    for fact in ("subpopulation AGE >= 65, keeping the full design",
                 "Domain estimates (by SEX) keep the full design",
                 "strata and PSUs holding its members (9 to 14)",
                 "3 records with a zero weight stayed in the design",
                 "Woodruff"):
        assert fact in text, fact
    plain = _text()
    assert "No record had a zero weight." in plain
    assert "subpopulation" not in plain and "Woodruff" not in plain and "Domain" not in plain


def test_reasons_are_named_by_short_names_not_descriptions() -> None:
    text = _text(reasons_used={"dont_know": 4, "not_measured": 9})
    assert "don't know and not measured were left out" in text
