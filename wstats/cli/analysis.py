"""Analysis files: one TOML file (our own format) naming the data and every output wanted.

:func:`load_analysis` checks the file key by key (no data read); :func:`run_analysis` reads the
data ONCE with only the columns every output needs, computes estimates, nonresponse tables,
bounds, publication tables, the methods paragraph and charts, renders them through the
registries of :mod:`wstats.render`, and writes every output atomically. All outputs are
checked before any is written, and a run that fails part-way removes what it created, so a
failed run leaves nothing behind. The format is documented in ``docs/analysis-file.md``.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

from wstats.cli.analysis_file import load_analysis
from wstats.cli.analysis_plan import Analysis, Job, Output
from wstats.errors import AnalysisError, OutputError, WstatsError, did_you_mean

if TYPE_CHECKING:
    from wstats.decoding.codebook import Codebook
    from wstats.decoding.columns import Dataset
    from wstats.design.declared import Design
__all__ = ["execute_analysis", "run_analysis"]

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
    data = _read(analysis, codebook, design, progress) if analysis.engine == "memory" else None
    runner = _Runner(analysis, codebook, design, data)
    rendered = runner.render_all()
    _check_outputs(analysis, overwrite, [o for o, _ in rendered])
    return _write_all(rendered, overwrite), runner.results


# ------------------------------------------------------------------ before reading the data

def _check_outputs(analysis: Analysis, overwrite: bool,
                   outputs: Sequence[Output] | None = None) -> None:
    """Refuse duplicate outputs, outputs that exist and unwritable folders, before writing."""
    from wstats.readers.output import check_output

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
    files = [analysis.source, *analysis.data_files,
             *([analysis.codebook] if analysis.codebook else [])]
    for job in analysis.jobs:
        spec = job.options.get("spec")
        if spec is not None:
            files += [spec.source, *(spec.files or (spec.data,)),
                      *([spec.codebook] if spec.codebook else [])]
    return files


def _same_files(spec: Any, analysis: Analysis) -> bool:
    """Tell whether a table spec reads the same data files as the analysis."""
    mine = [Path(p).resolve() for p in analysis.data_files]
    return [Path(p).resolve() for p in (spec.files or (spec.data,))] == mine


def _check_plot_support(analysis: Analysis) -> None:
    """Refuse a required chart, an xlsx or a Word output whose package is absent (before any
    work)."""
    from wstats.errors import require_package

    for job in analysis.jobs:
        if job.kind == "plot" and job.options["required"]:
            require_package("charts", f"{analysis.source}: {job.key}", AnalysisError)
    for out in analysis.outputs():
        if out.fmt in ("xlsx", "docx"):
            feature = "xlsx files" if out.fmt == "xlsx" else "Word files"
            require_package(feature, f"{analysis.source}: {out.key}", AnalysisError)


def _codebook(analysis: Analysis) -> Codebook | None:
    """Load the codebook the analysis names, if any."""
    if analysis.codebook is None:
        return None
    from wstats.decoding.codebook import load_codebook

    return load_codebook(analysis.codebook)


def _design(analysis: Analysis, codebook: Codebook | None) -> Design:
    """Return the Design: the codebook's ``[design]`` with the analysis's keys on top."""
    from wstats.reports.table_specs import design_over_codebook

    return design_over_codebook(analysis.source, codebook, analysis.design)


def _needed(analysis: Analysis, design: Design, known: Sequence[str]
            ) -> tuple[list[str], dict[str, str]]:
    """Return the variables to read and, for each, the key that asked for it."""
    from wstats.decoding.expressions import parse_expression

    wanted: dict[str, str] = {}
    for job in analysis.jobs:
        opts = job.options
        for key in ("variables", "by", "categorical"):
            for name in opts.get(key, ()):
                wanted.setdefault(name, f"{job.key} {key}")
        if opts.get("age_adjust"):
            wanted.setdefault(opts["age_adjust"], f"{job.key} age_adjust")
        for num, den in opts.get("ratios", ()):
            wanted.setdefault(num, f"{job.key} ratios")
            wanted.setdefault(den, f"{job.key} ratios")
        same_data = job.kind == "table" and _same_files(opts["spec"], analysis)
        if same_data:
            from wstats.reports.tables import table_variables

            for name in table_variables(opts["spec"]):
                wanted.setdefault(name, f"{job.key} rows/columns")
        if opts.get("where"):
            expr = parse_expression(opts["where"], None, f"{analysis.source}: {job.key} where")
            for name in sorted(expr.inputs):
                wanted.setdefault(name, f"{job.key} where")
    for name in design.columns(known, analysis.data.name):  # replicate globs matched here
        wanted.setdefault(name, "design")
    return list(wanted), wanted


def _read(analysis: Analysis, codebook: Codebook | None, design: Design,
          progress: bool) -> Dataset:
    """Read the data once, with only the needed columns; unknown names name their key."""
    from wstats.decoding.load import read
    from wstats.readers.dispatch import file_columns

    known = [*dict.fromkeys(c for f in analysis.data_files for c in file_columns(str(f))),
             *(codebook.derived if codebook else ()), *(["_file"] if analysis.files else [])]
    names, asked_by = _needed(analysis, design, known)
    known_set = set(known)
    for name in names:
        if name not in known_set:
            raise AnalysisError(
                f"{analysis.source}: {asked_by[name]}: variable '{name}' is neither a column of "
                f"{analysis.data.name} nor a derived variable of the codebook"
                f"{did_you_mean(name, known)}")
    data = list(analysis.files) if analysis.files else analysis.data
    return read(data, columns=names, codebook=codebook, progress=progress)


# ------------------------------------------------------------------ computing and rendering

class _Runner:
    """Computes every job on the one dataset and renders its outputs to bytes."""

    def __init__(self, analysis: Analysis, codebook: Codebook | None, design: Design,
                 data: Dataset | None) -> None:
        self.a, self.codebook, self.design, self._data = analysis, codebook, design, data
        self.results: dict[tuple[str, str], Any] = {}

    def engine_data(self) -> Any:
        """Return the data read once, or the files for the Dask engine (its workers read)."""
        if self.a.engine != "dask":
            return self.data
        return list(self.a.data_files) if len(self.a.data_files) > 1 else self.a.data

    @property
    def data(self) -> Dataset:
        """The data read once (engine ``memory``; engine ``dask`` runs estimates only)."""
        assert self._data is not None, "the Dask engine reads no data here"
        return self._data

    def render_all(self) -> list[tuple[Output, bytes]]:
        """Return (output, bytes) for every output of every job, in file order."""
        out: list[tuple[Output, bytes]] = []
        steps: dict[str, Callable[[Job], list[tuple[Output, bytes]]]] = {
            "estimates": self.estimates, "nonresponse": self.nonresponse,
            "bounds": self.bounds, "compare": self.compare, "table": self.table,
            "methods": self.methods,
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
        from wstats.reports.provenance import provenance

        return provenance([*self.a.data_files, self.a.source], self.a.codebook, design_summary,
                          f"wstats run {self.a.source.name}")

    def registry_render(self, registry: Mapping[str, Callable[..., Any]], obj: Any,
                        job: Job) -> list[tuple[Output, bytes]]:
        """Render *obj* with *registry* for every output of *job*."""
        prov = self.provenance(getattr(obj, "design", None) or {})
        return [(o, _as_bytes(registry[o.fmt](obj, provenance=prov), prov))
                for o in job.outputs]

    def estimates(self, job: Job) -> list[tuple[Output, bytes]]:
        """Estimate and render one ``[[estimates]]`` entry."""
        from wstats.estimation.estimate import estimate
        from wstats.estimation.reliability import STANDARDS
        from wstats.render import ESTIMATE_RENDERERS

        o = job.options
        data = self.engine_data()
        dask = self.a.engine == "dask"
        table = estimate(
            data, self.design, o["variables"], engine=self.a.engine,
            codebook=self.codebook if dask else None, statistics=o.get("statistics") or None,
            by=o["by"], where=o.get("where"), categorical=o.get("categorical", ()),
            ratios=[tuple(r) for r in o.get("ratios", ())],
            quantiles=o.get("quantiles", (0.5,)), level=o["level"],
            proportion_ci=o["proportion_ci"], reliability=STANDARDS[o["reliability"]],
            margins=o.get("margins", False))
        self.results[("estimates", job.name)] = table
        return self.registry_render(ESTIMATE_RENDERERS, table, job)

    def nonresponse(self, job: Job) -> list[tuple[Output, bytes]]:
        """Compute and render one ``[[nonresponse]]`` entry."""
        from wstats.render import NONRESPONSE_RENDERERS
        from wstats.reports.nonresponse import nonresponse

        o = job.options
        dask = self.a.engine == "dask"
        table = nonresponse(self.engine_data(), self.design, o["variables"], by=o["by"],
                            where=o.get("where"), level=o["level"],
                            count_invalid=o["count_invalid"], sort_worst=o["sort_worst"],
                            not_asked=o["not_asked"], engine=self.a.engine,
                            codebook=self.codebook if dask else None)
        self.results[("nonresponse", job.name)] = table
        return self.registry_render(NONRESPONSE_RENDERERS, table, job)

    def bounds(self, job: Job) -> list[tuple[Output, bytes]]:
        """Compute and render one ``[[bounds]]`` entry (JSON, CSV or markdown)."""
        from wstats.estimation.reliability import STANDARDS
        from wstats.render import BOUNDS_RENDERERS
        from wstats.reports.bounds import bounds

        o = job.options
        frame = bounds(self.data, self.design, o["variables"], by=o["by"], where=o.get("where"),
                       level=o["level"], reasons=o["reasons"],
                       reliability=STANDARDS[o["reliability"]], categorical=o["categorical"])
        prov = self.provenance(frame.attrs["design"])
        return [(out, _as_bytes(BOUNDS_RENDERERS[out.fmt](frame, provenance=prov), prov))
                for out in job.outputs]

    def compare(self, job: Job) -> list[tuple[Output, bytes]]:
        """Compare groups for one ``[[compare]]`` entry and render it."""
        from wstats.render import COMPARE_RENDERERS
        from wstats.reports.compare import compare

        o = dict(job.options)
        by = o.pop("by")[0]
        result = compare(self.data, self.design, o.pop("variables"), by=by, **o)
        self.results[("compare", job.name)] = result
        return self.registry_render(COMPARE_RENDERERS, result, job)

    def table(self, job: Job) -> list[tuple[Output, bytes]]:
        """Build and render one ``[[table]]`` entry (publication table)."""
        from wstats.render import TABLE_RENDERERS
        from wstats.reports.tables import build_table

        spec = job.options["spec"]
        kwargs: dict[str, Any] = {}
        if _same_files(spec, self.a):
            kwargs["data"] = self.data  # the one read serves the table too
        built = build_table(spec, **kwargs)
        self.results[("table", job.name)] = built
        return [(o, _as_bytes(TABLE_RENDERERS[o.fmt](built, provenance=built.provenance),
                              built.provenance)) for o in job.outputs]

    def methods(self, job: Job) -> list[tuple[Output, bytes]]:
        """Write the methods paragraph of the estimates an entry names."""
        from wstats.estimation.reliability import STANDARDS
        from wstats.render import with_provenance
        from wstats.reports.methods import codebook_recodes, methods_paragraph
        from wstats.reports.nonresponse import nonresponse

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
                recodes=codebook_recodes(self.codebook, o["variables"]))
            prov = self.provenance(table.design)
            out.append((o_, with_provenance(text + "\n", o_.fmt, prov).encode("utf-8")))
            self.results.setdefault(("methods", job.name), text)
        return out

    def plot(self, job: Job) -> list[tuple[Output, bytes]]:
        """Draw one ``[[plot]]`` entry, or skip it when matplotlib is absent and optional."""
        import importlib.util

        from wstats.reports import plots as _plots
        if importlib.util.find_spec("matplotlib") is None and not job.options["required"]:
            return []
        kind = job.options["kind"]
        wanted = "estimates" if kind == "domains" else "nonresponse"
        source = self.a_job(wanted, job.options.get("from"))
        table = self.results[(wanted, source.name)]
        draw = _plots.render_domains if kind == "domains" else _plots.render_reasons
        prov = self.provenance(table.design)
        return [(o, draw(table, o.fmt, prov)) for o in job.outputs]

    def a_job(self, kind: str, name: str | None) -> Job:
        """Return the job of *kind* called *name*, or the first of its kind (checked at load)."""
        return next(j for j in self.a.jobs if j.kind == kind and name in (None, j.name))


def _as_bytes(data: Any, provenance: Mapping[str, Any]) -> bytes:
    """Return rendered output as bytes (terminal renderables as plain text, provenance below)."""
    if isinstance(data, bytes):
        return data
    if isinstance(data, str):
        return data.encode("utf-8")
    from wstats.render import plain_text

    return plain_text(data, provenance).encode("utf-8")


def _json(data: Mapping[str, Any]) -> str:
    """Return *data* as strict JSON with sorted keys and a final newline."""
    import json

    from wstats.reports.provenance import normalize

    return json.dumps(normalize(data), indent=2, ensure_ascii=False, allow_nan=False) + "\n"


# ------------------------------------------------------------------ writing

def _write_all(rendered: Sequence[tuple[Output, bytes]], overwrite: bool) -> list[Path]:
    """Write every output atomically; on failure remove the files this run created."""
    from wstats.readers.output import atomic_write
    from wstats.readers.undo import removing_created

    with removing_created():
        for out, data in rendered:
            atomic_write(out.path, data, overwrite)
    return [out.path for out, _ in rendered]
