"""Publication tables: a table spec -> formatted cells, sample sizes, notes, methods, provenance.

:func:`build_table` reads only the columns the spec needs, estimates through
:func:`wstats.estimate` (whole population, then once per grouping variable), formats every
cell (``wstats._cellfmt``: the one place numbers become text) and adds the unweighted n
and weighted N rows, footnotes, a methods paragraph and provenance.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from wstats._reasons import NOT_ASKED
from wstats._tablespec import STATISTICS, RowSpec, TableSpec, load_table_spec
from wstats.errors import AnalysisError, did_you_mean

if TYPE_CHECKING:
    import pandas as pd

    from wstats._codebook import Codebook
    from wstats._column import Dataset
    from wstats._design import Design
    from wstats._results import EstimateTable

__all__ = [
    "table_variables",
    "STATISTICS",
    "PublicationTable",
    "RowSpec",
    "TableColumn",
    "TableSpec",
    "build_table",
    "load_table_spec",
]


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


@dataclass(frozen=True, eq=False)
class PublicationTable:
    """A built publication table.

    Attributes
    ----------
    title : the table title.
    cells : formatted text, one row per line of the table; columns ``label``, ``kind``
        (``section`` = variable heading, ``data`` = estimate row, ``summary`` = the unweighted
        n / weighted N rows), ``variable``, ``level``, then one column per :attr:`columns` key.
    numbers : same shape as ``cells`` but the point estimates (proportions as fractions; the
        counts in the summary rows); NaN where there is no number or it is suppressed.
    columns : the table columns in order.
    estimates : every estimate behind the cells (tidy).
    footnotes : flag marks, suppression, cell layout, sample sizes, user notes.
    methods : the methods paragraph (plain text).
    provenance : see :func:`wstats._provenance.provenance`.
    outputs : ``(path, format)`` pairs from the spec.
    spec : the spec it was built from.
    """

    title: str
    cells: pd.DataFrame
    numbers: pd.DataFrame
    columns: tuple[TableColumn, ...]
    estimates: EstimateTable
    footnotes: tuple[str, ...]
    methods: str
    provenance: Mapping[str, Any]
    outputs: tuple[tuple[Path, str], ...] = ()
    spec: TableSpec | None = None


def build_table(
    spec: TableSpec | str | Path, *, progress: bool = False, time: bool | str = True,
    data: Dataset | None = None,
) -> PublicationTable:
    """Build a publication table from a spec.

    Parameters
    ----------
    spec : a TableSpec, or the path of a spec file (read with :func:`load_table_spec`).
    progress : show a progress bar while the data file is read.
    time : passed to :func:`wstats._provenance.provenance` (False for reproducible output).
    data : the decoded data when the caller has already read them (an analysis file reads
        its data once); they must hold every column the table needs.

    Returns
    -------
    PublicationTable

    Raises
    ------
    AnalysisError
        A row or grouping variable is in neither the data file nor the codebook.
    WstatsError
        Whatever reading, decoding or estimation raises (ReadError, CodebookError, ...).

    Examples
    --------
    >>> table = build_table("table1.toml", time=False)  # doctest: +SKIP
    >>> table.cells[["label", "all"]]  # doctest: +SKIP
    """
    from wstats._load import read
    from wstats._provenance import provenance

    if not isinstance(spec, TableSpec):
        spec = load_table_spec(spec)
    codebook = _codebook(spec)
    design = _design(spec, codebook)
    _check_variables(spec, codebook)
    if data is None:
        data = read(spec.data, columns=_needed(spec, design), codebook=codebook,
                    progress=progress)
    estimates = _estimate_all(spec, data, design)
    columns = _columns(spec, estimates, data)
    layout = _Layout(spec, estimates, columns, data)
    sizes = _domain_sizes(spec, data, design, columns)
    cells, numbers = layout.frames(sizes)
    return PublicationTable(
        title=spec.title, cells=cells, numbers=numbers, columns=columns, estimates=estimates,
        footnotes=tuple(layout.footnotes()), methods=_methods(spec, estimates, codebook),
        provenance=provenance([spec.data, spec.source], spec.codebook, estimates.design,
                              f"wstats table {spec.source.name}", time=time),
        outputs=spec.outputs, spec=spec,
    )


def _codebook(spec: TableSpec) -> Codebook | None:
    """Load the spec's codebook, if any."""
    if spec.codebook is None:
        return None
    from wstats._codebook import load_codebook

    return load_codebook(spec.codebook)


def _design(spec: TableSpec, codebook: Codebook | None) -> Design:
    """Return the Design: the spec's [design] over the codebook's [design]."""
    from wstats._tablespec import design_over_codebook

    return design_over_codebook(spec.source, codebook, spec.design)


