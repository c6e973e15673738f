"""The rows of a publication table: one line per variable or level, its cells and footnotes."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from wstats.errors import AnalysisError, did_you_mean

if TYPE_CHECKING:
    import pandas as pd

    from wstats.decoding.columns import Dataset
    from wstats.estimation.results import EstimateTable
    from wstats.reports.table_specs import RowSpec, TableSpec

__all__ = ["TableColumn"]


@dataclass(frozen=True)
class TableColumn:
    """One column of a publication table.

    ``key`` identifies it in :attr:`PublicationTable.cells` (``all`` for the whole
    population, ``VAR=level`` otherwise); ``group`` is the grouping variable's display label
    (None for the whole population), ``variable`` its name, ``level`` the level text.
    """

    key: str
    header: str
    group: str | None = None
    variable: str | None = None
    level: str | None = None


def _label(data: Dataset, name: str) -> str:
    """Return a variable's label, or its name."""
    col = data.columns.get(name)
    return (col.label if col is not None and col.label else None) or name


def _column_key(rec: Mapping[str, Any], by: Sequence[str]) -> str:
    """Return the column key of one estimate row: ``all`` or ``VAR=level``."""
    from wstats.reports.cells import group_text

    for b in by:
        v = rec.get(b)
        if not (v is None or (isinstance(v, float) and math.isnan(v))):
            return f"{b}={group_text(v)}"
    return "all"


def _records(frame: pd.DataFrame) -> list[dict[str, Any]]:
    """Return the rows of a frame as dicts keyed by column name."""
    return [{str(k): v for k, v in r.items()} for r in frame.to_dict(orient="records")]


def _is_na(v: Any) -> bool:
    """Tell whether *v* is None or NaN."""
    return v is None or (isinstance(v, float) and math.isnan(v))


_STAT_WORDS = {"mean": "mean", "total": "total", "proportion": "%", "quantile": "quantile"}


_FIELD_WORDS = {"est": "estimate", "se": "SE", "lo": "lower", "hi": "upper", "pct": "percent",
                "n": "n", "cv": "CV", "deff": "design effect"}


