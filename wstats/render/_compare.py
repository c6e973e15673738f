"""Comparisons (``wstats.compare``) in every text format: terminal, Markdown, CSV, JSON.

Two grids: the differences between groups and the tests across them. Proportions show as
percentages and their differences in percentage points; p-values below 0.001 as ``<0.001``;
flags as ids in their own column, explained in the notes.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import replace
from typing import TYPE_CHECKING, Any

from wstats.render._grid import Column, Grid, default_provenance, design_line
from wstats.reports.cells import auto_decimals, fmt_number, interval

if TYPE_CHECKING:
    from rich.console import RenderableType

    from wstats.reports.compare_result import Comparison

__all__ = ["compare_csv", "compare_grids", "compare_json", "compare_markdown",
           "compare_terminal"]

_DIFF_COLUMNS = (
    Column("variable", "Variable", "l"), Column("level", "Level", "l"),
    Column("group_a", "Group A", "l"), Column("group_b", "Group B", "l"),
    Column("estimate_a", "A"), Column("estimate_b", "B"),
    Column("difference", "B - A"), Column("se", "SE"),
    Column("ci", "CI"), Column("t", "t"), Column("p", "p"),
    Column("p_adjusted", "p adjusted"), Column("flags", "Flags", "l"))
_TEST_COLUMNS = (
    Column("variable", "Variable", "l"), Column("test", "Test", "l"),
    Column("level", "Of", "l"), Column("statistic", "F or t"), Column("df1", "df1"),
    Column("df2", "df2"), Column("p", "p"), Column("mean_deff", "deff"),
    Column("deff_cv2", "a2"), Column("flags", "Flags", "l"))
_TEST_WORDS = {"rao-scott": "Rao-Scott F", "wald": "Wald F",
               "trend-linear": "linear t", "trend-quadratic": "quadratic t"}


def p_text(p: Any) -> str:
    """Return a p-value as text: 3 decimals, ``<0.001`` below that, '' when missing."""
    if p is None or (isinstance(p, float) and math.isnan(p)):
        return ""
    return "<0.001" if float(p) < 0.001 else fmt_number(p, 3)


def _scaled(row: Mapping[str, Any], key: str) -> float:
    """Return a number of a difference row, as percent (points) for proportions and rates."""
    v = row.get(key)
    x = math.nan if v is None else float(v)
    return x * 100.0 if row.get("statistic") != "mean" else x


def _decimals(row: Mapping[str, Any]) -> int:
    """Return the decimals a difference row's own SE asks for."""
    return auto_decimals(_scaled(row, "se"), lowest=1 if row["statistic"] != "mean" else 0)


def _difference_cells(row: Mapping[str, Any], d: int) -> tuple[str, ...]:
    """Return the formatted cells of one difference row, numbers with *d* decimals."""
    num = {k: fmt_number(_scaled(row, k), d) for k in
           ("estimate_a", "estimate_b", "difference", "se", "ci_low", "ci_high")}
    level = row.get("level") or ("nonresponse" if row["statistic"] == "nonresponse-rate"
                                 else "mean")
    return (row["variable"], str(level), str(row["group_a"]), str(row["group_b"]),
            num["estimate_a"], num["estimate_b"], num["difference"], num["se"],
            interval(num["ci_low"], num["ci_high"], words=True), fmt_number(row["t"], 2),
            p_text(row["p"]), p_text(row["p_adjusted"]), ", ".join(row.get("flags") or ()))


def _test_cells(row: Mapping[str, Any]) -> tuple[str, ...]:
    """Return the formatted cells of one test row."""
    of = row.get("level") or row.get("quantity") or ""
    if row.get("quantity") == "reasons":  # the categories are in the notes and machine formats
        of = "reasons"
    return (row["variable"], _TEST_WORDS.get(row["test"], row["test"]), str(of),
            fmt_number(row["statistic"], 2), fmt_number(row["df1"], 2).rstrip("0").rstrip("."),
            fmt_number(row["df2"], 1).rstrip("0").rstrip("."), p_text(row["p"]),
            fmt_number(row.get("mean_deff"), 2), fmt_number(row.get("deff_cv2"), 2),
            ", ".join(row.get("flags") or ()))


def _title_tail(result: Comparison) -> str:
    """Return ", age-adjusted (standard NAME)" when the comparison is age-adjusted."""
    std = result.settings.get("standard")
    return f", age-adjusted (standard {std})" if std else ""