def _check_variables(spec: TableSpec, codebook: Codebook | None) -> None:
    """Fail with the spec key when a row or grouping variable is nowhere to be found."""
    from wstats._readers import file_columns

    known = set(file_columns(spec.data)) | set(codebook.derived if codebook else ())
    named = [(f"rows[{i}].variable", r.variable) for i, r in enumerate(spec.rows)]
    named += [(f"columns.by[{i}]", b) for i, b in enumerate(spec.by)]
    for key, name in named:
        if name not in known:
            raise AnalysisError(f"{spec.source}: {key}: '{name}' is not a column of "
                                f"{spec.data.name} nor a derived variable"
                                f"{did_you_mean(name, known)}")


def table_variables(spec: TableSpec) -> list[str]:
    """Return the variables a table spec needs: rows, groups and the where-condition's inputs."""
    from wstats._expr import expression_names

    names = [r.variable for r in spec.rows] + list(spec.by)
    names += expression_names(spec.where, f"where in {spec.source}") if spec.where else []
    return list(dict.fromkeys(names))


def _needed(spec: TableSpec, design: Design) -> list[str]:
    """Return the variables to read: the table's variables and the design columns."""
    return list(dict.fromkeys([*table_variables(spec), *design.columns()]))


def _estimate_all(spec: TableSpec, data: Dataset, design: Design) -> EstimateTable:
    """Estimate every row for the whole population and per grouping variable; stack them."""
    import pandas as pd

    from wstats._estimate import estimate
    from wstats._reliability import STANDARDS
    from wstats._results import EstimateTable

    groups: dict[tuple[str | None, float], list[str]] = {}
    for r in spec.rows:
        groups.setdefault((r.statistic, r.p if r.statistic == "quantile" else 0.5),
                          []).append(r.variable)
    frames, first = [], None
    for by in [(), *((b,) for b in spec.by)]:
        for (stat, p), variables in groups.items():
            t = estimate(data, design, list(dict.fromkeys(variables)), statistics=stat, by=by,
                         where=spec.where, categorical=variables if stat == "proportion" else (),
                         quantiles=(p,), level=spec.level, proportion_ci=spec.proportion_ci,
                         reliability=STANDARDS[spec.reliability])
            frame = t.frame
            if by:  # keep only the rows of this grouping's levels
                frame = frame[frame[by[0]].notna()]
            frames.append(frame)
            first = first or t
    assert first is not None  # spec.rows is never empty
    stacked = pd.concat(frames, ignore_index=True)
    cols = [c for c in stacked.columns if c not in spec.by]
    at = cols.index("p") + 1
    stacked = stacked[[*cols[:at], *spec.by, *cols[at:]]]
    settings = {**first.settings, "level": spec.level, "proportion_ci": spec.proportion_ci}
    return EstimateTable.from_frame(stacked, by=spec.by, level=spec.level, design=first.design,
                         settings=settings)


def _label(data: Dataset, name: str) -> str:
    """Return a variable's label, or its name."""
    col = data.columns.get(name)
    return (col.label if col is not None and col.label else None) or name


def _column_key(rec: Mapping[str, Any], by: Sequence[str]) -> str:
    """Return the column key of one estimate row: ``all`` or ``VAR=level``."""
    from wstats._cellfmt import group_text

    for b in by:
        v = rec.get(b)
        if not (v is None or (isinstance(v, float) and math.isnan(v))):
            return f"{b}={group_text(v)}"
    return "all"


def _columns(spec: TableSpec, est: EstimateTable, data: Dataset) -> tuple[TableColumn, ...]:
    """Return the whole-population column, then each group level in estimate order."""
    from wstats._cellfmt import group_text

    cols = [TableColumn("all", spec.total)] if spec.total is not None else []
    for b in spec.by:
        levels = est.frame[b].dropna()
        for level in dict.fromkeys(group_text(v) for v in levels):
            cols.append(TableColumn(f"{b}={level}", level, _label(data, b), b, level))
    return tuple(cols)


