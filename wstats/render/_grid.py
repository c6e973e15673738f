"""A format-neutral table model (Grid) built once from each result type, drawn by each format.

Estimate and nonresponse tables become a Grid here: sections per variable, cells already
formatted (see :mod:`wstats.reports.cells`), flag marks in the cells and their footnotes.
Each format module then only decides how rows, spans and notes are drawn.
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Protocol

from wstats.reports.cells import (
    SUPPRESSED,
    FlagNotes,
    auto_decimals,
    fmt_count,
    fmt_number,
    group_text,
    interval,
    reason_breakdown,
    reason_legend,
    reason_legend_items,
    short_reason,
    with_marks,
)

if TYPE_CHECKING:
    import pandas as pd

    from wstats.estimation.results import EstimateTable

__all__ = [
    "Column",
    "Grid",
    "NonresponseLike",
    "PublicationLike",
    "Span",
    "design_line",
    "estimate_grid",
    "nonresponse_grid",
    "provenance_lines",
    "publication_grid",
]

_STAT_WORDS = {"proportion": "percent", "mean": "mean", "total": "total", "ratio": "ratio",
               "quantile": "quantile"}


class NonresponseLike(Protocol):
    """What the renderers need from a nonresponse table (see ``wstats.reports.nonresponse``)."""

    frame: pd.DataFrame
    by: tuple[str, ...]
    reasons: tuple[str, ...]
    level: float
    design: Mapping[str, Any]
    settings: Mapping[str, Any]

    def records(self) -> list[dict[str, Any]]: ...


class PublicationLike(Protocol):
    """What the renderers need from a publication table (see ``wstats.reports.tables``)."""

    title: str
    cells: pd.DataFrame
    columns: Sequence[Any]
    footnotes: tuple[str, ...]
    methods: str
    provenance: Mapping[str, Any]
    estimates: EstimateTable


@dataclass(frozen=True)
class Column:
    """One column: key, header text and alignment (``l`` text, ``r`` numbers)."""

    key: str
    header: str
    align: str = "r"


@dataclass(frozen=True)
class Span:
    """A header cell spanning columns ``start`` to ``stop - 1`` (a grouping variable)."""

    text: str
    start: int
    stop: int


@dataclass(frozen=True)
class Grid:
    """A formatted table: columns, optional spanning headers, rows of text, notes.

    ``kinds`` has one entry per row: ``data``, ``section`` (a label spanning the table; only
    its first cell is used) or ``summary`` (sample-size rows at the foot).
    """

    title: str
    columns: tuple[Column, ...]
    rows: tuple[tuple[str, ...], ...]
    kinds: tuple[str, ...]
    notes: tuple[str, ...] = ()
    spans: tuple[Span, ...] = ()
    caption: str = ""
    methods: str = ""

    def headers(self) -> list[str]:
        """Return one header per column, spanning text folded in (``Sex: Male``)."""
        out = [c.header for c in self.columns]
        for s in self.spans:
            for i in range(s.start, s.stop):
                out[i] = f"{s.text}: {out[i]}" if out[i] else s.text
        return out


@dataclass
class _Rows:
    """Accumulates rows and their kinds while a grid is built."""

    rows: list[tuple[str, ...]] = field(default_factory=list)
    kinds: list[str] = field(default_factory=list)

    def add(self, cells: Sequence[str], kind: str = "data") -> None:
        """Append one row."""
        self.rows.append(tuple(cells))
        self.kinds.append(kind)


def _sections(frame: pd.DataFrame, keys: list[str]) -> Iterator[tuple[tuple[Any, ...], Any]]:
    """Yield (key, sub-frame) runs of consecutive rows sharing *keys*, in frame order."""
    if frame.empty:
        return
    labels = frame[keys].astype(object).fillna("").astype(str).agg("\x1f".join, axis=1)
    run = (labels != labels.shift()).cumsum()
    for _, sub in frame.groupby(run, sort=False):
        yield tuple(sub.iloc[0][k] for k in keys), sub


def estimate_grid(table: EstimateTable) -> Grid:
    """Return the grid of an estimate table: a section per variable x statistic."""
    frame, by = table.frame, list(table.by)
    labels: Mapping[str, str] = dict(table.settings.get("labels", {}) or {})
    has_level = bool(frame["level"].notna().any() or (frame["statistic"] == "quantile").any())
    ci = f"{fmt_number(table.level * 100, 1).rstrip('0').rstrip('.')}% CI"
    cols = [*(Column(b, b, "l") for b in by)]
    cols += [Column("level", "Level", "l")] if has_level else []
    cols += [Column("estimate", "Estimate"), Column("se", "SE"), Column("ci", ci),
             Column("n", "n"), Column("not_valid", "Not valid", "l")]
    notes, acc, order = FlagNotes(), _Rows(), _reason_order(table)
    adjusted = "standard" in frame.columns
    keys = ["variable", "statistic", *(["standard"] if adjusted else [])]
    for key, sub in _sections(frame, keys):
        var, stat = key[0], key[1]
        title = f"{var} · {labels[var]}" if var in labels else str(var)
        std = key[2] if adjusted and isinstance(key[2], str) else None
        tail = f", age-adjusted (standard {std})" if std else ""
        acc.add([f"{title} ({_STAT_WORDS.get(stat, stat)}){tail}"], "section")
        pct = stat == "proportion"
        se_dec = 2 if pct else auto_decimals(_median_se(sub))
        dec = 1 if pct else max(0, se_dec - 1)
        # one interval style per block: "lo to hi" for all once any limit is negative
        words = bool((sub["ci_low"].astype(float) < 0).any())
        last: tuple[str, ...] | None = None
        for row in sub.to_dict(orient="records"):
            domain = tuple(group_text(row[b]) for b in by)
            cells = [*domain, *([_level_text(row)] if has_level else [])]
            cells += _number_cells(row, notes, dec, se_dec, pct, words)
            # a domain's n and reasons are the same on each of its level rows: shown once
            once = pct and domain == last
            cells += ["", ""] if once else [fmt_count(row["n"]),
                                             reason_breakdown(row["reasons"], order)]
            acc.add(cells)
            last = domain
    legend = reason_legend(r for d in frame["reasons"] for r, c in dict(d).items() if c)
    return Grid(
        title=str(table.settings.get("title", "Estimates")), columns=tuple(cols),
        rows=tuple(acc.rows), kinds=tuple(acc.kinds),
        notes=tuple([*notes.notes(), *([legend] if legend else [])]),
        caption=design_line(table.design, table.settings, table.level),
    )


def _reason_order(table: Any) -> list[str]:
    """Return reason names in vocabulary order when the table says, else core order."""
    names = table.settings.get("reasons") if hasattr(table, "settings") else None
    return list(names or ("skipped", "dont_know", "refused", "invalid", "missing"))


def _median_se(sub: pd.DataFrame) -> float:
    """Return the median finite SE of a section (NaN when none)."""
    se = sub["se"].astype(float)
    se = se[se.notna() & (se > 0) & (se < math.inf)]
    return float(se.median()) if len(se) else math.nan


def _level_text(row: Mapping[str, Any]) -> str:
    """Return the Level cell: category label, quantile probability, or ''."""
    if row["statistic"] == "quantile":
        return f"p = {fmt_number(row['p'], 2).rstrip('0').rstrip('.')}"
    level = row["level"]
    return "" if level is None or (isinstance(level, float) and math.isnan(level)) else str(level)


def _number_cells(
    row: Mapping[str, Any], notes: FlagNotes, dec: int, se_dec: int, pct: bool,
    words: bool = False,
) -> list[str]:
    """Return Estimate, SE and CI cells (percent scale for proportions; marks; suppression)."""
    flags = tuple(row["flags"] or ())
    # an empty domain has nothing to hide: "n/a", as nonresponse shows it, not "[suppressed]"
    empty = "empty" in flags
    marks = notes.mark(flags, bool(row["suppress"]) and not empty)
    if row["suppress"] and not empty:
        return [with_marks(SUPPRESSED, marks), "", ""]
    k = 100.0 if pct else 1.0
    est = float(row["estimate"]) * k
    if math.isnan(est):
        return [with_marks("n/a", marks), "", ""]
    # thousands separators on every number, so that one column has one style
    text = fmt_number(est, dec, grouping=True) + ("%" if pct else "")
    lo = fmt_number(float(row["ci_low"]) * k, dec, grouping=True)
    hi = fmt_number(float(row["ci_high"]) * k, dec, grouping=True)
    return [with_marks(text, marks), fmt_number(float(row["se"]) * k, se_dec, grouping=True),
            interval(lo, hi, words=words)]


def nonresponse_grid(table: NonresponseLike) -> Grid:
    """Return the grid of a nonresponse table: one table, a row per variable x domain.

    Reason columns are those some row has (core or added); the others are named in a note.
    With ``settings["display"] == "shares"`` they hold weighted shares, else row counts.
    """
    frame, by = table.frame, list(table.by)
    shares = table.settings.get("display") == "shares"
    named = [r for r in table.reasons if r != "valid" and f"count_{r}" in frame.columns]
    shown = [r for r in named if bool((frame[f"count_{r}"] > 0).any())]
    ci = f"{fmt_number(table.level * 100, 1).rstrip('0').rstrip('.')}% CI"
    cols = [Column("variable", "Item", "l"), *(Column(b, b, "l") for b in by),
            Column("asked", "Asked"), Column("valid", "Valid"),
            *(Column(f"count_{r}", short_reason(r)) for r in shown),
            Column("rate", "Rate"), Column("ci", ci)]
    notes, acc = FlagNotes(), _Rows()
    for rec in frame.to_dict(orient="records"):
        row = {str(k): v for k, v in rec.items()}
        marks = notes.mark(tuple(row.get("flags") or ()))
        rate = fmt_number(float(row["nonresponse_rate"]) * 100, 1)
        ci_text = interval(fmt_number(float(row["ci_low"]) * 100, 1),
                           fmt_number(float(row["ci_high"]) * 100, 1))
        acc.add([str(row["variable"]), *(group_text(row[b]) for b in by),
                 fmt_count(row["asked"]), *(_reason_cell(row, r, shares)
                                            for r in ("valid", *shown)),
                 with_marks(f"{rate}%" if rate else "n/a", marks), ci_text])
    return Grid(
        title=str(table.settings.get("title", "Item nonresponse")), columns=tuple(cols),
        rows=tuple(acc.rows), kinds=tuple(acc.kinds),
        notes=(*notes.notes(), *_nonresponse_notes(table, shown, named, shares)),
        caption=design_line(table.design, table.settings, table.level),
    )


def _reason_cell(row: Mapping[str, Any], reason: str, shares: bool) -> str:
    """Return one reason's cell: its row count, or its weighted share in percent."""
    if not shares:
        return fmt_count(row[f"count_{reason}"])
    text = fmt_number(float(row[f"share_{reason}"]) * 100, 1)
    return f"{text}%" if text else ""