def compare_notes(result: Comparison) -> tuple[str, ...]:
    """Return the notes under a comparison: what the numbers are, tests, cautions, flags."""
    from wstats.reports.compare_rows import FLAGS

    s = result.settings
    notes = ["B - A: group B's value minus group A's; proportions and "
             "nonresponse rates in percent, their differences in percentage points. SE from "
             "the full design covariance of the two estimates; t and two-sided p on "
             + _df_words(result) + ".",
             *_test_notes(result),
             "A difference that is not significant is not evidence that the groups are equal; "
             "many comparisons raise the chance of a false positive."]
    if s.get("adjust_p") and s["adjust_p"] != "none":
        word = {"holm": "Holm (1979)", "bh": "Benjamini-Hochberg (1995)"}[s["adjust_p"]]
        notes.append(f"p adjusted: {word}, over all differences of this comparison.")
    if s.get("standard"):
        crude = any(r.get("statistic") == "nonresponse-rate" for r in result.differences.rows)
        notes.append(f"Age-adjusted (standard {s['standard']}) by direct standardisation over "
                     f"the levels of {s.get('age_adjust')}"
                     + ("; the nonresponse rates and the reasons tests are crude (not "
                        "age-adjusted)." if crude else "."))
    kinds = sorted({str(r.get("level")) for r in result.tests.rows
                    if r.get("quantity") == "reasons"})
    if kinds:
        notes.append("reasons: a Rao-Scott test of the reason of each row asked ("
                     + "; ".join(k.replace("+", ", ") for k in kinds)
                     + ") against the groups, among the rows asked.")
    fired = sorted({f for r in result.differences.rows + result.tests.rows
                    for f in r.get("flags") or ()})
    notes += [f"{f}: {FLAGS[f]}" for f in fired if f in FLAGS]
    return tuple(notes)


def _df_words(result: Comparison) -> str:
    """Return which degrees of freedom the t of a difference uses."""
    if result.settings.get("df_rule") != "satterthwaite (periods)":
        return "the design degrees of freedom"
    dfs = [float(r["df"]) for r in result.differences.rows
           if r.get("df") is not None and math.isfinite(float(r["df"]))]
    span = (f" ({fmt_number(min(dfs), 0)} to {fmt_number(max(dfs), 0)})"
            if dfs and round(min(dfs)) != round(max(dfs)) else
            f" ({fmt_number(dfs[0], 0)})" if dfs else "")
    return ("Satterthwaite degrees of freedom from each period's own design df" + span
            + ", not the design df above")


_TEST_NOTES = {
    "wald": "Wald F: all group means (or adjusted values) equal, on (k-1, d-k+2) degrees of "
            "freedom.",
    "rao-scott": "Rao-Scott F: independence of the variable and the groups, second-order "
                 "(Satterthwaite) corrected, with the design effects taken at the independence "
                 "fit; deff: their mean (delta-bar), a2: their squared coefficient of variation.",
    "trend-linear": "linear t: orthogonal-polynomial trend contrast across the ordered levels.",
    "trend-quadratic": "linear t, quadratic t: orthogonal-polynomial trend contrasts across the "
                       "ordered levels.",
}


def _test_notes(result: Comparison) -> list[str]:
    """Return one note per kind of test the comparison holds (none for absent tests)."""
    done = {str(r["test"]) for r in result.tests.rows}
    if "trend-quadratic" in done:  # one sentence for both trend contrasts
        done.discard("trend-linear")
    return [" ".join(text for key, text in _TEST_NOTES.items() if key in done)] if done else []


def compare_grids(result: Comparison) -> tuple[Grid, Grid]:
    """Return the differences grid and the tests grid of a comparison.

    Columns that would be empty everywhere (adjusted p without an adjustment, flags that
    never fire, design effects without a Rao-Scott test) are left out.
    """
    tail = _title_tail(result)
    diffs = result.differences.rows
    drop = set()
    if result.settings.get("adjust_p", "none") == "none":
        drop.add("p_adjusted")
    if not any(r.get("flags") for r in diffs):
        drop.add("flags")
    # one number of decimals per variable and statistic, so that a column reads evenly
    decimals: dict[tuple[str, str], int] = {}
    for r in diffs:
        key = (r["variable"], r["statistic"])
        decimals[key] = max(decimals.get(key, 0), _decimals(r))
    notes: tuple[str, ...] = ()
    firsts = {str(r["group_a"]) for r in diffs}
    if len(firsts) == 1:  # every row against one reference level: say it once
        drop.add("group_a")
        notes = (f"A: {firsts.pop()}, the reference level; B: the level compared with it.",)
    columns = tuple(Column("ci", f"{_level_text(result.level)}% CI") if c.key == "ci" else c
                    for c in _DIFF_COLUMNS)
    diff = _grid(f"Differences between levels of {result.by}{tail}", columns, drop,
                 [_difference_cells(r, decimals[(r["variable"], r["statistic"])])
                  for r in diffs], notes)
    # the design line under the title, as in every other command's output
    diff = replace(diff, caption=design_line(
        result.design, {"where": result.settings.get("where")}, result.level))
    keep_test = set()
    if not any(r["test"] == "rao-scott" for r in result.tests.rows):
        keep_test |= {"mean_deff", "deff_cv2"}
    if not any(r.get("flags") for r in result.tests.rows):
        keep_test.add("flags")
    tests = _grid(f"Tests across levels of {result.by}{tail}", _TEST_COLUMNS, keep_test,
                  [_test_cells(r) for r in result.tests.rows], compare_notes(result))
    return diff, tests


