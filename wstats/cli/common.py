"""What every command shares: reading the data asked for, checking outputs, emitting results."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from wstats.cli.args import format_for, parse_rows
from wstats.errors import UsageError, require_package

__all__ = ["Command"]

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
    from wstats.decoding.codebook import load_codebook

    return load_codebook(path)


def _read(args: argparse.Namespace, codebook: Any, needed: Sequence[str]) -> Any:
    from wstats.decoding.load import read

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
    if key not in registry:  # list the --format values ('table' is the terminal's)
        names = sorted("table" if k == "terminal" else k for k in registry)
        raise UsageError(f"format '{fmt}' is not available for {kind}; choose one of "
                         f"{', '.join(names)}")
    if key == "terminal" and not args.output:
        _print_rich(registry[key](obj))
        return
    from wstats.readers.output import atomic_write

    prov = _provenance(obj, inputs, codebook_path)
    text = registry[key](obj, provenance=prov)
    if key == "terminal":
        from wstats.render import plain_text

        text = plain_text(text, prov, width=120)
    if args.output:
        _not_an_input(args.output, [*inputs, codebook_path])
        atomic_write(Path(args.output), text, overwrite=args.overwrite)
        print(f"wrote {args.output}", file=sys.stderr)
    else:
        sys.stdout.write(text if isinstance(text, str) else text.decode())


def _provenance(obj: Any, inputs: Sequence[str], codebook_path: str | None) -> dict[str, Any]:
    """Return the provenance record of a result of this command (its design, inputs, line)."""
    from wstats.reports.provenance import provenance

    attrs = getattr(obj, "attrs", None) or {}
    design = getattr(obj, "design", None) or attrs.get("design") or {}
    return provenance([Path(p) for p in inputs], Path(codebook_path) if codebook_path else None,
                      dict(design), _command_line())


def _check_outputs(args: argparse.Namespace, inputs: Sequence[str | None]) -> None:
    """Refuse unwritable outputs before any work is done (they are checked again at write).

    When the result will be written with its provenance, the inputs' SHA-256 digests are
    started on another thread now, so that hashing overlaps reading and estimating.
    """
    from wstats.readers.output import check_output, prefetch_sha256

    if getattr(args, "plot", None):
        require_package("charts", "--plot")
    if format_for(args) == "xlsx":
        require_package("xlsx files")
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

    console = Console(soft_wrap=False)
    if console.is_terminal:
        console.print(renderable)
        return
    from wstats.render import strip_line_ends

    # into a file or a pipe: no padding at line ends (diffs, logs and copied text stay clean)
    with console.capture() as captured:
        console.print(renderable)
    sys.stdout.write(strip_line_ends(captured.get()))