def _nonresponse_notes(table: NonresponseLike, shown: Sequence[str], named: Sequence[str],
                       shares: bool) -> list[str]:
    """Return what the columns hold, the reasons' short forms, the empty reasons, the rate."""
    what = "weighted shares of all rows" if shares else "rows (unweighted)"
    out = [f"Valid and reason columns: {what}."]
    legend = reason_legend_items(shown)
    if legend:
        out.append(f"Reasons: {legend}.")
    empty = [r.replace("_", " ") for r in named if r not in shown]
    if empty:
        out.append(f"No rows (columns left out): {', '.join(empty)}.")
    defn = table.settings.get("definition") or (
        "Nonresponse: weighted share of asked rows (not skipped) that are not valid.")
    return [*out, str(defn)]


def publication_grid(table: PublicationLike) -> Grid:
    """Return the grid of a publication table (cells already formatted by the builder)."""
    cells = table.cells
    keys = [c.key for c in table.columns]
    cols = [Column("label", "", "l"), *(Column(c.key, c.header) for c in table.columns)]
    spans, i = [], 0
    while i < len(table.columns):
        group = table.columns[i].group
        j = i
        while j < len(table.columns) and table.columns[j].group == group:
            j += 1
        if group:
            spans.append(Span(str(group), i + 1, j + 1))
        i = j
    acc = _Rows()
    for row in cells.to_dict(orient="records"):
        acc.add([str(row["label"]), *(str(row[k] or "") for k in keys)], str(row["kind"]))
    return Grid(title=table.title, columns=tuple(cols), rows=tuple(acc.rows),
                kinds=tuple(acc.kinds), notes=tuple(table.footnotes), spans=tuple(spans),
                caption=design_line(table.estimates.design, table.estimates.settings,
                                    table.estimates.level),
                methods=table.methods)


