"""Analysis files: one TOML file (our own format) naming the data and every output wanted.

:func:`load_analysis` checks the file key by key (no data read); :func:`run_analysis` reads the
data ONCE with only the columns every output needs, computes estimates, nonresponse tables,
bounds, publication tables, the methods paragraph and charts, renders them through the
registries of :mod:`wstats.render`, and writes every output atomically. All outputs are
checked before any is written, and a run that fails part-way removes what it created, so a
failed run leaves nothing behind. The format is documented in ``docs/analysis-file.md``.
"""

from __future__ import annotations

import tomllib
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from wstats._tablespec import _Spec
from wstats.errors import AnalysisError, OutputError, WstatsError, did_you_mean

if TYPE_CHECKING:
    from wstats._codebook import Codebook
    from wstats._column import Dataset
    from wstats._design import Design

__all__ = ["JOB_KEYS", "Analysis", "Job", "Output", "execute_analysis", "load_analysis",
           "run_analysis"]

_TOP = ("data", "codebook", "title", "design", "defaults", "estimates", "nonresponse",
        "bounds", "table", "methods", "plot")
_OUT = ("output", "format")
_DOMAIN = ("variables", "by", "where", "level")
#: table name -> allowed keys of each entry
JOB_KEYS: dict[str, tuple[str, ...]] = {
    "estimates": ("name", *_DOMAIN, "statistics", "categorical", "ratios", "quantiles",
                  "proportion_ci", "reliability", *_OUT),
    "nonresponse": ("name", *_DOMAIN, "count_invalid", "sort_worst", "not_asked", *_OUT),
    "bounds": ("name", *_DOMAIN, "reasons", *_OUT),
    "table": ("spec", "title", "rows", "columns", "where", "cells", "intervals", "notes",
              "reliability", *_OUT),
    "methods": ("estimates", *_OUT),
    "plot": ("kind", "from", "output", "required"),
}
_DEFAULTS = ("by", "where", "level", "proportion_ci", "reliability")
_METHODS_SUFFIX = {".txt": "text", ".md": "markdown", ".tex": "latex"}
_BOUNDS_SUFFIX = {".json": "json", ".csv": "csv"}


@dataclass(frozen=True)
class Output:
    """One file to write: its path (resolved), format, and the key that asked for it."""

    path: Path
    fmt: str
    key: str


@dataclass(frozen=True)
class Job:
    """One ``[[estimates]]``/``[[nonresponse]]``/``[[bounds]]``/``[[table]]``/``[methods]``/
    ``[[plot]]`` entry, checked; ``options`` holds its keys with defaults applied."""

    kind: str
    key: str
    name: str
    options: Mapping[str, Any]
    outputs: tuple[Output, ...]


@dataclass(frozen=True)
class Analysis:
    """A checked analysis file; paths are resolved against the file's folder.

    Attributes
    ----------
    source : the analysis file.
    data : the survey data file.
    codebook : the codebook file, or None.
    design : design settings given in the file (``Design`` field -> value); the codebook's
        ``[design]`` lies underneath.
    jobs : every output-producing entry: estimates, nonresponse, bounds, table, methods,
        plot (the order they are computed and written in), each kind in file order.
    """

    source: Path
    data: Path
    codebook: Path | None
    design: Mapping[str, Any]
    jobs: tuple[Job, ...] = field(default_factory=tuple)

    def outputs(self) -> list[Output]:
        """Return every output of every job, in order."""
        return [o for job in self.jobs for o in job.outputs]


def load_analysis(path: str | Path) -> Analysis:
    """Read and check an analysis file (nothing is read from the data file).

    Parameters
    ----------
    path : the analysis TOML file (format: ``docs/analysis-file.md``).

    Returns
    -------
    Analysis

    Raises
    ------
    AnalysisError
        One line naming the file and the key that is wrong.

    Examples
    --------
    >>> a = load_analysis("demo/tbchs_analysis.toml")  # doctest: +SKIP
    >>> [o.path.name for o in a.outputs()][:2]  # doctest: +SKIP
    """
    src = Path(path)
    try:
        doc = tomllib.loads(src.read_text(encoding="utf-8"))
    except OSError as exc:
        raise AnalysisError(f"analysis file {src} cannot be read: {exc.strerror or exc}; "
                            "check the path") from exc
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise AnalysisError(f"{src}: not valid TOML: {str(exc).replace(chr(10), ' ')}") from exc
    return _Parser(src, doc).analysis()