def _level_text(level: float) -> str:
    """Return 95 for 0.95, 99.5 for 0.995."""
    return fmt_number(level * 100, 1).rstrip("0").rstrip(".")


def _grid(title: str, columns: tuple[Column, ...], drop: set[str],
          rows: list[tuple[str, ...]], notes: tuple[str, ...]) -> Grid:
    """Return a grid of *rows* without the columns named in *drop*."""
    keep = [i for i, c in enumerate(columns) if c.key not in drop]
    return Grid(title, tuple(columns[i] for i in keep),
                tuple(tuple(r[i] for i in keep) for r in rows), ("data",) * len(rows), notes)


def compare_terminal(result: Comparison, provenance: Any = None) -> RenderableType:
    """Return a rich renderable of a comparison: the differences, then the tests."""
    from rich.console import Group

    from wstats.render._terminal import GridView

    diff, tests = compare_grids(result)
    return Group(GridView(_by_variable(diff), per_section=True),
                 GridView(_by_variable(tests), per_section=True))


def _by_variable(g: Grid) -> Grid:
    """Return *g* with one section per variable instead of a Variable column.

    On a terminal the label columns after it (level, groups, test) are repeated in every
    block of columns that fits the width, so each block still says which row is which.
    """
    rows: list[tuple[str, ...]] = []
    kinds: list[str] = []
    current = None
    for row in g.rows:
        if row[0] != current:
            current = row[0]
            rows.append((current,))
            kinds.append("section")
        rows.append(row[1:])
        kinds.append("data")
    return Grid(g.title, g.columns[1:], tuple(rows), tuple(kinds), g.notes,
                caption=g.caption)


def compare_markdown(result: Comparison, provenance: Mapping[str, Any] | None = None) -> str:
    """Render a comparison as Markdown: provenance comment, two pipe tables, notes."""
    from wstats.render._markdown import grid_markdown

    diff, tests = compare_grids(result)
    prov = provenance or default_provenance(result)
    first = grid_markdown(diff, prov)
    second = grid_markdown(tests, {})
    return first + "\n" + second[second.index("**"):]


def compare_csv(result: Comparison, provenance: Mapping[str, Any] | None = None) -> str:
    """Render a comparison as one tidy CSV: a ``row_type`` column (difference | test)."""
    import csv
    import io

    from wstats.render._csv import value_text
    from wstats.render._grid import provenance_lines

    columns = list(dict.fromkeys([*result.differences.columns, *result.tests.columns]))
    buf = io.StringIO()
    for line in provenance_lines(provenance or default_provenance(result)):
        buf.write(f"# {line}\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["row_type", *columns])
    for kind, table in (("difference", result.differences), ("test", result.tests)):
        for rec in table.records():
            w.writerow([kind, *(_csv_value(rec.get(c), value_text) for c in columns)])
    return buf.getvalue()


def _csv_value(v: Any, text: Any) -> str:
    """Return one CSV field (a list of flags joined by ';')."""
    if isinstance(v, list | tuple):
        return ";".join(str(x) for x in v)
    return str(text(v))


def compare_json(result: Comparison, provenance: Mapping[str, Any] | None = None) -> str:
    """Render a comparison as ``{"provenance", "differences", "tests"}`` (plus flag meanings)."""
    from wstats.reports.compare_rows import FLAGS

    diffs, tests = result.differences.records(), result.tests.records()
    fired = sorted({f for r in [*diffs, *tests] for f in r.get("flags") or ()})
    data = {"provenance": provenance or default_provenance(result), "differences": diffs,
            "tests": tests, "settings": dict(result.settings),
            "flags": {f: FLAGS[f] for f in fired if f in FLAGS}}
    return json.dumps(data, indent=2, ensure_ascii=False, allow_nan=False) + "\n"
