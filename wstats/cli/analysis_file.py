"""Analysis files, read and checked: our own TOML format naming the data and every output.

:func:`load_analysis` checks the file key by key without reading any data; the checked
:class:`Analysis` is run by :mod:`wstats.cli.analysis`. The format is documented in
``docs/analysis-file.md``.
"""

from __future__ import annotations

import tomllib
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from wstats.cli.analysis_plan import Analysis, Job, Output
from wstats.decoding.reasons import NOT_ASKED
from wstats.errors import AnalysisError, did_you_mean
from wstats.reports.spec_inputs import check_engine
from wstats.reports.table_specs import _Spec

__all__ = ["JOB_KEYS", "Analysis", "Job", "Output", "load_analysis"]

_TOP = ("data", "codebook", "title", "design", "defaults", "estimates", "nonresponse",
        "bounds", "compare", "table", "methods", "plot", "engine")
_OUT = ("output", "format")
_DOMAIN = ("variables", "by", "where", "level")
#: table name -> allowed keys of each entry
JOB_KEYS: dict[str, tuple[str, ...]] = {
    "estimates": ("name", *_DOMAIN, "statistics", "categorical", "ratios", "quantiles",
                  "proportion_ci", "reliability", "margins", *_OUT),
    "nonresponse": ("name", *_DOMAIN, "count_invalid", "sort_worst", "not_asked", *_OUT),
    "bounds": ("name", *_DOMAIN, "reasons", "reliability", "categorical", *_OUT),
    "compare": ("name", *_DOMAIN, "reference", "pairs", "adjust_p", "trend", "reasons",
                "not_asked", "categorical", "age_adjust", "standard", *_OUT),
    "table": ("spec", "title", "rows", "columns", "where", "cells", "intervals", "notes",
              "reliability", *_OUT),
    "methods": ("estimates", *_OUT),
    "plot": ("kind", "from", "output", "required"),
}
_DEFAULTS = ("by", "where", "level", "proportion_ci", "reliability")
_METHODS_SUFFIX = {".txt": "text", ".md": "markdown", ".tex": "latex"}
_BOUNDS_SUFFIX = {".json": "json", ".csv": "csv", ".md": "markdown"}


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


# ------------------------------------------------------------------ checking the file

