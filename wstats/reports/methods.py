"""The methods paragraph: how the numbers of a table were made, in plain sentences.

The wording is our own. It states the data file, the design and variance method, the
singleton treatment, the interval method and level, what happened to each missing reason,
the spread of item nonresponse, the reliability standard, and that the survey's own
documentation and the publishing agency's standards come first.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from typing import TYPE_CHECKING, Any

from wstats.decoding.reasons import NOT_ASKED
from wstats.errors import UsageError

if TYPE_CHECKING:
    from wstats.decoding.codebook import Codebook

__all__ = ["escape_latex", "escape_markdown", "methods_paragraph"]

_SINGLETON = {
    "fail": "No stratum had a single PSU (wstats stops when it finds one).",
    "certainty": "were treated as certainty units that add nothing to the variance.",
    "center": "were given a variance contribution measured around the mean of all PSU totals.",
    "collapse": "were merged with the next stratum in sort order before variances were "
                "computed.",
}
_REPLICATES = {
    "brr": "balanced repeated replication", "fay": "Fay-adjusted balanced repeated replication",
    "jackknife": "delete-one-PSU jackknife", "jackknife-strata": "stratified jackknife",
    "bootstrap": "bootstrap", "sdr": "successive-difference replication",
    "custom": "replicate weights with user-given scale factors",
}
_PROPORTION_CI = {
    "korn-graubard": "the Korn–Graubard interval (an exact binomial interval on the effective "
                     "sample size, with degrees-of-freedom adjustment)",
    "logit": "an interval computed on the logit scale and transformed back",
    "wilson": "the Wilson score interval on the effective sample size",
    "wald": "the symmetric t interval (estimate ± t × SE)",
}
_NONRESPONSE_WORDS = {"dont_know": "don't know", "refused": "refused",
                      "invalid": "invalid or out of range", "missing": "not ascertained"}
_FORMATS = ("text", "markdown", "latex")
_LATEX = {
    "\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#", "_": r"\_",
    "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}", "^": r"\textasciicircum{}",
    "‡": r"\ddag{}", "§": r"\S{}", "¶": r"\P{}", "†": r"\dag{}", "–": "--", "—": "---",
    "·": r"\textperiodcentered{}", "≥": r"$\geq$", "≤": r"$\leq$", "×": r"$\times$",
    "±": r"$\pm$", "<": r"\textless{}", ">": r"\textgreater{}", "→": r"$\rightarrow$",
    "’": "'", "…": r"\ldots{}", "\u00a0": "~",
}


def escape_latex(text: str) -> str:
    """Return *text* with LaTeX specials escaped and wstats' marks written as commands."""
    return "".join(_LATEX.get(ch, ch) for ch in text)


def escape_markdown(text: str) -> str:
    """Return *text* with the characters that Markdown would interpret backslash-escaped."""
    for ch in ("\\", "|", "*", "_", "`", "<", ">", "#", "[", "]"):
        text = text.replace(ch, "\\" + ch)
    return text


def methods_paragraph(
    design_summary: Mapping[str, Any],
    settings: Mapping[str, Any],
    reasons_used: Mapping[str, int] | Iterable[str],
    nonresponse_range: tuple[float, float] | None,
    data_name: str,
    standard: Any,
    fmt: str = "text",
    *,
    recodes: Sequence[str] = (),
) -> str:
    """Write the methods paragraph of a table.

    Parameters
    ----------
    design_summary : ``BoundDesign.summary()`` (weight, n_strata, n_psu, df, fpc, singleton,
        variance_method, replicate_method, n_replicates, ...).
    settings : estimation settings: ``level``, ``proportion_ci``; optionally ``where``,
        ``domains``, ``df_rule``, ``df_range`` and ``statistics`` (as ``estimate`` records
        them), which add what was done for the subpopulation, domains and quantiles.
    reasons_used : reasons that occurred among the reported variables (name -> row count, or
        just names); reasons with a zero count are not mentioned.
    nonresponse_range : lowest and highest item nonresponse rate (fractions) across the
        reported variables, or None.
    data_name : name of the data file.
    standard : the reliability standard (a ``ReliabilityStandard``, its name, or None).
    fmt : ``text``, ``markdown`` or ``latex`` (escaping for the target).
    recodes : value substitutions made by the codebook, in words (``"EXER_FREQ: 888 → 0"``).
        Reasons are named by their short names (``not_eligible`` as "not eligible"): a
        codebook's descriptions are written for a legend, not for a sentence.

    Returns
    -------
    str
        One paragraph.

    Examples
    --------
    >>> text = methods_paragraph({"weight": "W", "variance_method": "linearization",
    ...     "n_strata": 2, "n_psu": 4, "df": 2}, {"level": 0.95}, {}, None, "s.csv", None)
    >>> text.split(". ")[0]
    'Estimates were made from s.csv with every record weighted by W'
    """
    if fmt not in _FORMATS:
        raise UsageError(f"methods format '{fmt}' is unknown; use one of {', '.join(_FORMATS)}")
    counts = _counts(reasons_used)
    sentences = [
        f"Estimates were made from {data_name} with every record weighted by "
        f"{design_summary.get('weight', 'the design weight')}.",
        _pool_sentence(design_summary.get("pool")),
        _variance_sentence(design_summary),
        *_scope_sentences(design_summary, settings),
        _interval_sentence(settings),
        *_reason_sentences(counts, recodes),
        _nonresponse_sentence(nonresponse_range),
        _standard_sentence(standard),
        _age_sentence(settings),
        "This note summarises what wstats did; where it differs from the survey's own "
        "documentation or from the standards of the agency publishing the estimates, those "
        "come first.",
    ]
    text = " ".join(s for s in sentences if s)
    if fmt == "latex":
        return escape_latex(text)
    return escape_markdown(text) if fmt == "markdown" else text


