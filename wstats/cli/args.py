"""Command-line arguments: the option groups shared by commands, and their parsing.

Parsing only: nothing here reads data or prints. :mod:`wstats.cli.commands` registers the commands.
"""

from __future__ import annotations

import argparse
import re
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from wstats.errors import UsageError

__all__ = [
    "OUTPUT_FORMATS", "Parser", "add_bounds_args", "add_compare_args", "add_estimate_args",
    "add_nonresponse_args", "data_paths", "design_from", "format_for", "needed_columns",
    "one_line", "parse_rows", "ratio_pair", "split_list",
]

OUTPUT_FORMATS = ("table", "csv", "json", "markdown", "latex", "html")
_SUFFIX_FORMAT = {".csv": "csv", ".json": "json", ".md": "markdown", ".tex": "latex",
                  ".html": "html", ".htm": "html", ".txt": "table", ".xlsx": "xlsx",
                  ".docx": "docx"}


def _add_design_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("sample design (defaults from the codebook's [design] table)")
    g.add_argument("--weight", metavar="COL", help="column of final analysis weights")
    g.add_argument("--strata", metavar="COL", help="column of strata (absent: one stratum)")
    g.add_argument("--psu", metavar="COL", help="column of PSUs (absent: each row its own PSU)")
    g.add_argument("--fpc", metavar="COL",
                   help="first-stage FPC: PSU population count (>1) or sampling fraction (<=1)")
    g.add_argument("--singleton", choices=("fail", "certainty", "center", "collapse"),
                   default=None, help="treatment of strata with one PSU (default: fail)")
    g.add_argument("--replicates", metavar="COLS",
                   help="replicate-weight columns: a glob ('RW*') or a comma-separated list")
    g.add_argument("--replicate-method", metavar="M",
                   choices=("brr", "fay", "jackknife", "jackknife-strata", "bootstrap", "sdr",
                            "custom"), help="how the replicates were formed")
    g.add_argument("--fay-rho", type=float, default=0.0, metavar="RHO",
                   help="Fay's perturbation factor for --replicate-method fay")
    g.add_argument("--replicate-scale", type=float, metavar="S",
                   help="overall variance multiplier (custom replicates)")
    g.add_argument("--replicate-factors", metavar="F,F,...",
                   help="per-replicate variance factors (custom or jackknife-strata)")
    g.add_argument("--center-on-replicate-mean", action="store_true",
                   help="centre replicate deviations on their mean, not the full estimate")
    g.add_argument("--drop-incomplete", action="store_true",
                   help="drop (and report) rows with a missing weight, stratum or PSU")
    g.add_argument("--domain-df", choices=("design", "domain"), default="design",
                   help="degrees of freedom: whole design (default) or domain strata/PSUs")
    g.add_argument("--pool", default="equal", metavar="RULE",
                   help="several files: rescale each file's weights by equal (1/K, default), "
                        "rows (its share of the rows) or factors F1,F2,... summing to 1")
    g.add_argument("--shared-psus", action="store_true",
                   help="several files: they reuse the same strata and PSUs (same codes, same "
                        "clusters); default: strata are distinct per file")


def _add_data_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("data", metavar="DATA", help="survey file (.xpt .sas7bdat .sav .zsav .por "
                   ".dta .csv .tsv .parquet); several files pool as one analysis: a quoted "
                   "glob ('period*.xpt'), a folder, or more paths before the variables")
    p.add_argument("--codebook", metavar="FILE", help="codebook TOML applied before estimation")
    p.add_argument("--rows", metavar="START:STOP", help="read only this row range (first look)")
    p.add_argument("--encoding", default="utf-8", metavar="NAME",
                   help="text encoding of a CSV file or of labels (e.g. latin-1)")


def _add_output_options(p: argparse.ArgumentParser, formats: Sequence[str]) -> None:
    p.add_argument("--format", choices=list(formats), default=None,
                   help="output format (default: from -o's extension, else 'table')")
    p.add_argument("-o", "--output", metavar="FILE", help="write to FILE instead of the screen")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output file")


def split_list(values: Sequence[str] | None) -> list[str]:
    out: list[str] = []
    for v in values or ():
        if v:
            out.extend(x.strip() for x in v.split(",") if x.strip())
    return out


def parse_rows(text: str | None) -> tuple[int, int | None] | None:
    if not text:
        return None
    start, sep, stop = text.partition(":")
    how = ("rows count from 0 and STOP is not read: --rows 0:1000 reads the first 1000 rows, "
           "--rows 1000: the rest; a STOP past the last row means to the end")
    try:
        a = int(start) if start.strip() else 0
        b = int(stop) if stop.strip() else None
    except ValueError:
        raise UsageError(f"--rows '{text}' is not START:STOP with whole numbers; {how}") from None
    if not sep:
        raise UsageError(f"--rows '{text}' has no ':'; give START:STOP ({how})")
    if a < 0 or (b is not None and b < 0):
        raise UsageError(f"--rows '{text}' counts backwards from the end, which wstats does not "
                         f"do; {how}")
    if b is not None and b <= a:
        raise UsageError(f"--rows '{text}' is not START:STOP with 0 <= START < STOP; {how}")
    return a, b