def run_analysis(path: str | Path, overwrite: bool = False, progress: bool = False) -> list[Path]:
    """Produce every output an analysis file names.

    Parameters
    ----------
    path : the analysis TOML file.
    overwrite : replace outputs that exist (otherwise an existing output stops the run
        before anything is written).
    progress : show a progress bar while the data file is read.

    Returns
    -------
    list of Path
        The files written, in the order of the analysis file.

    Raises
    ------
    AnalysisError
        The analysis file is wrong (unknown key or format, missing variable, ...).
    OutputError
        An output exists (without *overwrite*) or cannot be written; nothing is left behind.
    WstatsError
        Whatever reading, decoding or estimation raises.

    Examples
    --------
    >>> run_analysis("demo/tbchs_analysis.toml")  # doctest: +SKIP
    [PosixPath('demo/tbchs_estimates.json'), ...]
    """
    return execute_analysis(path, overwrite, progress)[0]


def execute_analysis(path: str | Path, overwrite: bool = False, progress: bool = False
                     ) -> tuple[list[Path], dict[tuple[str, str], Any]]:
    """Run an analysis file; return the files written and the results by (kind, entry name).

    The results are the objects behind the outputs (EstimateTable, NonresponseTable,
    PublicationTable, the methods text), for a caller that also wants to show them.
    """
    analysis = load_analysis(path)
    _check_outputs(analysis, overwrite)
    _check_plot_support(analysis)
    codebook = _codebook(analysis)
    design = _design(analysis, codebook)
    data = _read(analysis, codebook, design, progress)
    runner = _Runner(analysis, codebook, design, data)
    rendered = runner.render_all()
    _check_outputs(analysis, overwrite, [o for o, _ in rendered])
    return _write_all(rendered, overwrite), runner.results


# ------------------------------------------------------------------ checking the file

