"""The command line: parse, call one library function, render, print.

This is the only module that writes to stdout/stderr. Every subcommand is registered in
:data:`COMMANDS`; each has a help text with an example. A :class:`~wstats.errors.WstatsError`
is caught once, at the edge, and printed as one line (``--debug`` shows the traceback).
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from wstats import __version__
from wstats.errors import UsageError, WstatsError, WstatsWarning

__all__ = ["COMMANDS", "main"]

OUTPUT_FORMATS = ("table", "csv", "json", "markdown", "latex", "html")
_SUFFIX_FORMAT = {".csv": "csv", ".json": "json", ".md": "markdown", ".tex": "latex",
                  ".html": "html", ".htm": "html", ".txt": "table", ".xlsx": "xlsx"}


@dataclass(frozen=True)
class Command:
    """One subcommand: its help, an example, how to add its arguments, and what it runs."""

    help: str
    example: str
    add_arguments: Callable[[argparse.ArgumentParser], None]
    run: Callable[[argparse.Namespace], int]


# ---------------------------------------------------------------- shared option groups

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


def _split(values: Sequence[str] | None) -> list[str]:
    out: list[str] = []
    for v in values or ():
        if v:
            out.extend(x.strip() for x in v.split(",") if x.strip())
    return out


def _parse_rows(text: str | None) -> tuple[int, int | None] | None:
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


def _format_for(args: argparse.Namespace) -> str:
    if args.format:
        return str(args.format)
    if args.output:
        return _SUFFIX_FORMAT.get(Path(args.output).suffix.lower(), "table")
    return "table"


def _design_from(args: argparse.Namespace, codebook: Any) -> Any:
    from wstats._design import Design

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
        base["replicates"] = _split([reps])
    factors = _split([args.replicate_factors]) if args.replicate_factors else None
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


def _load_codebook(path: str | None) -> Any:
    if not path:
        return None
    from wstats._codebook import load_codebook

    return load_codebook(path)


def _read(args: argparse.Namespace, codebook: Any, needed: Sequence[str]) -> Any:
    from wstats._load import read

    return read(args.data, columns=list(dict.fromkeys(needed)), codebook=codebook,
                rows=_parse_rows(args.rows), progress=_progress_wanted(args),
                encoding=args.encoding)


def _progress_wanted(args: argparse.Namespace) -> bool:
    return not getattr(args, "quiet", False) and sys.stderr.isatty()


def _command_line() -> str:
    import shlex

    return " ".join(shlex.quote(a) for a in ["wstats", *sys.argv[1:]])


def _emit(obj: Any, kind: str, args: argparse.Namespace, inputs: Sequence[str],
          codebook_path: str | None) -> None:
    """Render *obj* with the registry for *kind* and print it or write it atomically."""
    from wstats import render

    fmt = _format_for(args)
    registry: dict[str, Callable[..., Any]] = getattr(render, f"{kind.upper()}_RENDERERS")
    key = "terminal" if fmt == "table" else fmt
    if key not in registry:
        raise UsageError(f"format '{fmt}' is not available for {kind}; choose one of "
                         f"{', '.join(sorted(registry))}")
    if key == "terminal" and not args.output:
        _print_rich(registry[key](obj))
        return
    from wstats._io import atomic_write
    from wstats._provenance import provenance

    attrs = obj.attrs if kind == "bounds" else {}
    design = getattr(obj, "design", None) or attrs.get("design") or {}
    prov = provenance([Path(p) for p in inputs], Path(codebook_path) if codebook_path else None,
                      dict(design), _command_line())
    text = registry[key](obj, provenance=prov)
    if key == "terminal":
        text = _rich_to_text(text)
    if args.output:
        _not_an_input(args.output, [*inputs, codebook_path])
        atomic_write(Path(args.output), text, overwrite=args.overwrite)
        print(f"wrote {args.output}", file=sys.stderr)
    else:
        sys.stdout.write(text if isinstance(text, str) else text.decode())


def _check_outputs(args: argparse.Namespace, inputs: Sequence[str | None]) -> None:
    """Refuse unwritable outputs before any work is done (they are checked again at write)."""
    from wstats._io import check_output

    for out in (getattr(args, "output", None), getattr(args, "plot", None)):
        if out:
            _not_an_input(out, inputs)
            check_output(out, overwrite=args.overwrite)


def _not_an_input(output: str, inputs: Sequence[str | None]) -> None:
    """Refuse to write over a file this command reads."""
    import os

    from wstats.errors import OutputError

    out = Path(output)
    for name in inputs:
        if not name or not out.exists() or not Path(name).exists():
            continue
        if os.path.samefile(out, name):
            raise OutputError(f"output '{output}' is an input of this command; choose another "
                              "name")


def _print_rich(renderable: Any) -> None:
    from rich.console import Console

    Console(soft_wrap=False).print(renderable)


def _rich_to_text(renderable: Any) -> str:
    from rich.console import Console

    console = Console(record=True, width=120, file=open("/dev/null", "w"))  # noqa: SIM115
    console.print(renderable)
    return console.export_text()


# ---------------------------------------------------------------- commands

def _estimate_args(p: argparse.ArgumentParser) -> None:
    _add_data_options(p)
    p.add_argument("variables", metavar="VAR", nargs="+", help="variables to estimate")
    _add_design_options(p)
    g = p.add_argument_group("what to estimate")
    g.add_argument("--by", nargs="+", action="extend", metavar="COL", default=[],
                   help="domains: levels of these variables, crossed")
    g.add_argument("--where", metavar="EXPR",
                   help="row condition defining a subpopulation, e.g. 'AGE_YRS >= 65'")
    g.add_argument("--categorical", nargs="+", action="extend", metavar="COL", default=[],
                   help="treat these variables as categorical (a proportion per level)")
    g.add_argument("--stats", metavar="LIST",
                   help="comma list of mean,total,proportion,ratio,quantile (default: mean for "
                        "numbers, proportion for categories)")
    g.add_argument("--ratio", nargs="+", action="extend", metavar="NUM/DEN", default=[],
                   help="ratio of two variables, e.g. --ratio VISITS/PERSONS")
    g.add_argument("--quantiles", metavar="P,P", default="0.5",
                   help="probabilities for --stats quantile (default 0.5)")
    g.add_argument("--level", type=float, default=0.95, help="confidence level (default 0.95)")
    g.add_argument("--proportion-ci", default="korn-graubard",
                   choices=("korn-graubard", "logit", "wilson", "wald"),
                   help="interval for proportions (default korn-graubard)")
    g.add_argument("--standard", default="nchs-2017", metavar="NAME",
                   help="reliability standard: nchs-2017 (default), rse-30, none")
    g.add_argument("--plot", metavar="FILE", help="also draw estimates across domains (.png/.svg)")
    _add_output_options(p, OUTPUT_FORMATS)


def _run_estimate(args: argparse.Namespace) -> int:
    _parse_rows(args.rows)  # usage mistakes first, before any file is touched
    _check_outputs(args, [args.data, args.codebook])
    from wstats._estimate import estimate

    codebook = _load_codebook(args.codebook)
    design = _design_from(args, codebook)
    ratios = [_ratio_pair(r) for r in args.ratio]
    variables = list(args.variables)
    needed = _needed(codebook, [*variables, *[x for r in ratios for x in r], *args.by],
                     design, args.where, args.data)
    data = _read(args, codebook, needed)
    table = estimate(
        data, design, variables, statistics=_split([args.stats]) or None, by=args.by,
        where=args.where, categorical=args.categorical, ratios=ratios,
        quantiles=[float(q) for q in _split([args.quantiles])], level=args.level,
        proportion_ci=args.proportion_ci, reliability=_standard(args.standard),
    )
    _emit(table, "estimate", args, [args.data], args.codebook)
    if args.plot:
        from wstats._plots import plot_domains

        plot_domains(table, Path(args.plot), overwrite=args.overwrite)
    return 0


def _ratio_pair(text: str) -> tuple[str, str]:
    num, sep, den = text.partition("/")
    if not sep or not num or not den:
        raise UsageError(f"--ratio '{text}' is not NUM/DEN (e.g. --ratio VISITS/PERSONS)")
    return num.strip(), den.strip()


def _standard(name: str) -> Any:
    from wstats._reliability import STANDARDS

    if name not in STANDARDS:
        raise UsageError(f"--standard '{name}' is unknown; choose one of "
                         f"{', '.join(STANDARDS)}")
    return STANDARDS[name]


def _needed(codebook: Any, names: Sequence[str], design: Any, where: str | None,
            data: str) -> list[str]:
    """Return the raw columns to read: variables (derived inputs expanded), design, condition."""
    cols = list(names)
    if where:
        from wstats._expr import expression_names

        cols.extend(expression_names(where))
    if codebook is not None:
        cols = [*cols, *codebook.raw_columns_for(cols)]  # derived names kept: read() makes them
    available = None
    if design.replicates is not None:
        from wstats._readers import file_columns

        available = file_columns(data)
    cols.extend(design.columns(available, source=data))
    return list(dict.fromkeys(cols))


def _nonresponse_args(p: argparse.ArgumentParser) -> None:
    _add_data_options(p)
    p.add_argument("variables", metavar="VAR", nargs="+", help="items to break down")
    _add_design_options(p)
    p.add_argument("--by", nargs="+", action="extend", metavar="COL", default=[],
                   help="domains: levels of these variables, crossed")
    p.add_argument("--where", metavar="EXPR", help="row condition defining a subpopulation")
    p.add_argument("--worst-first", action="store_true",
                   help="sort by item nonresponse rate, highest first")
    p.add_argument("--exclude-invalid", action="store_true",
                   help="do not count 'invalid' answers as nonresponse")
    p.add_argument("--not-asked", default="skipped", metavar="REASONS",
                   help="reasons that put a row outside the item's universe, like a skip "
                        "(default skipped; e.g. skipped,not_applicable)")
    p.add_argument("--level", type=float, default=0.95, help="confidence level (default 0.95)")
    p.add_argument("--plot", metavar="FILE", help="also draw reasons per variable (.png/.svg)")
    _add_output_options(p, OUTPUT_FORMATS)


def _run_nonresponse(args: argparse.Namespace) -> int:
    _parse_rows(args.rows)
    _check_outputs(args, [args.data, args.codebook])
    from wstats._nonresponse import nonresponse

    codebook = _load_codebook(args.codebook)
    design = _design_from(args, codebook)
    needed = _needed(codebook, [*args.variables, *args.by], design, args.where, args.data)
    data = _read(args, codebook, needed)
    table = nonresponse(data, design, args.variables, by=args.by, where=args.where,
                        level=args.level, count_invalid=not args.exclude_invalid,
                        sort_worst=args.worst_first, not_asked=tuple(_split([args.not_asked])))
    _emit(table, "nonresponse", args, [args.data], args.codebook)
    if args.plot:
        from wstats._plots import plot_reasons

        plot_reasons(table, Path(args.plot), overwrite=args.overwrite)
    return 0


def _bounds_args(p: argparse.ArgumentParser) -> None:
    _add_data_options(p)
    p.add_argument("variables", metavar="VAR", nargs="+", help="categorical items")
    _add_design_options(p)
    p.add_argument("--by", nargs="+", action="extend", metavar="COL", default=[],
                   help="domains: levels of these variables, crossed")
    p.add_argument("--where", metavar="EXPR", help="row condition defining a subpopulation")
    p.add_argument("--unknown", default="dont_know,refused", metavar="REASONS",
                   help="reasons whose answers are unknown (default dont_know,refused)")
    p.add_argument("--level", type=float, default=0.95, help="confidence level (default 0.95)")
    _add_output_options(p, ("table", "csv", "json", "markdown"))


def _run_bounds(args: argparse.Namespace) -> int:
    _parse_rows(args.rows)
    _check_outputs(args, [args.data, args.codebook])
    from wstats._nonresponse import bounds

    codebook = _load_codebook(args.codebook)
    design = _design_from(args, codebook)
    data = _read(args, codebook, _needed(codebook, [*args.variables, *args.by], design,
                                         args.where, args.data))
    frame = bounds(data, design, args.variables, by=args.by, where=args.where,
                   level=args.level, reasons=tuple(_split([args.unknown])))
    frame.attrs.setdefault("design", design.bind(data).summary())
    _emit(frame, "bounds", args, [args.data], args.codebook)
    return 0


def _table_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("spec", metavar="SPEC.toml", help="publication table spec")
    _add_output_options(p, (*OUTPUT_FORMATS, "xlsx"))


def _run_table(args: argparse.Namespace) -> int:
    from wstats._pubtable import build_table, load_table_spec

    spec = load_table_spec(args.spec)
    if args.format == "xlsx" and not args.output:
        raise UsageError("xlsx output needs -o FILE.xlsx")
    table = build_table(spec, progress=sys.stderr.isatty())
    if not args.output and not args.format and table.outputs:
        from wstats.render import write_table

        for path in write_table(table, overwrite=args.overwrite):
            print(f"wrote {path}", file=sys.stderr)
        return 0
    _emit(table, "table", args, [str(spec.data)], str(spec.codebook) if spec.codebook else None)
    return 0


def _run_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("analysis", metavar="ANALYSIS.toml", help="analysis file naming every output")
    p.add_argument("--overwrite", action="store_true", help="replace existing outputs")


def _run_run(args: argparse.Namespace) -> int:
    from wstats._analysis import run_analysis

    for path in run_analysis(args.analysis, overwrite=args.overwrite,
                             progress=sys.stderr.isatty()):
        print(f"wrote {path}", file=sys.stderr)
    return 0


def _codebook_args(p: argparse.ArgumentParser) -> None:
    sub = p.add_subparsers(dest="action", metavar="ACTION", required=True,
                           parser_class=_Parser)
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


def _run_codebook(args: argparse.Namespace) -> int:
    from wstats._readers import read_raw

    if args.action == "draft":
        from wstats._draft import draft_codebook

        text = draft_codebook(read_raw(args.data, progress=sys.stderr.isatty()))
        if args.output:
            from wstats._io import atomic_write

            _not_an_input(args.output, [args.data])
            atomic_write(Path(args.output), text, overwrite=args.overwrite)
            print(f"wrote {args.output}", file=sys.stderr)
        else:
            sys.stdout.write(text)
        return 0
    from wstats._draft import check_codebook

    codebook = _load_codebook(args.codebook)
    raw = read_raw(args.data, columns=_present(args.data, codebook), rows=_parse_rows(args.rows),
                   progress=sys.stderr.isatty())
    report = check_codebook(raw, codebook)
    from wstats.render import render_check

    _print_rich(render_check(report))
    return 0 if report.ok else 1


def _present(path: str, codebook: Any) -> list[str]:
    from wstats._readers import file_columns

    in_file = set(file_columns(path))
    wanted = codebook.raw_columns_for(list(codebook.variables))
    return [c for c in wanted if c in in_file]


def _convert_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("data", metavar="FILE", help="survey file to convert")
    p.add_argument("output", metavar="OUT.parquet", help="Parquet file to write")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output")


def _run_convert(args: argparse.Namespace) -> int:
    from wstats._convert import convert

    out = convert(args.data, args.output, overwrite=args.overwrite,
                  progress=sys.stderr.isatty())
    print(f"wrote {out}", file=sys.stderr)
    return 0


def _columns_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("data", metavar="FILE", help="survey file")


def _run_columns(args: argparse.Namespace) -> int:
    from wstats._readers import file_columns

    for name in file_columns(args.data):
        print(name)
    return 0


def _demo_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("folder", metavar="DIR", nargs="?", default="wstats-demo",
                   help="folder for the demo files (default ./wstats-demo)")
    p.add_argument("--overwrite", action="store_true",
                   help="write into a folder that already has files")
    p.add_argument("--rows", type=int, default=None, help="respondents (default about 60,000)")
    p.add_argument("--columns", type=int, default=None, help="pad to this many columns")


def _run_demo(args: argparse.Namespace) -> int:
    from wstats._demo_run import run_demo

    run_demo(Path(args.folder), overwrite=args.overwrite, rows=args.rows, columns=args.columns,
             show=_print_rich)
    return 0


COMMANDS: dict[str, Command] = {
    "estimate": Command(
        "weighted means, totals, proportions, ratios, quantiles with design-based SEs",
        "wstats estimate survey.xpt SLEEPHRS GENHLTH --weight FINALWT --strata STRAT_ID "
        "--psu CLUSTRID --by AGE_GRP --codebook codebook.toml",
        _estimate_args, _run_estimate),
    "nonresponse": Command(
        "counts and weighted shares of every missing reason; item nonresponse rates",
        "wstats nonresponse survey.xpt SLEEPHRS FRUITFRQ --codebook codebook.toml --worst-first",
        _nonresponse_args, _run_nonresponse),
    "bounds": Command(
        "how far proportions could move if don't-know/refused answers were known",
        "wstats bounds survey.xpt GENHLTH INSURED --codebook codebook.toml --by AGE_GRP",
        _bounds_args, _run_bounds),
    "table": Command(
        "a publication table (with methods paragraph) from a table spec",
        "wstats table table1.toml --format latex -o table1.tex", _table_args, _run_table),
    "run": Command(
        "run every estimate, table and chart an analysis file names",
        "wstats run analysis.toml --overwrite", _run_args, _run_run),
    "codebook": Command(
        "draft a codebook from a file, or check one against it",
        "wstats codebook draft survey.sav -o codebook.toml", _codebook_args, _run_codebook),
    "convert": Command(
        "convert a survey file to a Parquet cache that keeps labels and missing codes",
        "wstats convert survey.xpt survey.parquet", _convert_args, _run_convert),
    "columns": Command(
        "list the columns of a survey file (metadata only, fast)",
        "wstats columns survey.xpt", _columns_args, _run_columns),
    "demo": Command(
        "write the built-in demo survey and show what wstats does with it",
        "wstats demo ./wstats-demo", _demo_args, _run_demo),
}


def build_parser() -> argparse.ArgumentParser:
    """Return the argument parser with every registered subcommand."""
    parser = _Parser(
        prog="wstats",
        description="Survey-weighted descriptive statistics that keep the reason every value "
        "is missing.",
        epilog="Run 'wstats COMMAND --help' for a command's options and an example.",
    )
    parser.add_argument("--version", action="version", version=f"wstats {__version__}")
    parser.add_argument("--debug", action="store_true",
                        help="show tracebacks on errors (accepted anywhere on the line)")
    parser.add_argument("--quiet", action="store_true", help="no progress bars")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name, cmd in COMMANDS.items():
        p = sub.add_parser(name, help=cmd.help,
                           description=f"{cmd.help[0].upper()}{cmd.help[1:]}.\n\nexample:\n  "
                           f"{cmd.example}",
                           formatter_class=argparse.RawDescriptionHelpFormatter)
        cmd.add_arguments(p)
        p.set_defaults(_run=cmd.run)
    return parser


class _Parser(argparse.ArgumentParser):
    """An argument parser whose mistakes are one-line UsageErrors, not usage dumps."""

    def error(self, message: str) -> Any:
        raise UsageError(f"{self.prog}: {message} (see '{self.prog} --help')")


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit code."""
    argv = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in argv
    _show_warnings_as_lines(debug)
    argv = [a for a in argv if a != "--debug"]
    try:
        args = build_parser().parse_args(argv)
        if not getattr(args, "_run", None):
            build_parser().print_help()
            return 2
        return int(args._run(args))
    except WstatsError as exc:
        if debug:
            raise
        print(f"wstats: error: {_one_line(str(exc))}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print("wstats: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0


def _show_warnings_as_lines(debug: bool) -> None:
    """Print each wstats warning once, as one line on stderr; others only with --debug."""
    import warnings

    def show(message: Warning | str, category: type[Warning], *_: Any, **__: Any) -> None:
        if issubclass(category, WstatsWarning):
            print(f"wstats: warning: {_one_line(str(message))}", file=sys.stderr)
        elif debug:
            print(f"wstats: library warning ({category.__name__}): {message}", file=sys.stderr)

    warnings.showwarning = show
    warnings.simplefilter("once", WstatsWarning)


def _one_line(message: str) -> str:
    return " ".join(message.split())


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