def format_for(args: argparse.Namespace) -> str:
    if args.format:
        return str(args.format)
    if args.output:
        return _SUFFIX_FORMAT.get(Path(args.output).suffix.lower(), "table")
    return "table"


def design_from(args: argparse.Namespace, codebook: Any) -> Any:
    from wstats.design.declared import Design
    from wstats.design.pooling import parse_pool

    base: dict[str, Any] = dict(getattr(codebook, "design", None) or {})
    for key in ("weight", "strata", "psu", "fpc", "singleton", "replicates"):
        value = getattr(args, key, None)
        if value is not None:
            base[key] = value
    if not base.get("weight"):
        raise UsageError("no weight given: pass --weight COL (or set weight in the codebook's "
                         "[design] table)")
    reps = base.get("replicates")
    if isinstance(reps, str) and "," in reps:
        base["replicates"] = split_list([reps])
    factors = split_list([args.replicate_factors]) if args.replicate_factors else None
    return Design(
        weight=base["weight"], strata=base.get("strata"), psu=base.get("psu"),
        fpc=base.get("fpc"), singleton=base.get("singleton") or "fail",
        replicates=base.get("replicates"),
        replicate_method=args.replicate_method or base.get("replicate_method"),
        fay_rho=args.fay_rho or float(base.get("fay_rho", 0.0)),
        replicate_scale=args.replicate_scale,
        replicate_factors=[float(f) for f in factors] if factors else None,
        replicate_center="mean" if args.center_on_replicate_mean else "full",
        drop_incomplete=args.drop_incomplete, domain_df=args.domain_df,
        pool=parse_pool(args.pool), shared_psus=args.shared_psus,
    )


def data_paths(args: argparse.Namespace) -> list[str]:
    """Return the data files of a command: DATA plus any paths given before the variables.

    A leading VAR that is a path with a data file's suffix, a glob or a folder is a data
    file; a glob or folder is expanded. *args.data* is set to the list (one file: the path).
    """
    from wstats.decoding.stacking import expand_paths, is_several

    extra: list[str] = []
    names = list(getattr(args, "variables", []) or [])
    while names and _is_data_path(names[0]):
        extra.append(names.pop(0))
    if extra and not names:
        raise UsageError(f"no variable follows the data files {', '.join(extra)}; name the "
                         "variables after the files")
    if hasattr(args, "variables"):
        args.variables = names
    given = [args.data, *extra]
    paths = expand_paths(given) if extra or is_several(args.data) else given
    args.data = paths if len(given) > 1 or is_several(args.data) else paths[0]
    return paths


def _is_data_path(text: str) -> bool:
    """Tell whether a positional argument names data (a file with a data suffix, a glob...)."""
    from wstats.readers.dispatch import FORMATS

    p = Path(text)
    return p.suffix.lower() in FORMATS or any(c in text for c in "*?[") or p.is_dir()


def add_estimate_args(p: argparse.ArgumentParser) -> None:
    _add_data_options(p)
    p.add_argument("variables", metavar="VAR", nargs="*",
                   help="variables to estimate (none needed when --ratio is given)")
    _add_design_options(p)
    g = p.add_argument_group("what to estimate")
    g.add_argument("--by", nargs="+", action="extend", metavar="COL", default=[],
                   help="domains: levels of these variables, crossed")
    g.add_argument("--margins", action="store_true",
                   help="with crossed --by A B: also each by-variable alone (one-way margins)")
    _add_subpopulation_options(g)
    g.add_argument("--statistics", metavar="LIST",
                   help="comma list of mean,total,proportion,ratio,quantile (default: mean for "
                        "numbers, proportion for categories)")
    g.add_argument("--stats", dest="statistics", action=_OldName, help=argparse.SUPPRESS)
    g.add_argument("--ratio", nargs="+", action="extend", metavar="NUM/DEN", default=[],
                   help="ratio of two variables, e.g. --ratio VISITS/PERSONS")
    g.add_argument("--quantiles", metavar="P,P", default=None,
                   help="probabilities for --statistics quantile (default 0.5)")
    g.add_argument("--level", type=float, default=0.95, help="confidence level (default 0.95)")
    g.add_argument("--proportion-ci", default="korn-graubard",
                   choices=("korn-graubard", "logit", "wilson", "wald"),
                   help="interval for proportions (default korn-graubard)")
    g.add_argument("--reliability", default=None, metavar="NAME",
                   help="reliability standard: nchs-2017 (default), rse-30, none")
    _add_age_options(g, estimate=True)
    g.add_argument("--plot", metavar="FILE", help="also draw estimates across domains (.png/.svg)")
    _add_engine_options(p)
    _add_output_options(p, OUTPUT_FORMATS)