class _Parser(_Spec):
    """Checks one parsed analysis document key by key, failing with the key's name.

    The generic checks (``fail``, ``keys``, ``text``, ``flag``, ``choice``) are the table-spec
    checker's, so both files report mistakes in the same words.
    """

    def __init__(self, source: Path, doc: Mapping[str, Any]) -> None:
        self.source, self.doc, self.base = source, doc, source.parent
        self.keys(doc, _TOP, "")
        self.defaults = self.subtable(doc.get("defaults", {}), "defaults")
        self.keys(self.defaults, _DEFAULTS, "defaults.")

    def subtable(self, value: Any, key: str) -> dict[str, Any]:
        """Return *value* if it is a table."""
        if not isinstance(value, dict):
            raise self.fail(key, f"must be a table: write [{key}] on its own line")
        return value

    def names(self, value: Any, key: str, empty: bool = True) -> tuple[str, ...]:
        """Return a string or a list of strings as a tuple."""
        items = [value] if isinstance(value, str) else value
        if not isinstance(items, list) or (not empty and not items):
            raise self.fail(key, "must be a list of names, e.g. [\"A\", \"B\"]")
        return tuple(self.text(v, f"{key}[{i}]") for i, v in enumerate(items))

    def level(self, value: Any, key: str) -> float:
        """Return a confidence level strictly between 0 and 1."""
        if isinstance(value, bool) or not isinstance(value, int | float) or not 0 < value < 1:
            raise self.fail(key, f"must be a number between 0 and 1 (e.g. 0.95), got {value!r}")
        return float(value)

    def input_path(self, key: str) -> Path:
        """Return an input path relative to the analysis folder; check that it exists."""
        p = self.base / self.text(self.doc[key], key)
        if not p.is_file():
            raise self.fail(key, f"file {p} does not exist; paths are relative to the "
                            "analysis file's folder")
        return p

    def analysis(self) -> Analysis:
        """Check every part and assemble the Analysis."""
        if "data" not in self.doc:
            raise self.fail("data", "missing; name the survey file, e.g. data = \"survey.xpt\"")
        if "title" in self.doc:
            self.text(self.doc["title"], "title")
        jobs: list[Job] = []
        for kind in ("estimates", "nonresponse", "bounds", "table", "methods", "plot"):
            entries = self.doc.get(kind, [])
            if kind == "methods":
                entries = [self.subtable(entries, kind)] if kind in self.doc else []
            elif not isinstance(entries, list):
                raise self.fail(kind, f"write each entry as a [[{kind}]] table")
            for i, entry in enumerate(entries):
                key = f"[{kind}]" if kind == "methods" else f"[[{kind}]] #{i + 1}"
                jobs.append(self.job(kind, key, self.subtable(entry, key), i))
        if not jobs:
            raise self.fail("estimates", "the file asks for no output; add an [[estimates]] "
                            "(or [[nonresponse]], [[table]], ...) entry")
        seen: set[tuple[str, str]] = set()
        for job in jobs:
            if (job.kind, job.name) in seen:
                raise self.fail(f"{job.key} name", f"'{job.name}' names two [[{job.kind}]] "
                                "entries; give each its own name")
            seen.add((job.kind, job.name))
            self.check_source(job, jobs)
        return Analysis(self.source, self.input_path("data"),
                        self.input_path("codebook") if "codebook" in self.doc else None,
                        self.subtable(self.doc.get("design", {}), "design"), tuple(jobs))

    def check_source(self, job: Job, jobs: Sequence[Job]) -> None:
        """Check that a [methods] or [[plot]] entry names an entry that exists."""
        if job.kind not in ("methods", "plot"):
            return
        kind = "nonresponse" if job.options.get("kind") == "reasons" else "estimates"
        field_ = "estimates" if job.kind == "methods" else "from"
        wanted = job.options.get(field_)
        names = [j.name for j in jobs if j.kind == kind]
        if not names or (wanted is not None and wanted not in names):
            what = f" named '{wanted}'" if wanted else ""
            choices = f"; entries: {', '.join(names)}" if names else f"; add a [[{kind}]] entry"
            raise self.fail(f"{job.key} {field_}", f"no [[{kind}]] entry{what}{choices}"
                            f"{did_you_mean(wanted or '', names)}")

    def job(self, kind: str, key: str, entry: Mapping[str, Any], i: int) -> Job:
        """Check one entry of *kind*."""
        self.keys(entry, JOB_KEYS[kind], f"{key} ")
        name = self.text(entry.get("name", f"{kind}{i + 1}"), f"{key} name")
        if kind == "table":
            return self.table_job(key, name, entry)
        opts: dict[str, Any] = {}
        if kind in ("estimates", "nonresponse", "bounds"):
            opts = self.domain_options(kind, key, entry)
        elif kind == "methods":
            if "estimates" in entry:
                opts["estimates"] = self.text(entry["estimates"], f"{key} estimates")
        else:
            opts = self.plot_options(key, entry)
        return Job(kind, key, name, opts, self.entry_outputs(kind, key, entry))

    def domain_options(self, kind: str, key: str, entry: Mapping[str, Any]) -> dict[str, Any]:
        """Return the options of an estimates / nonresponse / bounds entry, defaults applied."""
        d = self.defaults
        if "variables" not in entry:
            raise self.fail(f"{key} variables", "missing; list the variables, e.g. "
                            "variables = [\"AGE_YRS\"]")
        opts: dict[str, Any] = {
            "variables": self.names(entry["variables"], f"{key} variables", empty=False),
            "by": self.names(entry.get("by", d.get("by", [])), f"{key} by"),
            "level": self.level(entry.get("level", d.get("level", 0.95)), f"{key} level"),
        }
        where = entry.get("where", d.get("where"))
        opts["where"] = None if where is None else self.text(where, f"{key} where")
        if kind == "estimates":
            opts.update(self.estimate_options(key, entry))
        elif kind == "nonresponse":
            opts["count_invalid"] = self.flag(entry.get("count_invalid", True),
                                              f"{key} count_invalid")
            opts["sort_worst"] = self.flag(entry.get("sort_worst", False), f"{key} sort_worst")
            opts["not_asked"] = self.names(entry.get("not_asked", ["skipped"]),
                                           f"{key} not_asked")
        else:
            opts["reasons"] = self.names(entry.get("reasons", ["dont_know", "refused"]),
                                         f"{key} reasons", empty=False)
        return opts

    def estimate_options(self, key: str, entry: Mapping[str, Any]) -> dict[str, Any]:
        """Return the statistics, interval and reliability options of an estimates entry."""
        from wstats._intervals import PROPORTION_INTERVALS
        from wstats._reliability import STANDARDS

        d = self.defaults
        stats = self.names(entry.get("statistics", []), f"{key} statistics")
        for s in stats:
            self.choice(s, f"{key} statistics", ("mean", "total", "proportion", "ratio",
                                                 "quantile"))
        ratios = entry.get("ratios", [])
        if not isinstance(ratios, list) or not all(
                isinstance(r, list) and len(r) == 2 for r in ratios):
            raise self.fail(f"{key} ratios", "must be a list of [numerator, denominator] pairs")
        quantiles = entry.get("quantiles", [0.5])
        if not isinstance(quantiles, list) or not all(
                isinstance(q, int | float) and 0 <= q <= 1 for q in quantiles):
            raise self.fail(f"{key} quantiles", "must be a list of probabilities, e.g. [0.5]")
        return {
            "statistics": stats,
            "categorical": self.names(entry.get("categorical", []), f"{key} categorical"),
            "ratios": tuple(tuple(self.names(r, f"{key} ratios")) for r in ratios),
            "quantiles": tuple(float(q) for q in quantiles),
            "proportion_ci": self.choice(entry.get("proportion_ci", d.get(
                "proportion_ci", "korn-graubard")), f"{key} proportion_ci",
                list(PROPORTION_INTERVALS)),
            "reliability": self.choice(entry.get("reliability", d.get(
                "reliability", "nchs-2017")), f"{key} reliability", list(STANDARDS)),
        }

    def plot_options(self, key: str, entry: Mapping[str, Any]) -> dict[str, Any]:
        """Return kind, source entry and whether matplotlib is required."""
        from wstats._plots import PLOT_KINDS

        if "kind" not in entry:
            raise self.fail(f"{key} kind", f"missing; one of {', '.join(PLOT_KINDS)}")
        opts = {"kind": self.choice(entry["kind"], f"{key} kind", list(PLOT_KINDS)),
                "required": self.flag(entry.get("required", True), f"{key} required")}
        if "from" in entry:
            opts["from"] = self.text(entry["from"], f"{key} from")
        return opts

    def table_job(self, key: str, name: str, entry: Mapping[str, Any]) -> Job:
        """Check a [[table]] entry: a spec file, or the spec's keys inline."""
        from wstats._tablespec import load_table_spec

        if "spec" in entry:
            inline = sorted(set(entry) - {"spec", *_OUT})
            if inline:
                raise self.fail(f"{key} {inline[0]}", "give either spec = \"file.toml\" or the "
                                "table keys inline, not both")
            p = self.base / self.text(entry["spec"], f"{key} spec")
            if not p.is_file():
                raise self.fail(f"{key} spec", f"file {p} does not exist; paths are relative "
                                "to the analysis file's folder")
            spec = load_table_spec(p)
        else:
            doc = {k: v for k, v in entry.items() if k not in _OUT}
            doc.update({k: self.doc[k] for k in ("data", "codebook", "design") if k in self.doc})
            if "where" not in doc and "where" in self.defaults:
                doc["where"] = self.defaults["where"]
            spec = _Spec(self.source, doc).build()
        outputs = self.entry_outputs("table", key, entry) if "output" in entry else tuple(
            Output(p, fmt, f"{key} (spec output)") for p, fmt in spec.outputs)
        if not outputs:
            raise self.fail(f"{key} output", "missing; name the files, e.g. output = "
                            "[\"table1.md\", \"table1.tex\"]")
        return Job("table", key, name, {"spec": spec}, outputs)

    def entry_outputs(self, kind: str, key: str, entry: Mapping[str, Any]
                      ) -> tuple[Output, ...]:
        """Return the outputs of an entry, each with a format from ``format`` or its suffix."""
        if "output" not in entry:
            raise self.fail(f"{key} output", "missing; name the file(s), e.g. output = "
                            "\"results.json\"")
        paths = self.names(entry["output"], f"{key} output", empty=False)
        fmts = self.names(entry.get("format", []), f"{key} format")
        if fmts and len(fmts) != len(paths):
            raise self.fail(f"{key} format", f"gives {len(fmts)} formats for {len(paths)} "
                            "outputs; give one per output or leave it out (suffix decides)")
        suffixes, allowed = _formats(kind)
        out = []
        for i, name in enumerate(paths):
            p = self.base / name
            okey = f"{key} output[{i}]"
            fmt = fmts[i] if fmts else suffixes.get(p.suffix.lower())
            if fmt is None:
                raise self.fail(okey, f"cannot tell the format of '{name}' from its suffix; "
                                f"use {', '.join(suffixes)} or add format = \"...\"")
            fmt = "terminal" if fmt == "text" and "terminal" in allowed else fmt
            out.append(Output(p, self.choice(fmt, f"{key} format", allowed), okey))
        return tuple(out)


