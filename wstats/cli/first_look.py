"""The first-look commands: ``wstats columns`` (what a file holds) and ``wstats look`` (a
variable's raw codes, their decoding, a summary and a chart). Parse, one library call,
render at the screen's width, print."""

from __future__ import annotations

import argparse
import shutil
import sys
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any

from wstats.cli.args import format_for, parse_rows
from wstats.cli.common import _check_outputs, _load_codebook, _not_an_input, _progress_wanted

__all__ = ["run_columns", "run_look"]


def run_columns(args: argparse.Namespace) -> int:
    """Run ``wstats columns``."""
    from wstats.readers.overview import describe_columns

    if args.names_only:
        view = describe_columns(args.data, search=args.search, counts=False,
                                encoding=args.encoding)
        sys.stdout.write("".join(f"{c.name}\n" for c in view.columns))
        return 0
    _check_outputs(args, [args.data])
    view = describe_columns(args.data, search=args.search, encoding=args.encoding,
                            progress=_progress_wanted(args))
    _emit_text(view, "columns", args, [args.data])
    return 0


def run_look(args: argparse.Namespace) -> int:
    """Run ``wstats look``."""
    parse_rows(args.rows)
    _check_outputs(args, [args.data, args.codebook])
    from wstats.reports.look import look

    codebook = _load_codebook(args.codebook)
    weight = args.weight or (getattr(codebook, "design", None) or {}).get("weight")
    result = look(args.data, args.variables, codebook=codebook, weight=weight,
                  rows=parse_rows(args.rows), encoding=args.encoding)
    _emit_text(result, "look", args, [args.data])
    return 0


def _emit_text(obj: Any, kind: str, args: argparse.Namespace, inputs: Sequence[str]) -> None:
    """Render a first-look result (plain text at the screen's width, or a file format)."""
    from wstats import render

    registry: Mapping[str, Callable[..., str]] = getattr(render, f"{kind.upper()}_RENDERERS")
    fmt = format_for(args)
    if fmt == "table":
        width = shutil.get_terminal_size((80, 24)).columns if not args.output else 80
        text = registry["terminal"](obj, width=max(width, 40))
    else:
        text = registry[fmt](obj)
    if args.output:
        from wstats.readers.output import atomic_write

        _not_an_input(args.output, inputs)
        atomic_write(Path(args.output), text, overwrite=args.overwrite)
        print(f"wrote {args.output}", file=sys.stderr)
    else:
        sys.stdout.write(text)
