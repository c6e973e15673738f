"""Publication tables: a table spec -> formatted cells, sample sizes, notes, methods, provenance.

:func:`build_table` reads only the columns the spec needs, estimates through
:func:`wstats.estimate` (whole population, then once per grouping variable), formats every
cell (``wstats.reports.cells``: the one place numbers become text) and adds the unweighted n
and weighted N rows, footnotes, a methods paragraph and provenance.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from wstats.decoding.reasons import NOT_ASKED
from wstats.errors import AnalysisError, did_you_mean
from wstats.readers.display import as_html, as_text
from wstats.reports.table_layout import TableColumn, _is_na, _label, _Layout, _records
from wstats.reports.table_specs import STATISTICS, RowSpec, TableSpec, load_table_spec
from wstats.reports.table_tests import table_methods_sentences, table_p_values

if TYPE_CHECKING:
    import pandas as pd

    from wstats.decoding.codebook import Codebook
    from wstats.decoding.columns import Dataset
    from wstats.design.declared import Design
    from wstats.estimation.results import EstimateTable

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
    provenance : see :func:`wstats.reports.provenance.provenance`.
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

    def __repr__(self) -> str:
        """Show the table as the terminal does (methods paragraph below)."""
        return as_text(self, f"PublicationTable({self.title!r}, {len(self.cells)} rows)")

    def _repr_html_(self) -> str | None:
        """Show the table as the ``--format html`` renderer does (notebooks)."""
        return as_html(self)


def build_table(
    spec: TableSpec | str | Path, *, progress: bool = False, time: bool | str = True,
    data: Dataset | None = None,
) -> PublicationTable:
    """Build a publication table from a spec.

    Parameters
    ----------
    spec : a TableSpec, or the path of a spec file (read with :func:`load_table_spec`).
    progress : show a progress bar while the data file is read.
    time : passed to :func:`wstats.reports.provenance.provenance` (False for reproducible output).
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
    from wstats.decoding.load import read
    from wstats.reports.provenance import provenance

    if not isinstance(spec, TableSpec):
        spec = load_table_spec(spec)
    codebook = _codebook(spec)
    design = _design(spec, codebook)
    _check_variables(spec, codebook)
    if data is None:
        data = read(list(spec.files) or spec.data, columns=_needed(spec, design),
                    codebook=codebook,
                    progress=progress)
    estimates = _estimate_all(spec, data, design)
    columns = _columns(spec, estimates, data)
    p_values = table_p_values(spec, data, design) if spec.p_value else {}
    layout = _Layout(spec, estimates, columns, data, p_values)
    sizes = _domain_sizes(spec, data, design, columns)
    cells, numbers = layout.frames(sizes)
    return PublicationTable(
        title=spec.title, cells=cells, numbers=numbers, columns=columns, estimates=estimates,
        footnotes=tuple(layout.footnotes()), methods=_methods(spec, estimates, codebook),
        provenance=provenance([*(spec.files or (spec.data,)), spec.source], spec.codebook,
                              estimates.design,
                              f"wstats table {spec.source.name}", time=time),
        outputs=spec.outputs, spec=spec,
    )


def _codebook(spec: TableSpec) -> Codebook | None:
    """Load the spec's codebook, if any."""
    if spec.codebook is None:
        return None
    from wstats.decoding.codebook import load_codebook

    return load_codebook(spec.codebook)


def _design(spec: TableSpec, codebook: Codebook | None) -> Design:
    """Return the Design: the spec's [design] over the codebook's [design]."""
    from wstats.reports.table_specs import design_over_codebook

    return design_over_codebook(spec.source, codebook, spec.design)


def _check_variables(spec: TableSpec, codebook: Codebook | None) -> None:
    """Fail with the spec key when a row or grouping variable is nowhere to be found."""
    from wstats.readers.dispatch import file_columns

    known = {c for f in (spec.files or (spec.data,)) for c in file_columns(f)} | set(
        codebook.derived if codebook else ()) | ({"_file"} if spec.files else set())
    named = [(f"rows[{i}].variable", r.variable) for i, r in enumerate(spec.rows)]
    named += [(f"columns.by[{i}]", b) for i, b in enumerate(spec.by)]
    for key, name in named:
        if name not in known:
            raise AnalysisError(f"{spec.source}: {key}: '{name}' is not a column of "
                                f"{spec.data.name} nor a derived variable"
                                f"{did_you_mean(name, known)}")