def _formats(kind: str) -> tuple[dict[str, str], list[str]]:
    """Return (suffix -> format, allowed formats) for outputs of *kind*."""
    if kind == "methods":
        return _METHODS_SUFFIX, ["text", "markdown", "latex"]
    if kind == "bounds":
        return _BOUNDS_SUFFIX, ["json", "csv"]
    if kind == "plot":
        from wstats._plots import PLOT_FORMATS

        return dict(PLOT_FORMATS), list(PLOT_FORMATS.values())
    from wstats import render

    registry = {"estimates": render.ESTIMATE_RENDERERS, "table": render.TABLE_RENDERERS,
                "nonresponse": render.NONRESPONSE_RENDERERS}[kind]
    return ({s: f for s, f in render.SUFFIX_FORMATS.items() if f in registry},
            [f for f in registry])


# ------------------------------------------------------------------ before reading the data

def _check_outputs(analysis: Analysis, overwrite: bool,
                   outputs: Sequence[Output] | None = None) -> None:
    """Refuse duplicate outputs, outputs that exist and unwritable folders, before writing."""
    from wstats._io import check_output

    inputs = {p.resolve() for p in _inputs(analysis)}
    seen: dict[Path, str] = {}
    for out in analysis.outputs() if outputs is None else outputs:
        resolved = out.path.resolve()
        if resolved in inputs:
            raise OutputError(f"{analysis.source}: {out.key}: output {out.path} is an input of "
                              "the analysis; choose another file name")
        if resolved in seen:
            raise AnalysisError(f"{analysis.source}: {out.key}: output {out.path} is also "
                                f"written by {seen[resolved]}; give each output its own file")
        seen[resolved] = out.key
        check_output(out.path, overwrite)