def design_line(design: Mapping[str, Any], settings: Mapping[str, Any], level: float) -> str:
    """Return a one-line summary of the design, df rule, subpopulation and interval method."""
    parts = []
    if design.get("weight"):
        parts.append(f"weight {design['weight']}")
    if design.get("n_strata") is not None:
        n = design["n_strata"]
        parts.append(f"{n} stratum" if n == 1 else f"{n} strata")
    if design.get("n_psu") is not None:
        parts.append(f"{design['n_psu']} PSUs")
    df = _df_text(design, settings)
    if df:
        parts.append(df)
    pool = design.get("pool")
    if pool:
        parts.append(_pool_text(pool))
    if settings.get("engine") == "dask":
        parts.append("Dask engine")
    method = settings.get("proportion_ci")
    level_text = fmt_number(level * 100, 1).rstrip("0").rstrip(".")
    ci = f"{level_text}% intervals" + (f" ({method} for proportions)" if method else "")
    where = settings.get("where")
    sub = f"; subpopulation {where} (full design kept)" if where else ""
    return ("Design: " + ", ".join(parts) + "; " + ci if parts else ci) + sub


def _pool_text(pool: Mapping[str, Any]) -> str:
    """Return ``3 files pooled (equal weights; totals per period)`` and its variants."""
    factors = dict(pool.get("factors") or {})
    k = len(factors)
    rule = pool.get("rule")
    if rule == "equal":
        how = "equal weights"
    elif rule == "rows":
        how = "weights by row count"
    else:
        how = "weights × " + ", ".join(f"{float(f):g}" for f in factors.values())
    if pool.get("strata") == "shared across files":
        how += ", strata and PSUs shared"
    return f"{k} file{'' if k == 1 else 's'} pooled ({how}; totals per period)"


def _df_text(design: Mapping[str, Any], settings: Mapping[str, Any]) -> str:
    """Return ``df 162``, or under the domain rule ``df per domain 3–8``."""
    span = settings.get("df_range")
    if settings.get("df_rule") == "domain" and span:
        lo, hi = (group_text(float(x)) for x in span)
        return f"df per domain {lo}" if lo == hi else f"df per domain {interval(lo, hi)}"
    return f"df {group_text(design['df'])}" if design.get("df") is not None else ""


def provenance_lines(provenance: Mapping[str, Any] | None) -> list[str]:
    """Return ``key: value`` lines (sorted, dotted keys, JSON values) for comment headers."""
    from wstats.reports.provenance import provenance_lines as lines

    return lines(provenance)


def default_provenance(table: Any) -> dict[str, Any]:
    """Return a minimal provenance for a table rendered without one (library use)."""
    from wstats.reports.provenance import provenance

    return provenance([], None, dict(getattr(table, "design", {}) or {}), "", time=False)
