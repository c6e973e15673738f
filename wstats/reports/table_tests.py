"""P-values and age adjustment in publication tables: the tests, their footnote, methods text.

A spec with ``columns.p_value = true`` gets, after each grouping variable's columns, a column
of p-values testing each row across that variable's levels (:func:`wstats.compare`): the
Rao-Scott second-order corrected F of independence for a categorical row (on the line of
its first level), the adjusted Wald F that the means are equal for a mean row, and for an
age-adjusted row the Wald F that the adjusted values are equal (per level of a categorical
row).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from wstats.decoding.columns import Dataset
    from wstats.design.declared import Design
    from wstats.reports.table_specs import TableSpec

__all__ = ["PKey", "p_value_note", "table_methods_sentences", "table_p_values"]

#: (variable, statistic, level label or "", standard name or "", grouping variable)
PKey = tuple[str, str, str, str, str]
_GLOBAL = ("rao-scott", "wald")


def table_p_values(spec: TableSpec, data: Dataset, design: Design) -> dict[PKey, float]:
    """Return the p-value of every mean or proportion row against each grouping variable.

    Rows sharing a statistic and an age adjustment are tested in one call per grouping
    variable (one binding of the design, one pass per variable).
    """
    from wstats.reports.compare import compare

    calls: dict[tuple[Any, ...], list[str]] = {}
    for row in spec.rows:
        if row.statistic in (None, "mean", "proportion"):
            calls.setdefault((row.statistic, row.age_adjust, row.standard), []).append(
                row.variable)
    out: dict[PKey, float] = {}
    for (stat, age, std), names in calls.items():  # loop over kinds of rows only
        variables = list(dict.fromkeys(names))
        for b in spec.by:
            result = compare(data, design, variables, by=b, where=spec.where,
                             categorical=variables if stat == "proportion" else (),
                             continuous=variables if stat == "mean" else (),
                             level=spec.level, age_adjust=age, standard=std)
            for t in result.tests.rows:
                if t["test"] in _GLOBAL and t["quantity"] in ("mean", "proportion"):
                    key = (t["variable"], t["quantity"], t["level"] or "",
                           std.name if std is not None else "", b)
                    out[key] = float(t["p"])
    return out


def p_value_note(spec: TableSpec) -> str:
    """Return the footnote of the p-value columns."""
    groups = ", ".join(spec.by)
    return (f"p: test across the levels of {groups}: for a categorical row the Rao-Scott "
            "second-order corrected F test of independence (design effects at the independence "
            "fit), shown on the line of its first level; for a mean the design-based Wald F "
            "that the means are equal, adjusted for the design degrees of freedom (k-1, "
            "d-k+2); for an age-adjusted row the same Wald F on the adjusted values"
            + _untested(spec) + ". Not adjusted for multiple comparisons.")


def _untested(spec: TableSpec) -> str:
    """Return '; totals and quantiles: no test' for the kinds of rows the table has."""
    kinds = [k for k in ("total", "quantile") if any(r.statistic == k for r in spec.rows)]
    words = {"total": "totals", "quantile": "quantiles"}
    return f"; {' and '.join(words[k] for k in kinds)}: no test" if kinds else ""


def table_methods_sentences(spec: TableSpec) -> list[str]:
    """Return the methods sentences on the tests and the standard populations of a table."""
    out = []
    if spec.p_value:
        out.append(
            f"P-values test each row across the levels of {', '.join(spec.by)}: categorical "
            "rows with the Rao-Scott second-order (Satterthwaite) corrected F test of "
            "independence, its design effects evaluated at the independence fit, and means "
            "with the design-based Wald F on k-1 and d-k+2 degrees of freedom (d = PSUs - "
            "strata); no adjustment for multiple comparisons was made.")
    standards: dict[str, Any] = {}
    for row in spec.rows:
        if row.standard is not None:
            standards.setdefault(row.standard.name, (row.standard, row.age_adjust))
    for name, (std, age) in standards.items():
        out.append(
            f"Rows marked age-adjusted (standard {name}) are directly standardised over the "
            f"levels of {age} to the {name} standard population ({std.source}); their standard "
            "errors use the full design covariance of the age-specific estimates.")
    return out