def _domain_sizes(
    spec: TableSpec, data: Dataset, design: Design, columns: Sequence[TableColumn]
) -> dict[str, tuple[float, float]]:
    """Return column key -> (rows in the column's domain, sum of their weights)."""
    import numpy as np
    import pandas as pd

    from wstats._cellfmt import group_text
    from wstats._expr import parse_expression

    w = data[design.weight].values
    keep = np.isfinite(w)
    if spec.where:
        expr = parse_expression(spec.where, list(data.columns), f"where in {spec.source}")
        values, reasons = expr.evaluate(data.columns, data.vocabulary, data.n_rows)
        keep &= (reasons == 0) & (values == 1.0)
    sizes = {"all": (float(keep.sum()), float(w[keep].sum()))}
    for b in spec.by:
        col = data[b]
        m = keep & col.valid
        frame = pd.DataFrame({"g": col.values[m], "w": w[m]})
        agg = frame.groupby("g", sort=False)["w"].agg(["size", "sum"])
        for value, row in agg.iterrows():
            text = group_text(col.value_labels.get(float(value), value))  # type: ignore[arg-type]
            sizes[f"{b}={text}"] = (float(row["size"]), float(row["sum"]))
    return {c.key: sizes.get(c.key, (0.0, 0.0)) for c in columns}


def _methods(spec: TableSpec, est: EstimateTable, codebook: Codebook | None) -> str:
    """Write the methods paragraph from what the estimates used."""
    from wstats._methods import methods_paragraph

    whole = est.frame[[all(_is_na(r.get(b)) for b in spec.by)
                       for r in _records(est.frame)]]
    first = whole.drop_duplicates("variable")
    totals: dict[str, int] = {}
    rates = []
    for rec in _records(first):
        reasons = {k: int(v) for k, v in dict(rec["reasons"] or {}).items()}
        for k, v in reasons.items():
            totals[k] = totals.get(k, 0) + v
        nonresp = sum(v for k, v in reasons.items() if k not in (*NOT_ASKED, "valid"))
        asked = int(rec["n"]) + nonresp
        if asked:
            rates.append(nonresp / asked)
    return methods_paragraph(
        est.design, est.settings, totals, (min(rates), max(rates)) if rates else None,
        spec.data.name, spec.reliability, recodes=_recodes(spec, codebook),
        reason_descriptions=dict(codebook.reasons) if codebook else None,
    )


def _records(frame: pd.DataFrame) -> list[dict[str, Any]]:
    """Return the rows of a frame as dicts keyed by column name."""
    return [{str(k): v for k, v in r.items()} for r in frame.to_dict(orient="records")]


def _is_na(v: Any) -> bool:
    """Tell whether *v* is None or NaN."""
    return v is None or (isinstance(v, float) and math.isnan(v))


def _recodes(spec: TableSpec, codebook: Codebook | None) -> list[str]:
    """Return the codebook's value substitutions for the rows, e.g. ``EXER: 888 → 0``."""
    if codebook is None:
        return []
    out = []
    for name in dict.fromkeys(r.variable for r in spec.rows):
        if name not in codebook.variables:
            continue
        for code, rule in sorted(codebook.codes_for(name, None).numeric.items()):
            if rule.reason is None and rule.value is not None:
                out.append(f"{name}: {code:g} → {rule.value:g}")
    return out


_STAT_WORDS = {"mean": "mean", "total": "total", "proportion": "%", "quantile": "quantile"}
_FIELD_WORDS = {"est": "estimate", "se": "SE", "lo": "lower", "hi": "upper", "pct": "percent",
                "n": "n", "cv": "CV", "deff": "design effect"}


class _Layout:
    """Lays out the table lines (sections, level rows) and formats their cells."""

    def __init__(self, spec: TableSpec, est: EstimateTable, columns: Sequence[TableColumn],
                 data: Dataset) -> None:
        from wstats._cellfmt import FlagNotes

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

        from wstats._cellfmt import fmt_count

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
            name = f"{label}, {'median' if stat == 'quantile' and row.p == 0.5 else word}"
            return [self._line(name, "data", {**base, "level": None}, stat, lvl, row)]
        head = {"label": f"{label}, %", "kind": "section", **base, "level": None}
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
        from wstats._cellfmt import cell_text, with_marks

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
        scale = 100.0 if stat == "proportion" and self.spec.percent else 1.0
        return with_marks(cell_text(template, rec, decimals=decimals, se_decimals=se_decimals,
                                    scale=scale), marks), value

    def _statistic(self, variable: str) -> str:
        """Return the statistic the estimator chose for a row without one."""
        stats = [k[1] for k in self.index if k[0] == variable]
        return stats[0] if stats else "mean"

    def _levels(self, i: int, row: RowSpec) -> list[str]:
        """Return the level labels to show, in estimate order, filtered by ``levels``."""
        from wstats._cellfmt import group_text

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


def _level_key(rec: Mapping[str, Any]) -> str:
    """Return the level part of an index key: category label, quantile p, or ''."""
    if rec["statistic"] == "quantile":
        return repr(float(rec["p"]))
    return "" if _is_na(rec.get("level")) else str(rec["level"])
