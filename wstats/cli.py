"""The command line: parse, call one library function, render, print.

This is the only module that writes to stdout/stderr. Every subcommand is registered in
:data:`COMMANDS`; each has a help text with an example. A :class:`~wstats.errors.WstatsError`
is caught once, at the edge, and printed as one line (``--debug`` shows the traceback).
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from wstats import __version__
from wstats._cli_args import (
    Parser,
    add_bounds_args,
    add_codebook_args,
    add_columns_args,
    add_convert_args,
    add_demo_args,
    add_estimate_args,
    add_nonresponse_args,
    add_run_args,
    add_table_args,
    data_paths,
    design_from,
    format_for,
    needed_columns,
    one_line,
    parse_rows,
    ratio_pair,
    split_list,
)
from wstats.errors import UsageError, WstatsError, WstatsWarning

__all__ = ["COMMANDS", "main"]

@dataclass(frozen=True)
class Command:
    """One subcommand: its help, an example, how to add its arguments, and what it runs."""

    help: str
    example: str
    add_arguments: Callable[[argparse.ArgumentParser], None]
    run: Callable[[argparse.Namespace], int]


def _load_codebook(path: str | None) -> Any:
    if not path:
        return None
    from wstats._codebook import load_codebook

    return load_codebook(path)


def _read(args: argparse.Namespace, codebook: Any, needed: Sequence[str]) -> Any:
    from wstats._load import read

    return read(args.data, columns=list(dict.fromkeys(needed)), codebook=codebook,
                rows=parse_rows(args.rows), progress=_progress_wanted(args),
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

    fmt = format_for(args)
    registry: Mapping[str, Callable[..., Any]] = getattr(render, f"{kind.upper()}_RENDERERS")
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
    """Refuse unwritable outputs before any work is done (they are checked again at write).

    When the result will be written with its provenance, the inputs' SHA-256 digests are
    started on another thread now, so that hashing overlaps reading and estimating.
    """
    from wstats._io import check_output, prefetch_sha256

    if getattr(args, "output", None) or format_for(args) != "table":
        for name in inputs:
            if name:
                prefetch_sha256(name)
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
    import io

    from rich.console import Console

    console = Console(record=True, width=120, file=io.StringIO())
    console.print(renderable)
    return console.export_text()


def _run_estimate(args: argparse.Namespace) -> int:
    parse_rows(args.rows)  # usage mistakes first, before any file is touched
    paths = data_paths(args)
    _check_outputs(args, [*paths, args.codebook])
    from wstats._estimate import estimate

    codebook = _load_codebook(args.codebook)
    design = design_from(args, codebook)
    ratios = [ratio_pair(r) for r in args.ratio]
    variables = list(args.variables)
    if args.scheduler and args.engine != "dask":
        raise UsageError("--scheduler needs --engine dask")
    if args.engine == "dask":
        data: Any = args.data  # the files: the workers read them
    else:
        needed = needed_columns([*variables, *[x for r in ratios for x in r], *args.by],
                                design, args.where, args.data)
        data = _read(args, codebook, needed)
    table = estimate(
        data, design, variables, engine=args.engine, codebook=codebook,
        scheduler=args.scheduler, statistics=split_list([args.stats]) or None, by=args.by,
        where=args.where, categorical=args.categorical, ratios=ratios,
        quantiles=[float(q) for q in split_list([args.quantiles])], level=args.level,
        proportion_ci=args.proportion_ci, reliability=_standard(args.standard),
    )
    _emit(table, "estimate", args, paths, args.codebook)
    if args.plot:
        from wstats._plots import plot_domains

        plot_domains(table, Path(args.plot), overwrite=args.overwrite)
    return 0


def _standard(name: str) -> Any:
    from wstats._reliability import STANDARDS

    if name not in STANDARDS:
        raise UsageError(f"--standard '{name}' is unknown; choose one of "
                         f"{', '.join(STANDARDS)}")
    return STANDARDS[name]


def _run_nonresponse(args: argparse.Namespace) -> int:
    parse_rows(args.rows)
    paths = data_paths(args)
    _check_outputs(args, [*paths, args.codebook])
    from wstats._nonresponse import nonresponse

    codebook = _load_codebook(args.codebook)
    design = design_from(args, codebook)
    needed = needed_columns([*args.variables, *args.by], design, args.where, args.data)
    data = _read(args, codebook, needed)
    table = nonresponse(data, design, args.variables, by=args.by, where=args.where,
                        level=args.level, count_invalid=not args.exclude_invalid,
                        sort_worst=args.worst_first, not_asked=tuple(split_list([args.not_asked])))
    _emit(table, "nonresponse", args, paths, args.codebook)
    if args.plot:
        from wstats._plots import plot_reasons

        plot_reasons(table, Path(args.plot), overwrite=args.overwrite)
    return 0


def _run_bounds(args: argparse.Namespace) -> int:
    parse_rows(args.rows)
    paths = data_paths(args)
    _check_outputs(args, [*paths, args.codebook])
    from wstats._nonresponse import bounds

    codebook = _load_codebook(args.codebook)
    design = design_from(args, codebook)
    data = _read(args, codebook, needed_columns([*args.variables, *args.by], design,
                                                args.where, args.data))
    frame = bounds(data, design, args.variables, by=args.by, where=args.where,
                   level=args.level, reasons=tuple(split_list([args.unknown])))
    frame.attrs.setdefault("design", design.bind(data).summary())
    _emit(frame, "bounds", args, paths, args.codebook)
    return 0


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


def _run_run(args: argparse.Namespace) -> int:
    from wstats._analysis import run_analysis

    for path in run_analysis(args.analysis, overwrite=args.overwrite,
                             progress=sys.stderr.isatty()):
        print(f"wrote {path}", file=sys.stderr)
    return 0


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
    raw = read_raw(args.data, columns=_present(args.data, codebook), rows=parse_rows(args.rows),
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


def _run_convert(args: argparse.Namespace) -> int:
    from wstats._convert import convert

    out = convert(args.data, args.output, overwrite=args.overwrite,
                  progress=sys.stderr.isatty())
    print(f"wrote {out}", file=sys.stderr)
    return 0


def _run_columns(args: argparse.Namespace) -> int:
    from wstats._readers import file_columns

    for name in file_columns(args.data):
        print(name)
    return 0


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
        add_estimate_args, _run_estimate),
    "nonresponse": Command(
        "counts and weighted shares of every missing reason; item nonresponse rates",
        "wstats nonresponse survey.xpt SLEEPHRS FRUITFRQ --codebook codebook.toml --worst-first",
        add_nonresponse_args, _run_nonresponse),
    "bounds": Command(
        "how far proportions could move if don't-know/refused answers were known",
        "wstats bounds survey.xpt GENHLTH INSURED --codebook codebook.toml --by AGE_GRP",
        add_bounds_args, _run_bounds),
    "table": Command(
        "a publication table (with methods paragraph) from a table spec",
        "wstats table table1.toml --format latex -o table1.tex", add_table_args, _run_table),
    "run": Command(
        "run every estimate, table and chart an analysis file names",
        "wstats run analysis.toml --overwrite", add_run_args, _run_run),
    "codebook": Command(
        "draft a codebook from a file, or check one against it",
        "wstats codebook draft survey.sav -o codebook.toml", add_codebook_args, _run_codebook),
    "convert": Command(
        "convert a survey file to a Parquet cache that keeps labels and missing codes",
        "wstats convert survey.xpt survey.parquet", add_convert_args, _run_convert),
    "columns": Command(
        "list the columns of a survey file (metadata only, fast)",
        "wstats columns survey.xpt", add_columns_args, _run_columns),
    "demo": Command(
        "write the built-in demo survey and show what wstats does with it",
        "wstats demo ./wstats-demo", add_demo_args, _run_demo),
}


def build_parser() -> argparse.ArgumentParser:
    """Return the argument parser with every registered subcommand."""
    parser = Parser(
        prog="wstats",
        description="Survey-weighted descriptive statistics that keep the reason every value "
        "is missing.",
        epilog="Run 'wstats COMMAND --help' for a command's options and an example.",
    )
    parser.add_argument("--version", action="version", version=f"wstats {__version__}")
    parser.add_argument("--debug", action="store_true",
                        help="show tracebacks on errors (accepted anywhere on the line)")
    parser.add_argument("--quiet", action="store_true", help="no progress bars")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=Parser)
    for name, cmd in COMMANDS.items():
        p = sub.add_parser(name, help=cmd.help,
                           description=f"{cmd.help[0].upper()}{cmd.help[1:]}.\n\nexample:\n  "
                           f"{cmd.example}",
                           formatter_class=argparse.RawDescriptionHelpFormatter)
        cmd.add_arguments(p)
        p.set_defaults(_run=cmd.run)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit code."""
    argv = list(sys.argv[1:] if argv is None else argv)
    _one_malloc_arena()
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
        print(f"wstats: error: {one_line(str(exc))}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print("wstats: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0


def _one_malloc_arena() -> bool:
    """On glibc, let the worker threads share the main thread's malloc arena.

    Each thread otherwise gets an arena of its own, which keeps freed column-length buffers
    and grows with the file (docs/performance.md, "Memory"). Our threads make few, large
    allocations, so sharing costs no measurable time. Elsewhere this does nothing. Returns
    whether the setting was taken.
    """
    if not sys.platform.startswith("linux"):
        return False
    import ctypes

    try:
        return bool(ctypes.CDLL("libc.so.6").mallopt(_M_ARENA_MAX, 1) == 1)
    except (OSError, AttributeError):  # not glibc (e.g. musl): leave the allocator alone
        return False


_M_ARENA_MAX = -8  # glibc's mallopt parameter number (malloc.h)


def _show_warnings_as_lines(debug: bool) -> None:
    """Print each wstats warning once, as one line on stderr; others only with --debug."""
    import warnings

    def show(message: Warning | str, category: type[Warning], *_: Any, **__: Any) -> None:
        if issubclass(category, WstatsWarning):
            print(f"wstats: warning: {one_line(str(message))}", file=sys.stderr)
        elif debug:
            print(f"wstats: library warning ({category.__name__}): {message}", file=sys.stderr)

    warnings.showwarning = show
    warnings.simplefilter("once", WstatsWarning)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