class _Layout:
    """Lays out the table lines (sections, level rows) and formats their cells."""

    def __init__(self, spec: TableSpec, est: EstimateTable, columns: Sequence[TableColumn],
                 data: Dataset) -> None:
        from wstats.reports.cells import FlagNotes

        self.spec, self.est, self.columns, self.data = spec, est, columns, data
        self.flags = FlagNotes()
        self.used: dict[str, str] = {}
        self.index: dict[tuple[str, str, str, str], dict[str, Any]] = {}
        for rec in _records(est.frame):
            key = (str(rec["variable"]), str(rec["statistic"]), _level_key(rec),
                   _column_key(rec, spec.by))
            self.index.setdefault(key, rec)

    def frames(self, sizes: Mapping[str, tuple[float, float]]) -> tuple[pd.DataFrame,
                                                                        pd.DataFrame]:
        """Return the cells (text) and numbers frames, sample-size rows last."""
        import pandas as pd

        from wstats.reports.cells import fmt_count

        text: list[dict[str, Any]] = []
        nums: list[dict[str, Any]] = []
        for i, row in enumerate(self.spec.rows):
            for line in self._lines(i, row):
                text.append(line[0])
                nums.append(line[1])
        for label, j in (("Unweighted n", 0), ("Weighted N", 1)):
            base = {"label": label, "kind": "summary", "variable": None, "level": None}
            text.append({**base, **{c.key: fmt_count(sizes[c.key][j]) for c in self.columns}})
            nums.append({**base, **{c.key: sizes[c.key][j] for c in self.columns}})
        return pd.DataFrame(text), pd.DataFrame(nums)

    def _lines(self, i: int, row: RowSpec) -> list[tuple[dict[str, Any], dict[str, Any]]]:
        """Return (text, numbers) dicts for one row spec: a heading plus levels, or one line."""
        stat = row.statistic or self._statistic(row.variable)
        label = row.label or _label(self.data, row.variable)
        base = {"variable": row.variable}
        if stat != "proportion":
            lvl = repr(float(row.p)) if stat == "quantile" else ""
            word = f"quantile {row.p:g}" if stat == "quantile" else _STAT_WORDS[stat]
            word = "median" if stat == "quantile" and row.p == 0.5 else word
            name = label if _names_statistic(label, word) else f"{label}, {word}"
            return [self._line(name, "data", {**base, "level": None}, stat, lvl, row)]
        shown = label if _names_statistic(label, "%") else f"{label}, %"
        head = {"label": shown, "kind": "section", **base, "level": None}
        blank = {c.key: "" for c in self.columns}
        out = [({**head, **blank}, {**head, **dict.fromkeys(blank, math.nan)})]
        for lv in self._levels(i, row):
            out.append(self._line(lv, "data", {**base, "level": lv}, stat, lv, row))
        return out

    def _line(self, label: str, kind: str, base: Mapping[str, Any], stat: str, lvl: str,
              row: RowSpec) -> tuple[dict[str, Any], dict[str, Any]]:
        """Format one table line across the columns."""
        text = {"label": label, "kind": kind, **base}
        nums = dict(text)
        for col in self.columns:
            rec = self.index.get((row.variable, stat, lvl, col.key))
            text[col.key], nums[col.key] = self._cell(rec, stat, row)
        return text, nums

    def _cell(self, rec: Mapping[str, Any] | None, stat: str, row: RowSpec) -> tuple[str, float]:
        """Return the text and number of one cell (marks added, suppressed hidden)."""
        from wstats.reports.cells import cell_text, with_marks

        if rec is None:
            return "", math.nan
        marks = self.flags.mark(tuple(rec["flags"] or ()), bool(rec["suppress"]))
        if rec["suppress"]:
            return with_marks(self.spec.suppressed, marks), math.nan
        value = float(rec["estimate"])
        if math.isnan(value):
            return with_marks("n/a", marks), math.nan
        template = row.style or self.spec.styles[stat]
        self.used[stat] = template
        decimals = self.spec.decimals if row.decimals is None else row.decimals
        se_decimals = self.spec.se_decimals if row.decimals is None else row.decimals + 1
        if stat == "total":  # a total's SE is as large as the total: no more decimals than it
            se_decimals = min(se_decimals, decimals)
        scale = 100.0 if stat == "proportion" and self.spec.percent else 1.0
        return with_marks(cell_text(template, rec, decimals=decimals, se_decimals=se_decimals,
                                    scale=scale), marks), value

    def _statistic(self, variable: str) -> str:
        """Return the statistic the estimator chose for a row without one."""
        stats = [k[1] for k in self.index if k[0] == variable]
        return stats[0] if stats else "mean"

    def _levels(self, i: int, row: RowSpec) -> list[str]:
        """Return the level labels to show, in estimate order, filtered by ``levels``."""
        from wstats.reports.cells import group_text

        found = list(dict.fromkeys(k[2] for k in self.index
                                   if k[0] == row.variable and k[1] == "proportion"))
        if row.levels is None:
            return found
        col = self.data.columns.get(row.variable)
        codes = {lab: group_text(code) for code, lab in (col.value_labels if col else {}).items()}
        out = []
        for want in row.levels:
            match = [lv for lv in found if want in (lv, codes.get(lv))]
            if not match:
                raise AnalysisError(f"{self.spec.source}: rows[{i}].levels: '{want}' is not a "
                                    f"level of {row.variable} (levels: {', '.join(found)})"
                                    f"{did_you_mean(want, found)}")
            out.extend(match)
        return out

    def footnotes(self) -> list[str]:
        """Return the notes: rule marks, suppression, cell layouts, sizes, the spec's notes."""
        out = self.flags.notes(self.spec.suppressed)
        level = f"{self.spec.level * 100:.1f}".rstrip("0").rstrip(".")
        for stat, template in self.used.items():
            shown = template.format(**_FIELD_WORDS)
            limits = "{lo}" in template or "{hi}" in template
            method = f" ({self.spec.proportion_ci})" if stat == "proportion" else ""
            extra = f", with lower–upper the {level}% confidence limits{method}" if limits else ""
            out.append(f"{stat.capitalize()} cells: {shown}{extra}.")
        where = f" (restricted to {self.spec.where})" if self.spec.where else ""
        out.append(f"Unweighted n: records in the column's population{where}; weighted N: the "
                   f"sum of their weights ({self.est.design.get('weight', 'weight')}).")
        return [*out, *self.spec.notes]


def _names_statistic(label: str, word: str) -> bool:
    """Tell whether a row label already names its statistic ('Age, median'; 'Deaths, total')."""
    import re

    last = re.split(r"[,(]", label.lower())[-1]
    words = {"%": ("%", "percent"), "total": ("total",)}.get(word, (word.lower(),))
    return any(re.search(rf"(^|\W){re.escape(w)}(\W|$)", last) for w in words)


def _level_key(rec: Mapping[str, Any]) -> str:
    """Return the level part of an index key: category label, quantile p, or ''."""
    if rec["statistic"] == "quantile":
        return repr(float(rec["p"]))
    return "" if _is_na(rec.get("level")) else str(rec["level"])