def _age_sentence(settings: Mapping[str, Any]) -> str:
    """Describe direct age adjustment when the estimates used it (else '')."""
    name = settings.get("standard")
    if not name:
        return ""
    source = settings.get("standard_source")
    origin = f" ({source})" if source else ""
    return (f"Rows marked age-adjusted (standard {name}) are directly standardised over the "
            f"levels of {settings.get('age_adjust')} to the {name} standard population{origin}; "
            "their standard errors use the full design covariance of the age-specific "
            "estimates.")


def _counts(reasons_used: Mapping[str, int] | Iterable[str]) -> dict[str, int]:
    """Return reason -> count (1 when only names were given), zero counts dropped."""
    if isinstance(reasons_used, Mapping):
        return {str(k): int(v) for k, v in reasons_used.items() if int(v) > 0 and k != "valid"}
    return {str(k): 1 for k in reasons_used if k != "valid"}


def _strata(n: Any) -> str:
    """Return '1 stratum' or 'N strata'."""
    return "1 stratum" if n == 1 else f"{_number(n)} strata"


def _variance_sentence(d: Mapping[str, Any]) -> str:
    """Describe the variance method, design size, degrees of freedom and singletons."""
    df = _number(d.get("df"))
    if d.get("replicate_method") or d.get("variance_method") == "replicate":
        method = _REPLICATES.get(str(d.get("replicate_method")), str(d.get("replicate_method")))
        return (f"Standard errors come from {d.get('n_replicates', 'the')} replicate weights "
                f"({method}); intervals use {df} degrees of freedom.")
    fpc = " with a first-stage finite population correction" if d.get("fpc") else ""
    parts = (f"Standard errors were estimated by Taylor linearization, treating primary "
             f"sampling units as drawn with replacement within strata{fpc} "
             f"({_strata(d.get('n_strata'))}, {_number(d.get('n_psu'))} PSUs, {df} "
             "degrees of freedom).")
    singleton = str(d.get("singleton") or "fail")
    count = int(d.get("singleton_strata") or 0)
    if singleton == "fail" or count == 0:
        return parts + " No stratum had a single PSU."
    strata = "One stratum" if count == 1 else f"{count} strata"
    return f"{parts} {strata} with a single PSU {_SINGLETON.get(singleton, singleton)}"


def _pool_sentence(pool: Mapping[str, Any] | None) -> str:
    """Describe how several files were pooled (empty for one file)."""
    if not pool:
        return ""
    factors = dict(pool.get("factors") or {})
    rule = {"equal": "an equal share, 1/K", "rows": "a share proportional to its rows"}.get(
        str(pool.get("rule")), "the factor given")
    shares = ", ".join(f"{k} {_number(round(float(v), 4))}" for k, v in factors.items())
    strata = ("strata and PSUs were kept distinct per file, so the files count as independent "
              "samples" if pool.get("strata") == "distinct per file" else
              "the files share their strata and PSUs, so the covariance between periods is "
              "estimated")
    return (f"Records of {len(factors)} files were pooled; each file's weights were multiplied "
            f"by {rule} ({shares}), so totals describe an average period, not the sum of the "
            f"periods; {strata}.")