def table_variables(spec: TableSpec) -> list[str]:
    """Return the variables a table spec needs: rows, groups and the where-condition's inputs."""
    from wstats.decoding.expressions import expression_names

    names = [r.variable for r in spec.rows] + list(spec.by)
    names += [r.age_adjust for r in spec.rows if r.age_adjust]
    names += expression_names(spec.where, f"where in {spec.source}") if spec.where else []
    return list(dict.fromkeys(names))


def _needed(spec: TableSpec, design: Design) -> list[str]:
    """Return the variables to read: the table's variables and the design columns."""
    return list(dict.fromkeys([*table_variables(spec), *design.columns()]))


def _estimate_all(spec: TableSpec, data: Dataset, design: Design) -> EstimateTable:
    """Estimate every row for the whole population and per grouping variable; stack them."""
    import pandas as pd

    from wstats.estimation.estimate import estimate
    from wstats.estimation.reliability import STANDARDS
    from wstats.estimation.results import EstimateTable

    groups: dict[tuple[Any, ...], list[str]] = {}
    for r in spec.rows:
        groups.setdefault((r.statistic, r.p if r.statistic == "quantile" else 0.5,
                           r.age_adjust, r.standard), []).append(r.variable)
    frames, first = [], None
    for by in [(), *((b,) for b in spec.by)]:
        for (stat, p, age, std), variables in groups.items():
            t = estimate(data, design, list(dict.fromkeys(variables)), statistics=stat, by=by,
                         where=spec.where, categorical=variables if stat == "proportion" else (),
                         quantiles=(p,), level=spec.level, proportion_ci=spec.proportion_ci,
                         reliability=STANDARDS[spec.reliability], age_adjust=age, standard=std)
            frame = t.frame
            if by:  # keep only the rows of this grouping's levels
                frame = frame[frame[by[0]].notna()]
            if age is not None:  # the adjusted rows only: crude rows come from their own spec
                frame = frame[frame["standard"].notna()]
            frames.append(frame)
            first = first or t
    assert first is not None  # spec.rows is never empty
    stacked = pd.concat(frames, ignore_index=True)
    cols = [c for c in stacked.columns if c not in spec.by]
    at = cols.index("p") + 1
    stacked = stacked[[*cols[:at], *spec.by, *cols[at:]]]
    if "standard" in stacked.columns:
        stacked["standard"] = stacked["standard"].astype(object).where(
            stacked["standard"].notna(), None)
    settings = {**first.settings, "level": spec.level, "proportion_ci": spec.proportion_ci,
                "domains": list(spec.by)}
    return EstimateTable.from_frame(stacked, by=spec.by, level=spec.level, design=first.design,
                         settings=settings)


def _columns(spec: TableSpec, est: EstimateTable, data: Dataset) -> tuple[TableColumn, ...]:
    """Return the whole-population column, then each group level in estimate order."""
    from wstats.reports.cells import group_text

    cols = [TableColumn("all", spec.total)] if spec.total is not None else []
    for b in spec.by:
        levels = est.frame[b].dropna()
        for level in dict.fromkeys(group_text(v) for v in levels):
            cols.append(TableColumn(f"{b}={level}", level, _label(data, b), b, level))
        if spec.p_value:
            cols.append(TableColumn(f"p:{b}", "p", _label(data, b), b, None))
    return tuple(cols)


def _domain_sizes(
    spec: TableSpec, data: Dataset, design: Design, columns: Sequence[TableColumn]
) -> dict[str, tuple[float, float]]:
    """Return column key -> (rows in the column's domain, sum of their weights)."""
    import numpy as np
    import pandas as pd

    from wstats.decoding.expressions import parse_expression
    from wstats.reports.cells import group_text

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
    nan = (float("nan"), float("nan"))  # a p-value column has no domain
    return {c.key: nan if c.key.startswith("p:") else sizes.get(c.key, (0.0, 0.0))
            for c in columns}


def _methods(spec: TableSpec, est: EstimateTable, codebook: Codebook | None) -> str:
    """Write the methods paragraph from what the estimates used."""
    from wstats.reports.methods import codebook_recodes, methods_paragraph

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
    # the table's own sentences name every standard its rows use (table_methods_sentences)
    settings = {k: v for k, v in est.settings.items()
                if k not in ("standard", "standard_source", "age_adjust")}
    text = methods_paragraph(
        est.design, settings, totals, (min(rates), max(rates)) if rates else None,
        spec.data.name, spec.reliability,
        recodes=codebook_recodes(codebook, [r.variable for r in spec.rows]),
    )
    return " ".join([text, *table_methods_sentences(spec)])


