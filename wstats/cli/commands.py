"""The commands: for each, parse its options, call one library function, render, print.

Every subcommand is registered in :data:`COMMANDS` with a help text and an example; the
program around them is :mod:`wstats.cli.main`.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from wstats.cli.args import (
    add_bounds_args,
    add_compare_args,
    add_estimate_args,
    add_nonresponse_args,
    data_paths,
    design_from,
    format_for,
    needed_columns,
    parse_rows,
    ratio_pair,
    split_list,
)
from wstats.cli.args_files import (
    add_codebook_args,
    add_columns_args,
    add_convert_args,
    add_demo_args,
    add_look_args,
    add_run_args,
    add_table_args,
)
from wstats.cli.common import (
    Command,
    _check_outputs,
    _emit,
    _load_codebook,
    _not_an_input,
    _print_rich,
    _provenance,
    _read,
)
from wstats.cli.first_look import run_columns, run_look
from wstats.errors import UsageError, require_package

__all__ = ["COMMANDS"]

def _run_estimate(args: argparse.Namespace) -> int:
    parse_rows(args.rows)  # usage mistakes first, before any file is touched
    statistics = split_list([args.statistics])
    quantiles = _quantiles(args.quantiles, statistics)
    if args.margins and len(args.by) < 2:  # nothing to add: it would be silently ignored
        raise UsageError("--margins adds each by-variable alone to a crossed --by A B; with "
                         f"{len(args.by)} by-variable{'' if len(args.by) == 1 else 's'} there "
                         "is no crossing: leave --margins out")
    paths = data_paths(args)
    _check_outputs(args, [*paths, args.codebook])
    from wstats.estimation.estimate import estimate

    codebook = _load_codebook(args.codebook)
    design = design_from(args, codebook)
    ratios = [ratio_pair(r) for r in args.ratio]
    variables = list(args.variables)
    if not variables and not ratios:
        raise UsageError("wstats estimate: name at least one VAR or give --ratio NUM/DEN "
                         "(see 'wstats estimate --help')")
    age = [args.age_adjust] if args.age_adjust else []
    data = _engine_data(args, codebook, design,
                        [*variables, *[x for r in ratios for x in r], *args.by, *age])
    table = estimate(
        data, design, variables, engine=args.engine, codebook=codebook,
        scheduler=args.scheduler, statistics=statistics or None, by=args.by,
        where=args.where, categorical=args.categorical, ratios=ratios,
        quantiles=quantiles, level=args.level,
        proportion_ci=args.proportion_ci, reliability=_standard(_reliability_name(args)),
        margins=args.margins, age_adjust=args.age_adjust,
        standard=args.standard if args.age_adjust else None,
    )
    _emit(table, "estimate", args, paths, args.codebook)
    if args.plot:
        from wstats.reports.plots import plot_domains

        plot_domains(table, Path(args.plot), overwrite=args.overwrite,
                     provenance=_provenance(table, paths, args.codebook))
    return 0


def _quantiles(text: str | None, statistics: Sequence[str]) -> list[float]:
    """Return the probabilities of --quantiles (default 0.5), checked against --statistics.

    Given without a quantile to estimate, they would be ignored and a mean shown instead.
    """
    if text is None:
        return [0.5]
    if "quantile" not in statistics:
        raise UsageError(f"--quantiles {text} needs --statistics quantile (e.g. --statistics "
                         f"quantile --quantiles {text})")
    try:
        return [float(q) for q in text.split(",") if q.strip()]
    except ValueError:
        raise UsageError(f"--quantiles '{text}' is not a comma list of probabilities between "
                         "0 and 1 (e.g. --quantiles 0.25,0.5,0.75)") from None


def _reliability_name(args: argparse.Namespace) -> str:
    """Return the reliability standard: --reliability, else --standard without --age-adjust."""
    if args.reliability:
        return str(args.reliability)
    if args.standard and not args.age_adjust:
        return str(args.standard)
    return "nchs-2017"


def _in_memory_only(args: argparse.Namespace, command: str, what: str) -> None:
    """Refuse --engine dask for a command the Dask engine does not run yet, saying why."""
    if args.engine != "memory":
        raise UsageError(f"{command} runs in memory only ({what} need the rows in memory); "
                         "the Dask engine serves estimate and nonresponse (docs/scale.md): "
                         "leave out --engine dask")


def _run_compare(args: argparse.Namespace) -> int:
    _in_memory_only(args, "compare", "the covariance of the group estimates and Rao-Scott's "
                    "design effects")
    parse_rows(args.rows)
    paths = data_paths(args)  # several files: a glob, a folder or paths before VAR
    _check_outputs(args, [*paths, args.codebook, args.standard])
    from wstats.reports.compare import compare

    codebook = _load_codebook(args.codebook)
    design = design_from(args, codebook)
    age = [args.age_adjust] if args.age_adjust else []
    needed = needed_columns([*args.variables, args.by, *age], design, args.where, args.data)
    data = _read(args, codebook, needed)
    result = compare(data, design, args.variables, by=args.by, reference=args.reference,
                     pairs=args.pairs, adjust_p=args.adjust_p, trend=args.trend,
                     reasons=args.reasons, where=args.where, categorical=args.categorical,
                     level=args.level, age_adjust=args.age_adjust, standard=args.standard,
                     period_df=args.period_df,
                     not_asked=tuple(split_list([args.not_asked])))
    _emit(result, "compare", args, paths, args.codebook)
    return 0


def _engine_data(args: argparse.Namespace, codebook: Any, design: Any, names: list[str]
                 ) -> Any:
    """Return the data read in memory, or the files themselves for the Dask engine."""
    if args.scheduler and args.engine != "dask":
        raise UsageError("--scheduler needs --engine dask")
    if args.rows and args.engine == "dask":
        raise UsageError("--rows reads a first look in memory; drop it or --engine dask")
    if args.engine == "dask":
        return args.data  # the workers read the files
    return _read(args, codebook, needed_columns(names, design, args.where, args.data))


def _standard(name: str) -> Any:
    from wstats.estimation.reliability import STANDARDS

    if name not in STANDARDS:
        raise UsageError(f"reliability standard '{name}' is unknown; choose one of "
                         f"{', '.join(STANDARDS)} (a standard population for age adjustment "
                         "needs --age-adjust AGEVAR)")
    return STANDARDS[name]


def _run_nonresponse(args: argparse.Namespace) -> int:
    parse_rows(args.rows)
    paths = data_paths(args)
    _check_outputs(args, [*paths, args.codebook])
    from wstats.reports.nonresponse import nonresponse

    codebook = _load_codebook(args.codebook)
    design = design_from(args, codebook)
    data = _engine_data(args, codebook, design, [*args.variables, *args.by])
    table = nonresponse(data, design, args.variables, by=args.by, where=args.where,
                        level=args.level, count_invalid=not args.exclude_invalid,
                        sort_worst=args.worst_first, not_asked=tuple(split_list([args.not_asked])),
                        engine=args.engine, codebook=codebook, scheduler=args.scheduler)
    _emit(table.showing_shares() if args.shares else table, "nonresponse", args, paths,
          args.codebook)
    if args.plot:
        from wstats.reports.plots import plot_reasons

        plot_reasons(table, Path(args.plot), overwrite=args.overwrite,
                     provenance=_provenance(table, paths, args.codebook))
    return 0


def _run_bounds(args: argparse.Namespace) -> int:
    _in_memory_only(args, "bounds", "the bounds")
    parse_rows(args.rows)
    paths = data_paths(args)
    _check_outputs(args, [*paths, args.codebook])
    from wstats.reports.bounds import bounds

    codebook = _load_codebook(args.codebook)
    design = design_from(args, codebook)
    data = _read(args, codebook, needed_columns([*args.variables, *args.by], design,
                                                args.where, args.data))
    frame = bounds(data, design, args.variables, by=args.by, where=args.where,
                   level=args.level, reasons=tuple(split_list([args.unknown])),
                   reliability=_standard(args.reliability), categorical=args.categorical)
    _emit(frame, "bounds", args, paths, args.codebook)
    return 0


def _run_table(args: argparse.Namespace) -> int:
    from wstats.reports.tables import build_table, load_table_spec

    spec = load_table_spec(args.spec)
    if format_for(args) in ("xlsx", "docx") and not args.output:
        raise UsageError(f"{format_for(args)} output needs -o FILE.{format_for(args)}")
    wanted = {format_for(args)} if args.output or args.format else {f for _, f in spec.outputs}
    for fmt, feature in (("xlsx", "xlsx files"), ("docx", "Word files")):
        if fmt in wanted:
            require_package(feature, str(args.spec))  # before any work is done
    table = build_table(spec, progress=sys.stderr.isatty())
    if not args.output and not args.format and table.outputs:
        from wstats.render import write_table

        for path in write_table(table, overwrite=args.overwrite):
            print(f"wrote {path}", file=sys.stderr)
        return 0
    _emit(table, "table", args, [str(spec.data)], str(spec.codebook) if spec.codebook else None)
    return 0


def _run_run(args: argparse.Namespace) -> int:
    from wstats.cli.analysis import run_analysis

    for path in run_analysis(args.analysis, overwrite=args.overwrite,
                             progress=sys.stderr.isatty()):
        print(f"wrote {path}", file=sys.stderr)
    return 0


def _run_codebook(args: argparse.Namespace) -> int:
    from wstats.readers.dispatch import read_raw

    if args.action == "draft":
        from wstats.decoding.draft import draft_codebook

        text = draft_codebook(read_raw(args.data, progress=sys.stderr.isatty()))
        if args.output:
            from wstats.readers.output import atomic_write

            _not_an_input(args.output, [args.data])
            atomic_write(Path(args.output), text, overwrite=args.overwrite)
            print(f"wrote {args.output}", file=sys.stderr)
        else:
            sys.stdout.write(text)
        return 0
    from wstats.decoding.draft import check_codebook

    codebook = _load_codebook(args.codebook)
    raw = read_raw(args.data, columns=_present(args.data, codebook), rows=parse_rows(args.rows),
                   progress=sys.stderr.isatty())
    report = check_codebook(raw, codebook)
    from wstats.render import render_check

    _print_rich(render_check(report))
    return 0 if report.ok else 1


def _present(path: str, codebook: Any) -> list[str]:
    from wstats.readers.dispatch import file_columns

    in_file = set(file_columns(path))
    wanted = codebook.raw_columns_for(list(codebook.variables))
    return [c for c in wanted if c in in_file]


def _run_convert(args: argparse.Namespace) -> int:
    from wstats.readers.cache import convert

    out = convert(args.data, args.output, overwrite=args.overwrite,
                  progress=sys.stderr.isatty())
    print(f"wrote {out}", file=sys.stderr)
    return 0


def _run_demo(args: argparse.Namespace) -> int:
    from wstats.cli.demo import run_demo

    run_demo(Path(args.folder), overwrite=args.overwrite, rows=args.rows, columns=args.columns,
             show=_print_rich, periods=args.periods)
    return 0


COMMANDS: dict[str, Command] = {
    "estimate": Command(
        "weighted means, totals, proportions, ratios, quantiles with design-based SEs",
        "wstats estimate survey.xpt sl_hours hs_rate --weight wt_final --strata ds_strat "
        "--psu ds_psu --by dm_age5 --codebook codebook.toml",
        add_estimate_args, _run_estimate),
    "compare": Command(
        "differences between groups with design-based SEs, Rao-Scott and Wald tests, trends",
        "wstats compare survey.xpt bd_bmi hs_rate --by dm_age5 --codebook codebook.toml",
        add_compare_args, _run_compare),
    "nonresponse": Command(
        "counts and weighted shares of every missing reason; item nonresponse rates",
        "wstats nonresponse survey.xpt sl_hours fd_fruit --codebook codebook.toml --worst-first",
        add_nonresponse_args, _run_nonresponse),
    "bounds": Command(
        "how far proportions could move if don't-know/refused answers were known",
        "wstats bounds survey.xpt hs_rate ac_cover --codebook codebook.toml --by dm_age5",
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
        "list the columns of a survey file: label, type, blanks, distinct values, declared "
        "missing codes",
        "wstats columns survey.xpt --search sleep", add_columns_args, run_columns),
    "look": Command(
        "look at variables: raw codes with counts and labels, what decoding makes of them, a "
        "summary and a chart",
        "wstats look survey.xpt sl_hours hs_rate --codebook codebook.toml --weight wt_final",
        add_look_args, run_look),
    "demo": Command(
        "write the built-in demo survey and show what wstats does with it",
        "wstats demo ./wstats-demo", add_demo_args, _run_demo),
}