def _interval_sentence(settings: Mapping[str, Any]) -> str:
    """Describe the confidence level and the interval methods."""
    level = float(settings.get("level", 0.95)) * 100
    shown = f"{level:.1f}".rstrip("0").rstrip(".")
    method = str(settings.get("proportion_ci", "korn-graubard"))
    words = _PROPORTION_CI.get(method, f"the {method} interval")
    return (f"Confidence intervals are at the {shown}% level; means, totals, ratios and "
            f"quantiles use the t distribution with the design degrees of freedom, and "
            f"proportions use {words}.")


def _scope_sentences(d: Mapping[str, Any], settings: Mapping[str, Any]) -> list[str]:
    """Say how the subpopulation, domains, zero weights and quantiles were handled."""
    out = []
    if settings.get("where"):
        out.append(f"Estimates are for the subpopulation {settings['where']}, keeping the full "
                   "design: records outside it add zero rather than being removed, so every "
                   "stratum and PSU enters the variance.")
    domains = list(settings.get("domains") or ())
    if domains:
        out.append(f"Domain estimates (by {', '.join(domains)}) keep the full design in the "
                   "same way." + _domain_df(settings))
    zero = int(d.get("zero_weights") or 0)
    out.append("No record had a zero weight." if not zero else
               f"{_number(zero)} records with a zero weight stayed in the design; they add "
               "nothing to the estimates.")
    if "quantile" in (settings.get("statistics") or ()):
        out.append("A quantile is the smallest value whose weighted cumulative share reaches "
                   "its probability; its interval is Woodruff's, mapped back from the "
                   "interval of that share.")
    return out


def _domain_df(settings: Mapping[str, Any]) -> str:
    """Return the sentence on per-domain degrees of freedom ('' under the design rule)."""
    span = settings.get("df_range")
    if settings.get("df_rule") != "domain" or not span:
        return ""
    lo, hi = (_number(x) for x in span)
    count = lo if lo == hi else f"{lo} to {hi}"
    return (" Each domain's degrees of freedom count only the strata and PSUs holding its "
            f"members ({count}).")


def _reason_sentences(counts: Mapping[str, int], recodes: Sequence[str]) -> list[str]:
    """Say how each reason for a missing value was handled."""
    out = []
    if any(counts.get(r) for r in NOT_ASKED):
        out.append("Records that were not asked an item (legitimate skips, outside the item's "
                   "universe) were left out of that item's domain and are not nonresponse.")
    named = [_NONRESPONSE_WORDS.get(r, r.replace("_", " ")) for r in counts
             if r not in NOT_ASKED]
    if named:
        listed = ", ".join(named[:-1]) + (" and " if len(named) > 1 else "") + named[-1]
        out.append(f"Answers coded as {listed} were left out of the item's estimates "
                   "(no imputation) and counted as item nonresponse.")
    if recodes:
        out.append("Codes meaning none were counted as the value zero (" + "; ".join(recodes)
                   + ").")
    return out


def _nonresponse_sentence(rng: tuple[float, float] | None) -> str:
    """Report the lowest and highest item nonresponse rate."""
    if rng is None:
        return ""
    lo, hi = (f"{100 * x:.1f}%" for x in rng)
    if lo == hi:
        return f"Item nonresponse among the reported variables was {lo} of records asked."
    return (f"Item nonresponse among the reported variables ranged from {lo} to {hi} of "
            "records asked (unweighted).")


def _standard_sentence(standard: Any) -> str:
    """Name the reliability standard applied."""
    name = getattr(standard, "name", standard)
    if not name or name == "none":
        return "No reliability standard was applied; every estimate is shown."
    return (f"Estimates were checked against the reliability standard '{name}'; flagged "
            "estimates are marked and those failing a suppression rule are not shown, with "
            "each rule named in the table notes.")


def _number(x: Any) -> str:
    """Return a count or df as text ('?' when unknown, 'infinite' for inf)."""
    if x is None:
        return "?"
    v = float(x)
    if v == float("inf"):
        return "infinite"
    return str(int(v)) if v.is_integer() else f"{v:g}"


def codebook_recodes(codebook: Codebook | None, variables: Iterable[str]) -> list[str]:
    """Return the codebook's value substitutions for *variables*, for ``recodes=``.

    Examples: ``["fd_fruit: 888 → 0"]`` (a code meaning none counted as zero).
    """
    if codebook is None:
        return []
    out = []
    for name in dict.fromkeys(variables):
        if name not in codebook.variables:
            continue
        for code, rule in sorted(codebook.codes_for(name, None).numeric.items()):
            if rule.reason is None and rule.value is not None:
                out.append(f"{name}: {code:g} → {rule.value:g}")
    return out
