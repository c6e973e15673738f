"""Command-line arguments: the option groups shared by commands, and their parsing.

Parsing only: nothing here reads data or prints. :mod:`wstats.cli.commands` registers the commands.
"""

from __future__ import annotations

import argparse
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from wstats.errors import UsageError

__all__ = [
    "OUTPUT_FORMATS", "Parser", "add_bounds_args", "add_codebook_args", "add_columns_args",
    "add_convert_args", "add_demo_args", "add_estimate_args", "add_nonresponse_args",
    "add_run_args", "add_table_args", "design_from", "format_for", "needed_columns",
    "one_line", "parse_rows", "ratio_pair", "split_list",
]

OUTPUT_FORMATS = ("table", "csv", "json", "markdown", "latex", "html")
_SUFFIX_FORMAT = {".csv": "csv", ".json": "json", ".md": "markdown", ".tex": "latex",
                  ".html": "html", ".htm": "html", ".txt": "table", ".xlsx": "xlsx"}


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


def _add_data_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("data", metavar="DATA", help="survey file (.xpt .sas7bdat .sav .zsav .por "
                   ".dta .csv .tsv .parquet)")
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
    try:
        a = int(start) if start else 0
        b = int(stop) if stop else None
    except ValueError:
        raise UsageError(f"--rows '{text}' is not START:STOP (e.g. --rows 0:1000)") from None
    if not sep or a < 0 or (b is not None and b <= a):
        raise UsageError(f"--rows '{text}' is not START:STOP with 0 <= START < STOP")
    return a, b


def format_for(args: argparse.Namespace) -> str:
    if args.format:
        return str(args.format)
    if args.output:
        return _SUFFIX_FORMAT.get(Path(args.output).suffix.lower(), "table")
    return "table"


def design_from(args: argparse.Namespace, codebook: Any) -> Any:
    from wstats.design.declared import Design

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
    )


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
    g.add_argument("--where", metavar="EXPR",
                   help="row condition defining a subpopulation, e.g. 'dm_age >= 65'")
    g.add_argument("--categorical", nargs="+", action="extend", metavar="COL", default=[],
                   help="treat these variables as categorical (a proportion per level)")
    g.add_argument("--statistics", metavar="LIST",
                   help="comma list of mean,total,proportion,ratio,quantile (default: mean for "
                        "numbers, proportion for categories)")
    g.add_argument("--stats", dest="statistics", action=_OldName, help=argparse.SUPPRESS)
    g.add_argument("--ratio", nargs="+", action="extend", metavar="NUM/DEN", default=[],
                   help="ratio of two variables, e.g. --ratio VISITS/PERSONS")
    g.add_argument("--quantiles", metavar="P,P", default="0.5",
                   help="probabilities for --statistics quantile (default 0.5)")
    g.add_argument("--level", type=float, default=0.95, help="confidence level (default 0.95)")
    g.add_argument("--proportion-ci", default="korn-graubard",
                   choices=("korn-graubard", "logit", "wilson", "wald"),
                   help="interval for proportions (default korn-graubard)")
    g.add_argument("--standard", default="nchs-2017", metavar="NAME",
                   help="reliability standard: nchs-2017 (default), rse-30, none")
    g.add_argument("--plot", metavar="FILE", help="also draw estimates across domains (.png/.svg)")
    _add_output_options(p, OUTPUT_FORMATS)


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

        cols.extend(expression_names(where))
    available = None
    if design.replicates is not None:
        from wstats.readers.dispatch import file_columns

        available = file_columns(data)
    cols.extend(design.columns(available, source=data))
    return list(dict.fromkeys(cols))


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
    p.add_argument("--not-asked", default="skipped", metavar="REASONS",
                   help="reasons that put a row outside the item's universe, like a skip "
                        "(default skipped; e.g. skipped,not_applicable)")
    p.add_argument("--level", type=float, default=0.95, help="confidence level (default 0.95)")
    p.add_argument("--plot", metavar="FILE", help="also draw reasons per variable (.png/.svg)")
    _add_output_options(p, OUTPUT_FORMATS)


def add_bounds_args(p: argparse.ArgumentParser) -> None:
    _add_data_options(p)
    p.add_argument("variables", metavar="VAR", nargs="+", help="categorical items")
    _add_design_options(p)
    p.add_argument("--by", nargs="+", action="extend", metavar="COL", default=[],
                   help="domains: levels of these variables, crossed")
    p.add_argument("--where", metavar="EXPR", help="row condition defining a subpopulation")
    p.add_argument("--unknown", default="dont_know,refused", metavar="REASONS",
                   help="reasons whose answers are unknown (default dont_know,refused)")
    p.add_argument("--level", type=float, default=0.95, help="confidence level (default 0.95)")
    p.add_argument("--standard", default="nchs-2017", metavar="NAME",
                   help="reliability standard: nchs-2017 (default), rse-30, none")
    _add_output_options(p, ("table", "csv", "json", "markdown"))


def add_table_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("spec", metavar="SPEC.toml", help="publication table spec")
    _add_output_options(p, (*OUTPUT_FORMATS, "xlsx"))


def add_run_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("analysis", metavar="ANALYSIS.toml", help="analysis file naming every output")
    p.add_argument("--overwrite", action="store_true", help="replace existing outputs")


def add_codebook_args(p: argparse.ArgumentParser) -> None:
    sub = p.add_subparsers(dest="action", metavar="ACTION", required=True,
                           parser_class=Parser)
    d = sub.add_parser("draft", help="write a starting codebook from a file's metadata",
                       description="Write a starting codebook; suspected special codes are "
                       "commented suggestions to confirm.\n\nexample:\n  wstats codebook draft "
                       "survey.xpt -o survey_codebook.toml",
                       formatter_class=argparse.RawDescriptionHelpFormatter)
    d.add_argument("data", metavar="FILE")
    d.add_argument("-o", "--output", metavar="OUT", help="write the TOML here (default: screen)")
    d.add_argument("--overwrite", action="store_true", help="replace an existing output")
    c = sub.add_parser("check", help="count rows by reason and code; list what is unexplained",
                       description="Apply a codebook and report counts per reason and raw code,"
                       " unexplained values and codebook variables absent from the file.\n\n"
                       "example:\n  wstats codebook check survey.xpt survey_codebook.toml",
                       formatter_class=argparse.RawDescriptionHelpFormatter)
    c.add_argument("data", metavar="FILE")
    c.add_argument("codebook", metavar="CODEBOOK")
    c.add_argument("--rows", metavar="START:STOP", help="check only this row range")


def add_convert_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("data", metavar="FILE", help="survey file to convert")
    p.add_argument("output", metavar="OUT.parquet", help="Parquet file to write")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output")


def add_columns_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("data", metavar="FILE", help="survey file")


def add_demo_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("folder", metavar="DIR", nargs="?", default="wstats-demo",
                   help="folder for the demo files (default ./wstats-demo)")
    p.add_argument("--overwrite", action="store_true",
                   help="write into a folder that already has files")
    p.add_argument("--rows", type=int, default=None, help="respondents (default about 60,000)")
    p.add_argument("--columns", type=int, default=None, help="pad to this many columns")


class Parser(argparse.ArgumentParser):
    """An argument parser whose mistakes are one-line UsageErrors, not usage dumps."""

    def error(self, message: str) -> Any:
        raise UsageError(f"{self.prog}: {message} (see '{self.prog} --help')")


def one_line(message: str) -> str:
    return " ".join(message.split())