def _inputs(analysis: Analysis) -> list[Path]:
    """Return every file the analysis reads: itself, data, codebook, table specs and theirs."""
    files = [analysis.source, analysis.data, *([analysis.codebook] if analysis.codebook else [])]
    for job in analysis.jobs:
        spec = job.options.get("spec")
        if spec is not None:
            files += [spec.source, spec.data, *([spec.codebook] if spec.codebook else [])]
    return files


def _check_plot_support(analysis: Analysis) -> None:
    """Refuse a required chart when matplotlib is not installed (before any work is done)."""
    import importlib.util

    if importlib.util.find_spec("matplotlib") is not None:
        return
    for job in analysis.jobs:
        if job.kind == "plot" and job.options["required"]:
            raise AnalysisError(
                f"{analysis.source}: {job.key}: charts need matplotlib, which is not installed;"
                " install the plot extra: pip install 'wstats[plot]' (or set required = false"
                " to skip the chart)")


def _codebook(analysis: Analysis) -> Codebook | None:
    """Load the codebook the analysis names, if any."""
    if analysis.codebook is None:
        return None
    from wstats._codebook import load_codebook

    return load_codebook(analysis.codebook)


def _design(analysis: Analysis, codebook: Codebook | None) -> Design:
    """Return the Design: the codebook's ``[design]`` with the analysis's keys on top."""
    from dataclasses import fields

    from wstats._design import Design

    merged: dict[str, Any] = {**(getattr(codebook, "design", None) or {}), **analysis.design}
    allowed = [f.name for f in fields(Design) if f.name != "extra"]
    for key in merged:
        if key not in allowed:
            raise AnalysisError(f"{analysis.source}: design.{key}: unknown design key; "
                                f"allowed: {', '.join(allowed)}{did_you_mean(key, allowed)}")
    if not merged.get("weight"):
        raise AnalysisError(f"{analysis.source}: design.weight: no weight column given; add "
                            "[design] weight = \"COLUMN\" (or set it in the codebook)")
    return Design(**merged)


