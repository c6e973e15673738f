"""Table specs: the TOML file (our own format) describing a publication table.

The spec names the data, codebook and design, the rows (variables; categorical ones expand to
their levels), the columns (whole population and the levels of grouping variables) and how
cells look. ``docs/tables.md`` documents every key with a complete example. Every mistake is
one :class:`~wstats.errors.AnalysisError` line naming the spec file and the key.
"""

from __future__ import annotations

import tomllib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, fields
from pathlib import Path
from typing import TYPE_CHECKING, Any

from wstats.errors import AnalysisError, did_you_mean

if TYPE_CHECKING:
    from wstats.decoding.codebook import Codebook
    from wstats.design.declared import Design
    from wstats.estimation.standards import Standard

__all__ = ["STATISTICS", "RowSpec", "TableSpec", "design_over_codebook", "load_table_spec"]

#: Statistics a table row can show.
STATISTICS: tuple[str, ...] = ("mean", "total", "proportion", "quantile")
_DEFAULT_STYLES = {"mean": "{est} ({se})", "total": "{est} ({se})", "quantile": "{est} ({se})",
                   "proportion": "{pct} ({lo}–{hi})"}
_TOP = ("title", "data", "codebook", "where", "notes", "reliability", "design", "columns",
        "rows", "cells", "intervals", "output")
_ROW = ("variable", "statistic", "label", "levels", "p", "style", "decimals", "age_adjust",
        "standard")
_COLUMNS = ("total", "by", "p_value")
_CELLS = ("mean", "total", "proportion", "quantile", "decimals", "se_decimals", "percent",
          "suppressed")
_INTERVALS = ("level", "proportion")
_OUTPUT = ("files",)
_SUFFIXES = {".md": "markdown", ".tex": "latex", ".html": "html", ".htm": "html",
             ".csv": "csv", ".json": "json", ".xlsx": "xlsx", ".txt": "terminal",
             ".docx": "docx"}


@dataclass(frozen=True)
class RowSpec:
    """One ``[[rows]]`` entry: a variable and how to show it.

    ``statistic`` None takes the default for the variable's kind (mean for numbers,
    proportion for categories); ``levels`` None shows every level of a categorical variable.
    """

    variable: str
    statistic: str | None = None
    label: str | None = None
    levels: tuple[str, ...] | None = None
    p: float = 0.5
    style: str | None = None
    decimals: int | None = None
    age_adjust: str | None = None
    standard: Standard | None = None


@dataclass(frozen=True)
class TableSpec:
    """A validated table spec; paths are resolved against the spec file's folder.

    Attributes
    ----------
    source : the spec file.
    title : table title.
    data, codebook : data file and codebook (None: the file's own declarations only).
    design : design settings (``Design`` field -> value), codebook ``[design]`` underneath.
    where : expression restricting the table to a subpopulation, or None.
    rows : row specs in order.
    by : grouping variables; each adds one column per level.
    total : header of the whole-population column, or None to leave it out.
    styles : statistic -> cell template (placeholders ``{est} {se} {lo} {hi} {pct} {n}
        {cv} {deff}``).
    decimals, se_decimals : decimals of estimates/limits and of standard errors.
    percent : show proportions (and their SE and limits) in percent.
    suppressed : text of a suppressed cell.
    level : confidence level; proportion_ci : interval method for proportions.
    reliability : name of the reliability standard (``wstats.estimation.reliability.STANDARDS``).
    notes : extra footnotes, printed last.
    outputs : ``(path, format)`` pairs to write.
    p_value : add a p-value column after each grouping variable's columns (Rao-Scott for a
        categorical row, the adjusted Wald F for a mean).
    files : every data file when ``data`` names several (a list or a glob: pooled, each file
        one period), else empty; ``data`` is then the first.
    """

    source: Path
    title: str
    data: Path
    codebook: Path | None
    design: Mapping[str, Any]
    where: str | None
    rows: tuple[RowSpec, ...]
    by: tuple[str, ...] = ()
    total: str | None = "All"
    styles: Mapping[str, str] = field(default_factory=lambda: dict(_DEFAULT_STYLES))
    decimals: int = 1
    se_decimals: int = 2
    percent: bool = True
    suppressed: str = "—"
    level: float = 0.95
    proportion_ci: str = "korn-graubard"
    reliability: str = "nchs-2017"
    notes: tuple[str, ...] = ()
    files: tuple[Path, ...] = ()
    outputs: tuple[tuple[Path, str], ...] = ()
    p_value: bool = False