class _Parser(_Spec):
    """Checks one parsed analysis document key by key, failing with the key's name.

    The generic checks (``fail``, ``keys``, ``text``, ``flag``, ``choice``) are the table-spec
    checker's, so both files report mistakes in the same words.
    """

    RELATIVE_TO = "the analysis file's folder"

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
        for kind in ("estimates", "nonresponse", "bounds", "compare", "table", "methods",
                     "plot"):
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
        return Analysis(self.source, self.data_files()[0],
                        self.input_path("codebook") if "codebook" in self.doc else None,
                        self.subtable(self.doc.get("design", {}), "design"), tuple(jobs),
                        self.pooled_files(), check_engine(self, [(j.key, j.kind) for j in jobs]))

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
        elif kind == "compare":
            opts = self.compare_options(key, entry)
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
                            "variables = [\"dm_age\"]")
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
            opts["not_asked"] = self.names(entry.get("not_asked", list(NOT_ASKED)),
                                           f"{key} not_asked")
        else:
            opts["reasons"] = self.names(entry.get("reasons", ["dont_know", "refused"]),
                                         f"{key} reasons", empty=False)
            opts["reliability"] = self.reliability(key, entry)
            opts["categorical"] = self.names(entry.get("categorical", []), f"{key} categorical")
        return opts

    def estimate_options(self, key: str, entry: Mapping[str, Any]) -> dict[str, Any]:
        """Return the statistics, interval and reliability options of an estimates entry."""
        from wstats.estimation.intervals import PROPORTION_INTERVALS

        d = self.defaults
        stats = self.statistics(key, entry.get("statistics", []))
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
            "margins": self.flag(entry.get("margins", False), f"{key} margins"),
            "categorical": self.names(entry.get("categorical", []), f"{key} categorical"),
            "ratios": tuple(tuple(self.names(r, f"{key} ratios")) for r in ratios),
            "quantiles": tuple(float(q) for q in quantiles),
            "proportion_ci": self.choice(entry.get("proportion_ci", d.get(
                "proportion_ci", "korn-graubard")), f"{key} proportion_ci",
                list(PROPORTION_INTERVALS)),
            "reliability": self.reliability(key, entry),
        }

    def compare_options(self, key: str, entry: Mapping[str, Any]) -> dict[str, Any]:
        """Return the options of a [[compare]] entry (see ``wstats.compare``)."""
        d = self.defaults
        if "variables" not in entry or "by" not in entry:
            raise self.fail(f"{key} {'by' if 'variables' in entry else 'variables'}",
                            "missing; e.g. variables = [\"bd_bmi\"] and by = \"dm_sex\"")
        where = entry.get("where", d.get("where"))
        ref = entry.get("reference")
        return {
            "variables": self.names(entry["variables"], f"{key} variables", empty=False),
            "by": (self.text(entry["by"], f"{key} by"),),
            "level": self.level(entry.get("level", d.get("level", 0.95)), f"{key} level"),
            "where": None if where is None else self.text(where, f"{key} where"),
            "reference": None if ref is None else self.text(str(ref), f"{key} reference"),
            "pairs": self.choice(entry.get("pairs", "reference"), f"{key} pairs",
                                 ("reference", "all")),
            "adjust_p": self.choice(entry.get("adjust_p", "none"), f"{key} adjust_p",
                                    ("none", "holm", "bh")),
            "trend": self.flag(entry.get("trend", False), f"{key} trend"),
            "reasons": self.flag(entry.get("reasons", False), f"{key} reasons"),
            "not_asked": tuple(self.names(entry.get("not_asked", list(NOT_ASKED)),
                                          f"{key} not_asked")),
            "categorical": self.names(entry.get("categorical", []), f"{key} categorical"),
            **self.age(entry, key),
        }

    def statistics(self, key: str, value: Any) -> tuple[str, ...] | dict[str, tuple[str, ...]]:
        """Return the statistics: one list for every variable, or a table of lists per variable."""
        allowed = ("mean", "total", "proportion", "ratio", "quantile")
        if isinstance(value, dict):
            per = {self.text(v, f"{key} statistics"): self.names(s, f"{key} statistics.{v}")
                   for v, s in value.items()}
            for v, names in per.items():
                for s in names:
                    self.choice(s, f"{key} statistics.{v}", allowed)
            return per
        names = self.names(value, f"{key} statistics")
        for s in names:
            self.choice(s, f"{key} statistics", allowed)
        return names

    def reliability(self, key: str, entry: Mapping[str, Any]) -> str:
        """Return the entry's reliability standard (or the default's), checked."""
        from wstats.estimation.reliability import STANDARDS

        return self.choice(entry.get("reliability", self.defaults.get(
            "reliability", "nchs-2017")), f"{key} reliability", list(STANDARDS))

    def plot_options(self, key: str, entry: Mapping[str, Any]) -> dict[str, Any]:
        """Return kind, source entry and whether matplotlib is required."""
        from wstats.reports.plots import PLOT_KINDS

        if "kind" not in entry:
            raise self.fail(f"{key} kind", f"missing; one of {', '.join(PLOT_KINDS)}")
        opts = {"kind": self.choice(entry["kind"], f"{key} kind", list(PLOT_KINDS)),
                "required": self.flag(entry.get("required", True), f"{key} required")}
        if "from" in entry:
            opts["from"] = self.text(entry["from"], f"{key} from")
        return opts

    def table_job(self, key: str, name: str, entry: Mapping[str, Any]) -> Job:
        """Check a [[table]] entry: a spec file, or the spec's keys inline."""
        from wstats.reports.table_specs import load_table_spec

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
        return _BOUNDS_SUFFIX, ["json", "csv", "markdown"]
    if kind == "plot":
        from wstats.reports.plots import PLOT_FORMATS

        return dict(PLOT_FORMATS), list(PLOT_FORMATS.values())
    from wstats import render

    registry = {"estimates": render.ESTIMATE_RENDERERS, "table": render.TABLE_RENDERERS,
                "nonresponse": render.NONRESPONSE_RENDERERS,
                "compare": render.COMPARE_RENDERERS}[kind]
    return ({s: f for s, f in render.SUFFIX_FORMATS.items() if f in registry},
            [f for f in registry])