def _needed(analysis: Analysis, design: Design) -> tuple[list[str], dict[str, str]]:
    """Return the variables to read and, for each, the key that asked for it."""
    from wstats._expr import parse_expression

    wanted: dict[str, str] = {}
    for job in analysis.jobs:
        opts = job.options
        for key in ("variables", "by", "categorical"):
            for name in opts.get(key, ()):
                wanted.setdefault(name, f"{job.key} {key}")
        for num, den in opts.get("ratios", ()):
            wanted.setdefault(num, f"{job.key} ratios")
            wanted.setdefault(den, f"{job.key} ratios")
        same_data = job.kind == "table" and \
            Path(opts["spec"].data).resolve() == Path(analysis.data).resolve()
        if same_data:
            from wstats._pubtable import table_variables

            for name in table_variables(opts["spec"]):
                wanted.setdefault(name, f"{job.key} rows/columns")
        if opts.get("where"):
            expr = parse_expression(opts["where"], None, f"{analysis.source}: {job.key} where")
            for name in sorted(expr.inputs):
                wanted.setdefault(name, f"{job.key} where")
    for name in _design_columns(design):
        wanted.setdefault(name, "design")
    return list(wanted), wanted


def _design_columns(design: Design) -> list[str]:
    """Return the columns the design names (replicate globs are left to the reader)."""
    cols = [c for c in (design.weight, design.strata, design.psu, design.fpc) if c]
    reps = design.replicates
    if isinstance(reps, str):
        return cols if any(ch in reps for ch in "*?[") else [*cols, reps]
    return [*cols, *(reps or ())]


def _read(analysis: Analysis, codebook: Codebook | None, design: Design,
          progress: bool) -> Dataset:
    """Read the data once, with only the needed columns; unknown names name their key."""
    from wstats._load import read
    from wstats._readers import file_columns

    names, asked_by = _needed(analysis, design)
    known = [*file_columns(str(analysis.data)), *(codebook.derived if codebook else ())]
    known_set = set(known)
    for name in names:
        if name not in known_set and not _is_glob(name):
            raise AnalysisError(
                f"{analysis.source}: {asked_by[name]}: variable '{name}' is neither a column of "
                f"{analysis.data.name} nor a derived variable of the codebook"
                f"{did_you_mean(name, known)}")
    globbed = _expand_replicates(design, known)
    return read(analysis.data, columns=[*names, *globbed], codebook=codebook, progress=progress)


def _is_glob(name: str) -> bool:
    """Tell whether *name* is a glob pattern (replicate weights)."""
    return any(ch in name for ch in "*?[")


def _expand_replicates(design: Design, known: Sequence[str]) -> list[str]:
    """Return the file columns a replicate glob matches (empty without a glob)."""
    import fnmatch

    reps = design.replicates
    if not isinstance(reps, str) or not _is_glob(reps):
        return []
    return [c for c in known if fnmatch.fnmatchcase(c, reps)]


# ------------------------------------------------------------------ computing and rendering