# ------------------------------------------------------------------ reading the spec

def load_table_spec(path: str | Path) -> TableSpec:
    """Read and check a table spec.

    Parameters
    ----------
    path : the spec TOML file (format: ``docs/tables.md``).

    Returns
    -------
    TableSpec

    Raises
    ------
    AnalysisError
        One line naming the spec file and the key that is wrong, with a suggestion.

    Examples
    --------
    >>> spec = load_table_spec("table1.toml")  # doctest: +SKIP
    >>> [r.variable for r in spec.rows]  # doctest: +SKIP
    """
    src = Path(path)
    try:
        doc = tomllib.loads(src.read_text(encoding="utf-8"))
    except OSError as exc:
        raise AnalysisError(f"table spec {src} cannot be read: {exc.strerror or exc}; "
                            "check the path") from exc
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        msg = str(exc).replace("\n", " ")
        raise AnalysisError(f"{src}: not valid TOML: {msg}") from exc
    return _Spec(src, doc).build()


class _Spec:
    """Checks one parsed spec document key by key, failing with the key's name."""

    #: where relative paths start, in messages
    RELATIVE_TO = "the spec"

    def __init__(self, source: Path, doc: Mapping[str, Any]) -> None:
        self.source, self.doc, self.base = source, doc, source.parent
        self.keys(doc, _TOP, "")

    def fail(self, key: str, message: str) -> AnalysisError:
        """Return the one-line error for *key*."""
        return AnalysisError(f"{self.source}: {key}: {message}")

    def keys(self, table: Mapping[str, Any], allowed: Sequence[str], where: str) -> None:
        """Refuse keys that are not in *allowed*, suggesting the closest."""
        for key in table:
            if key not in allowed:
                raise self.fail(f"{where}{key}", f"unknown key; allowed: {', '.join(allowed)}"
                                f"{did_you_mean(key, allowed)}")

    def table(self, key: str) -> dict[str, Any]:
        """Return the sub-table *key* (empty when absent)."""
        value = self.doc.get(key, {})
        if not isinstance(value, dict):
            raise self.fail(key, f"must be a table: write [{key}] on its own line")
        return value

    def text(self, value: Any, key: str) -> str:
        """Return *value* as a non-empty string."""
        if not isinstance(value, str) or not value.strip():
            raise self.fail(key, f"must be a non-empty text in quotes, got {value!r}")
        return value

    def number(self, value: Any, key: str, low: float, high: float) -> float:
        """Return *value* as a number in [low, high]."""
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not (
                low <= value <= high):
            raise self.fail(key, f"must be a number from {low:g} to {high:g}, got {value!r}")
        return float(value)

    def path(self, key: str, required: bool) -> Path | None:
        """Return a path relative to the spec folder; check that it exists."""
        if key not in self.doc:
            if required:
                raise self.fail(key, "missing; name the file, e.g. data = \"survey.xpt\"")
            return None
        p = self.base / self.text(self.doc[key], key)
        if not p.is_file():
            raise self.fail(key, f"file {p} does not exist; paths are relative to the spec")
        return p

    def data_files(self) -> list[Path]:
        """Return the data files: one path, a glob or a list of paths (relative to the file)."""
        from wstats.reports.spec_inputs import data_files

        return data_files(self)

    def pooled_files(self) -> tuple[Path, ...]:
        """Return the data files when ``data`` names several, else an empty tuple."""
        files = self.data_files()
        return tuple(files) if len(files) > 1 else ()

    def build(self) -> TableSpec:
        """Check every part and assemble the TableSpec."""
        cells, intervals = self.table("cells"), self.table("intervals")
        self.keys(cells, _CELLS, "cells.")
        self.keys(intervals, _INTERVALS, "intervals.")
        decimals = int(self.number(cells.get("decimals", 1), "cells.decimals", 0, 10))
        return TableSpec(
            source=self.source, title=self.text(self.doc.get("title", "Table"), "title"),
            data=self.data_files()[0], files=self.pooled_files(),
            codebook=self.path("codebook", False),
            design=self.design(), rows=self.rows(),
            where=self.text(self.doc["where"], "where") if "where" in self.doc else None,
            **self.columns(), styles=self.styles(cells), decimals=decimals,
            se_decimals=int(self.number(cells.get("se_decimals", decimals + 1),
                                        "cells.se_decimals", 0, 10)),
            percent=self.flag(cells.get("percent", True), "cells.percent"),
            suppressed=self.text(cells.get("suppressed", "—"), "cells.suppressed"),
            level=self.number(intervals.get("level", 0.95), "intervals.level", 0.5, 0.999),
            proportion_ci=self.choice(intervals.get("proportion", "korn-graubard"),
                                      "intervals.proportion", _interval_methods()),
            reliability=self.choice(self.doc.get("reliability", "nchs-2017"), "reliability",
                                    _standards()),
            notes=tuple(self.texts(self.doc.get("notes", []), "notes")),
            outputs=self.outputs(),
        )

    def flag(self, value: Any, key: str) -> bool:
        """Return *value* as a boolean."""
        if not isinstance(value, bool):
            raise self.fail(key, f"must be true or false, got {value!r}")
        return value

    def choice(self, value: Any, key: str, allowed: Sequence[str]) -> str:
        """Return *value* if it is one of *allowed*."""
        if value not in allowed:
            raise self.fail(key, f"'{value}' is not one of {', '.join(allowed)}"
                            f"{did_you_mean(str(value), allowed)}")
        return str(value)

    def texts(self, value: Any, key: str) -> list[str]:
        """Return *value* as a list of strings (a single string is a list of one)."""
        items = [value] if isinstance(value, str) else value
        if not isinstance(items, list):
            raise self.fail(key, "must be a list of texts, e.g. [\"A\", \"B\"]")
        return [self.text(v, f"{key}[{i}]") for i, v in enumerate(items)]

    def design(self) -> dict[str, Any]:
        """Return the [design] table, its keys checked against the Design fields."""
        from wstats.design.declared import Design

        design = self.table("design")
        self.keys(design, [f.name for f in fields(Design) if f.name != "extra"], "design.")
        return design

    def columns(self) -> dict[str, Any]:
        """Return ``by`` and ``total`` from [columns]."""
        cols = self.table("columns")
        self.keys(cols, _COLUMNS, "columns.")
        p_value = self.flag(cols.get("p_value", False), "columns.p_value")
        total = cols.get("total", "All")
        if total is not False:
            total = self.text(total, "columns.total")
        by = tuple(self.texts(cols.get("by", []), "columns.by"))
        if total is False and not by:
            raise self.fail("columns.total", "false leaves the table without columns; "
                            "keep the total or add columns.by")
        if p_value and not by:
            raise self.fail("columns.p_value", "a p-value compares the columns.by groups; "
                            "add columns.by")
        return {"by": by, "total": None if total is False else total, "p_value": p_value}

    def rows(self) -> tuple[RowSpec, ...]:
        """Return the row specs; a plain string is a variable with default settings."""
        rows = self.doc.get("rows")
        if not isinstance(rows, list) or not rows:
            raise self.fail("rows", "missing; list the variables, e.g. rows = [\"dm_age\"] "
                            "or [[rows]] tables")
        return tuple(self.row(r, f"rows[{i}]") for i, r in enumerate(rows))

    def row(self, item: Any, key: str) -> RowSpec:
        """Check one row entry."""
        if isinstance(item, str):
            return RowSpec(self.text(item, key))
        if not isinstance(item, dict):
            raise self.fail(key, "must be a variable name or a table with variable = ...")
        self.keys(item, _ROW, f"{key}.")
        stat = item.get("statistic")
        levels = item.get("levels")
        return RowSpec(
            variable=self.text(item.get("variable"), f"{key}.variable"),
            statistic=None if stat is None else self.choice(stat, f"{key}.statistic",
                                                            STATISTICS),
            label=None if "label" not in item else self.text(item["label"], f"{key}.label"),
            levels=None if levels is None else tuple(str(v) for v in self.list(levels, key)),
            p=self.number(item.get("p", 0.5), f"{key}.p", 0.0, 1.0),
            style=None if "style" not in item else self.template(item["style"], f"{key}.style",
                                                                 stat),
            decimals=None if "decimals" not in item else int(
                self.number(item["decimals"], f"{key}.decimals", 0, 10)),
            **self.age(item, key),
        )

    def age(self, item: Mapping[str, Any], key: str) -> dict[str, Any]:
        """Return ``age_adjust`` and ``standard`` of a row (both or neither)."""
        from wstats.errors import WstatsError
        from wstats.estimation.standards import load_standard, standard_from_mapping

        if ("age_adjust" in item) != ("standard" in item):
            raise self.fail(f"{key}.age_adjust", "give both age_adjust = \"AGEVAR\" and "
                            "standard = NAME, a .toml file or an inline table")
        if "age_adjust" not in item:
            return {}
        value = item["standard"]
        try:
            if isinstance(value, dict):
                std = standard_from_mapping(value, f"{self.source}: {key}.standard")
            else:
                text = self.text(value, f"{key}.standard")
                std = load_standard(str(self.base / text) if text.endswith(".toml") else text)
        except WstatsError as exc:
            raise self.fail(f"{key}.standard", str(exc)) from exc
        return {"age_adjust": self.text(item["age_adjust"], f"{key}.age_adjust"),
                "standard": std}

    def list(self, value: Any, key: str) -> list[Any]:
        """Return *value* as a non-empty list of level codes or labels."""
        if not isinstance(value, list) or not value:
            raise self.fail(f"{key}.levels", "must be a list of levels, e.g. [1, 2] or "
                            "[\"Yes\"]")
        return value

    def styles(self, cells: Mapping[str, Any]) -> dict[str, str]:
        """Return statistic -> template, defaults filled in."""
        out = dict(_DEFAULT_STYLES)
        for stat in STATISTICS:
            if stat in cells:
                out[stat] = self.template(cells[stat], f"cells.{stat}", stat)
        return out

    def template(self, value: Any, key: str, statistic: str | None) -> str:
        """Check a cell template's placeholders."""
        from wstats.reports.cells import CELL_FIELDS, template_fields

        text = self.text(value, key)
        try:
            names = template_fields(text)
        except ValueError as exc:
            raise self.fail(key, f"{exc}; e.g. \"{{est}} ({{se}})\"") from exc
        for name in names:
            if name not in CELL_FIELDS:
                raise self.fail(key, f"unknown placeholder {{{name}}}; use "
                                f"{', '.join('{' + f + '}' for f in CELL_FIELDS)}"
                                f"{did_you_mean(name, CELL_FIELDS)}")
            if name == "pct" and statistic not in (None, "proportion"):
                raise self.fail(key, "{pct} is for proportions; use {est} for a " + statistic)
        return text

    def outputs(self) -> tuple[tuple[Path, str], ...]:
        """Return the output files and their formats (from the suffix)."""
        out = self.table("output")
        self.keys(out, _OUTPUT, "output.")
        result = []
        for i, name in enumerate(self.texts(out.get("files", []), "output.files")):
            p = self.base / name
            fmt = _SUFFIXES.get(p.suffix.lower())
            if fmt is None:
                raise self.fail(f"output.files[{i}]", f"'{name}' has no known suffix; use "
                                f"{', '.join(_SUFFIXES)}")
            result.append((p, fmt))
        return tuple(result)


def _interval_methods() -> list[str]:
    """Return the proportion interval names the estimator accepts."""
    from wstats.estimation.intervals import PROPORTION_INTERVALS

    return list(PROPORTION_INTERVALS)


def _standards() -> list[str]:
    """Return the reliability standard names."""
    from wstats.estimation.reliability import STANDARDS

    return list(STANDARDS)


def design_over_codebook(source: Path, codebook: Codebook | None,
                         given: Mapping[str, Any]) -> Design:
    """Return the Design of a spec or analysis file: its ``[design]`` over the codebook's.

    Raises AnalysisError naming *source* for an unknown key or a missing weight.
    """
    from wstats.design.declared import Design

    merged: dict[str, Any] = {**(getattr(codebook, "design", None) or {}), **given}
    return Design.from_table(merged, f"{source}: design.", AnalysisError,
                             'add [design] weight = "COLUMN" (or set it in the codebook\'s '
                             "[design] table)")