def _add_engine_options(p: argparse.ArgumentParser) -> None:
    e = p.add_argument_group("engine")
    e.add_argument("--engine", choices=("memory", "dask"), default="memory",
                   help="memory (default), or dask: partitions summed on a Dask cluster "
                        "(pip install 'wstats[dask]'; see docs/scale.md)")
    e.add_argument("--scheduler", metavar="ADDRESS",
                   help="with --engine dask: a running scheduler (e.g. tcp://10.0.0.5:8786); "
                        "default: a local cluster for this command")


def _add_subpopulation_options(g: Any) -> None:
    g.add_argument("--where", metavar="EXPR",
                   help="row condition defining a subpopulation, e.g. 'dm_age >= 65'")
    g.add_argument("--categorical", nargs="+", action="extend", metavar="COL", default=[],
                   help="treat these variables as categorical (a proportion per level)")


def _add_age_options(g: Any, estimate: bool = False) -> None:
    g.add_argument("--age-adjust", metavar="AGEVAR",
                   help="directly age-adjust over the levels of AGEVAR (needs --standard)")
    # estimate's --standard once named the reliability standard; only there is it read so
    g.add_argument("--standard", metavar="NAME|FILE.toml",
                   help="standard population for --age-adjust: us2000-11, us2000-adults18, "
                        "us2000-adults20 or a TOML file" + (
                            " (without --age-adjust: the reliability standard, as "
                            "--reliability)" if estimate else ""))


def add_compare_args(p: argparse.ArgumentParser) -> None:
    _add_data_options(p)
    p.add_argument("variables", metavar="VAR", nargs="+", help="variables to compare")
    _add_design_options(p)
    g = p.add_argument_group("what to compare")
    g.add_argument("--by", required=True, metavar="GROUP",
                   help="the grouping variable whose levels are compared")
    g.add_argument("--reference", metavar="LEVEL",
                   help="level (label or code) the others are compared with (default: first)")
    g.add_argument("--pairs", choices=("reference", "all"), default="reference",
                   help="each level against the reference (default) or every pair")
    g.add_argument("--adjust-p", choices=("none", "holm", "bh"), default="none",
                   help="multiplicity adjustment of the differences' p-values (default none)")
    g.add_argument("--trend", action="store_true",
                   help="linear (and with 4+ levels quadratic) trend across the ordered levels")
    g.add_argument("--period-df", choices=("sum", "satterthwaite"), default="sum",
                   help="pooled files compared --by _file: df of a change, the files' df added "
                        "up (default) or Satterthwaite's from each period's own df")
    g.add_argument("--reasons", action="store_true",
                   help="also compare item nonresponse and its reasons across the groups")
    g.add_argument("--not-asked", default="skipped,not_applicable", metavar="REASONS",
                   help="with --reasons: reasons that put a row outside the item's universe "
                        "(default skipped,not_applicable, as in nonresponse)")
    _add_subpopulation_options(g)
    g.add_argument("--level", type=float, default=0.95, help="confidence level (default 0.95)")
    _add_age_options(g)
    _add_engine_options(p)
    _add_output_options(p, ("table", "csv", "json", "markdown"))


class _OldName(argparse.Action):
    """An option kept under its old name: works, and says once what it is called now."""

    def __call__(self, parser: argparse.ArgumentParser, namespace: argparse.Namespace,
                 values: Any, option_string: str | None = None) -> None:
        import warnings

        from wstats.errors import WstatsWarning

        new = "--" + self.dest.replace("_", "-")
        warnings.warn(f"{option_string} is the old name of {new}; it still works for now, "
                      f"but write {new}", WstatsWarning, stacklevel=2)
        setattr(namespace, self.dest, values)


def ratio_pair(text: str) -> tuple[str, str]:
    num, sep, den = text.partition("/")
    if not sep or not num or not den:
        raise UsageError(f"--ratio '{text}' is not NUM/DEN (e.g. --ratio VISITS/PERSONS)")
    return num.strip(), den.strip()


def needed_columns(names: Sequence[str], design: Any, where: str | None, data: str
                   ) -> list[str]:
    """Return the variables to read: those named, the condition's, the design's.

    Derived variables stay as names: ``read`` reads their inputs and drops them once the
    variables are made, so inputs nobody named take no memory during estimation.
    """
    cols = list(names)
    if where:
        from wstats.decoding.expressions import expression_names

        cols.extend(_not_reasons(expression_names(where), where, data))
    available = None
    if design.replicates is not None:
        from wstats.readers.dispatch import file_columns

        available = file_columns(data if isinstance(data, str) else data[0])
    cols.extend(design.columns(available, source=data if isinstance(data, str) else data[0]))
    return list(dict.fromkeys(cols))