class _Runner:
    """Computes every job on the one dataset and renders its outputs to bytes."""

    def __init__(self, analysis: Analysis, codebook: Codebook | None, design: Design,
                 data: Dataset) -> None:
        self.a, self.codebook, self.design, self.data = analysis, codebook, design, data
        self.results: dict[tuple[str, str], Any] = {}

    def render_all(self) -> list[tuple[Output, bytes]]:
        """Return (output, bytes) for every output of every job, in file order."""
        out: list[tuple[Output, bytes]] = []
        steps: dict[str, Callable[[Job], list[tuple[Output, bytes]]]] = {
            "estimates": self.estimates, "nonresponse": self.nonresponse,
            "bounds": self.bounds, "table": self.table, "methods": self.methods,
            "plot": self.plot,
        }
        for job in self.a.jobs:
            try:
                out.extend(steps[job.kind](job))
            except AnalysisError:
                raise
            except WstatsError as exc:
                raise type(exc)(f"{self.a.source}: {job.key}: {exc}") from exc
        return out

    def provenance(self, design_summary: Mapping[str, Any]) -> dict[str, Any]:
        """Return the provenance record of an output of this analysis."""
        from wstats._provenance import provenance

        return provenance([self.a.data, self.a.source], self.a.codebook, design_summary,
                          f"wstats run {self.a.source.name}")

    def registry_render(self, registry: Mapping[str, Callable[..., Any]], obj: Any,
                        job: Job) -> list[tuple[Output, bytes]]:
        """Render *obj* with *registry* for every output of *job*."""
        prov = self.provenance(getattr(obj, "design", None) or {})
        return [(o, _as_bytes(registry[o.fmt](obj, provenance=prov), o.fmt))
                for o in job.outputs]

    def estimates(self, job: Job) -> list[tuple[Output, bytes]]:
        """Estimate and render one ``[[estimates]]`` entry."""
        from wstats._estimate import estimate
        from wstats._reliability import STANDARDS
        from wstats.render import ESTIMATE_RENDERERS

        o = job.options
        table = estimate(
            self.data, self.design, o["variables"], statistics=o.get("statistics") or None,
            by=o["by"], where=o.get("where"), categorical=o.get("categorical", ()),
            ratios=[tuple(r) for r in o.get("ratios", ())],
            quantiles=o.get("quantiles", (0.5,)), level=o["level"],
            proportion_ci=o["proportion_ci"], reliability=STANDARDS[o["reliability"]])
        self.results[("estimates", job.name)] = table
        return self.registry_render(ESTIMATE_RENDERERS, table, job)

    def nonresponse(self, job: Job) -> list[tuple[Output, bytes]]:
        """Compute and render one ``[[nonresponse]]`` entry."""
        from wstats._nonresponse import nonresponse
        from wstats.render import NONRESPONSE_RENDERERS

        o = job.options
        table = nonresponse(self.data, self.design, o["variables"], by=o["by"],
                            where=o.get("where"), level=o["level"],
                            count_invalid=o["count_invalid"], sort_worst=o["sort_worst"],
                            not_asked=o["not_asked"])
        self.results[("nonresponse", job.name)] = table
        return self.registry_render(NONRESPONSE_RENDERERS, table, job)

    def bounds(self, job: Job) -> list[tuple[Output, bytes]]:
        """Compute and write one ``[[bounds]]`` entry as JSON or CSV."""
        from wstats._nonresponse import bounds, bounds_records

        o = job.options
        frame = bounds(self.data, self.design, o["variables"], by=o["by"], where=o.get("where"),
                       level=o["level"], reasons=o["reasons"])
        out = []
        for out_ in job.outputs:
            if out_.fmt == "csv":
                text = frame.to_csv(index=False, lineterminator="\n")
            else:
                prov = self.provenance(self.design_summary())
                text = _json({"provenance": prov, "settings": dict(frame.attrs),
                              "results": bounds_records(frame)})
            out.append((out_, text.encode("utf-8")))
        return out

    def design_summary(self) -> dict[str, Any]:
        """Return the bound design's summary."""
        return self.design.bind(self.data).summary()

    def table(self, job: Job) -> list[tuple[Output, bytes]]:
        """Build and render one ``[[table]]`` entry (publication table)."""
        from wstats._pubtable import build_table
        from wstats.render import TABLE_RENDERERS

        spec = job.options["spec"]
        kwargs: dict[str, Any] = {}
        if Path(spec.data).resolve() == Path(self.a.data).resolve():
            kwargs["data"] = self.data  # the one read serves the table too
        built = build_table(spec, **kwargs)
        self.results[("table", job.name)] = built
        return [(o, _as_bytes(TABLE_RENDERERS[o.fmt](built, provenance=built.provenance),
                              o.fmt)) for o in job.outputs]

    def methods(self, job: Job) -> list[tuple[Output, bytes]]:
        """Write the methods paragraph of the estimates an entry names."""
        from wstats._methods import methods_paragraph
        from wstats._nonresponse import nonresponse
        from wstats._reliability import STANDARDS

        source = self.a_job("estimates", job.options.get("estimates"))
        table = self.results[("estimates", source.name)]
        o = source.options
        nr = nonresponse(self.data, self.design, o["variables"], where=o.get("where"))
        whole = nr.frame
        counts = {r: int(whole[f"count_{r}"].sum()) for r in nr.reasons if r != "valid"}
        # The paragraph reports unweighted rates: nonresponding rows / rows asked.
        missed = whole[[f"count_{r}" for r in nr.settings["nonresponse_reasons"]]].sum(axis=1)
        asked = whole["asked"].to_numpy()
        rates = missed.to_numpy()[asked > 0] / asked[asked > 0]
        rng = (float(rates.min()), float(rates.max())) if len(rates) else None
        out = []
        for o_ in job.outputs:
            text = methods_paragraph(
                table.design, table.settings, counts, rng, self.a.data.name,
                STANDARDS[o["reliability"]], o_.fmt,
                reason_descriptions=dict(self.codebook.reasons) if self.codebook else None)
            out.append((o_, (text + "\n").encode("utf-8")))
            self.results.setdefault(("methods", job.name), text)
        return out

    def plot(self, job: Job) -> list[tuple[Output, bytes]]:
        """Draw one ``[[plot]]`` entry, or skip it when matplotlib is absent and optional."""
        import importlib.util

        from wstats import _plots

        if importlib.util.find_spec("matplotlib") is None and not job.options["required"]:
            return []
        kind = job.options["kind"]
        wanted = "estimates" if kind == "domains" else "nonresponse"
        source = self.a_job(wanted, job.options.get("from"))
        table = self.results[(wanted, source.name)]
        draw = _plots.render_domains if kind == "domains" else _plots.render_reasons
        return [(o, draw(table, o.fmt)) for o in job.outputs]

    def a_job(self, kind: str, name: str | None) -> Job:
        """Return the job of *kind* called *name*, or the first of its kind (checked at load)."""
        return next(j for j in self.a.jobs if j.kind == kind and name in (None, j.name))


def _as_bytes(data: Any, fmt: str) -> bytes:
    """Return rendered output as bytes (terminal renderables drawn as plain text)."""
    if isinstance(data, bytes):
        return data
    if isinstance(data, str):
        return data.encode("utf-8")
    from wstats.render import _plain_text

    return _plain_text(data).encode("utf-8")


def _json(data: Mapping[str, Any]) -> str:
    """Return *data* as strict JSON with sorted keys and a final newline."""
    import json

    from wstats._provenance import normalize

    return json.dumps(normalize(data), indent=2, ensure_ascii=False, allow_nan=False) + "\n"


# ------------------------------------------------------------------ writing

def _write_all(rendered: Sequence[tuple[Output, bytes]], overwrite: bool) -> list[Path]:
    """Write every output atomically; on failure remove the files this run created."""
    from wstats._io import atomic_write

    created: list[Path] = []
    written: list[Path] = []
    try:
        for out, data in rendered:
            existed = out.path.exists()
            atomic_write(out.path, data, overwrite)
            if not existed:
                created.append(out.path)
            written.append(out.path)
    except BaseException:
        for p in created:
            p.unlink(missing_ok=True)
        raise
    return written