def _not_reasons(names: list[str], where: str, data: str) -> list[str]:
    """Return *names*; refuse a reason name used as a value ('q == dont_know')."""
    from wstats.decoding.reasons import CORE_REASONS

    reasons = [n for n in names if n in CORE_REASONS]
    if not reasons:
        return names
    from wstats.readers.dispatch import file_columns

    present = set(file_columns(data))
    wrong = [n for n in reasons if n not in present]
    if wrong:
        from wstats.errors import ExpressionError

        var = next((n for n in names if n not in CORE_REASONS), "x")
        raise ExpressionError(
            f"--where '{where}': '{wrong[0]}' is a missing-value reason, not a variable or a "
            f"value; select the rows missing for it with reason({var}, \"{wrong[0]}\")")
    return names


def add_nonresponse_args(p: argparse.ArgumentParser) -> None:
    _add_data_options(p)
    p.add_argument("variables", metavar="VAR", nargs="+", help="items to break down")
    _add_design_options(p)
    p.add_argument("--by", nargs="+", action="extend", metavar="COL", default=[],
                   help="domains: levels of these variables, crossed")
    p.add_argument("--where", metavar="EXPR", help="row condition defining a subpopulation")
    p.add_argument("--worst-first", action="store_true",
                   help="sort by item nonresponse rate, highest first")
    p.add_argument("--shares", action="store_true",
                   help="show weighted shares of the rows per reason instead of row counts")
    p.add_argument("--exclude-invalid", action="store_true",
                   help="do not count 'invalid' answers as nonresponse")
    p.add_argument("--not-asked", default="skipped,not_applicable", metavar="REASONS",
                   help="reasons that put a row outside the item's universe, like a skip "
                        "(default skipped,not_applicable; 'skipped' alone counts "
                        "not_applicable as nonresponse)")
    p.add_argument("--level", type=float, default=0.95, help="confidence level (default 0.95)")
    p.add_argument("--plot", metavar="FILE", help="also draw reasons per variable (.png/.svg)")
    _add_engine_options(p)
    _add_output_options(p, OUTPUT_FORMATS)


def add_bounds_args(p: argparse.ArgumentParser) -> None:
    _add_data_options(p)
    p.add_argument("variables", metavar="VAR", nargs="+", help="categorical items")
    _add_design_options(p)
    p.add_argument("--by", nargs="+", action="extend", metavar="COL", default=[],
                   help="domains: levels of these variables, crossed")
    p.add_argument("--where", metavar="EXPR", help="row condition defining a subpopulation")
    p.add_argument("--categorical", nargs="+", action="extend", metavar="COL", default=[],
                   help="treat these variables as categorical (a proportion per level)")
    p.add_argument("--unknown", default="dont_know,refused", metavar="REASONS",
                   help="reasons whose answers are unknown (default dont_know,refused)")
    p.add_argument("--level", type=float, default=0.95, help="confidence level (default 0.95)")
    p.add_argument("--reliability", default="nchs-2017", metavar="NAME",
                   help="reliability standard: nchs-2017 (default), rse-30, none")
    # the name estimate uses for the same thing; --standard names a standard population there
    p.add_argument("--standard", dest="reliability", action=_OldName, help=argparse.SUPPRESS)
    _add_engine_options(p)
    _add_output_options(p, ("table", "csv", "json", "markdown"))


class Parser(argparse.ArgumentParser):
    """An argument parser whose mistakes are one-line UsageErrors, not usage dumps."""

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        # A row range such as '-5:10' is a (wrong) value of --rows, not an unknown option:
        # taken as a value, it gets the message that explains the range syntax.
        self._negative_number_matcher = re.compile(r"^-\d+(:-?\d*)?$|^-\d*\.\d+$")

    def parse_known_args(self, args: Any = None, namespace: Any = None) -> Any:
        # Refused by the innermost parser that saw them, so that the message names the
        # subcommand ('wstats estimate: unrecognized arguments'), not the top program.
        parsed, extra = super().parse_known_args(args, namespace)
        if any(a == "--engine" or a.startswith("--engine=") for a in extra):
            self.error("--engine: this command runs in memory only; the Dask engine serves "
                       "estimate and nonresponse (docs/scale.md)")
        if extra:
            self.error(f"unrecognized arguments: {' '.join(extra)}")
        return parsed, extra

    def error(self, message: str) -> Any:
        # 'wstats: error:' is printed before it; a subcommand's mistake names the subcommand
        where = "" if self.prog == "wstats" else f"{self.prog}: "
        raise UsageError(f"{where}{message} (see '{self.prog} --help')")


def one_line(message: str) -> str:
    return " ".join(message.split())
