"""The program: parse the command line, run one command, print; errors caught once, here.

Every subcommand is registered in :data:`wstats.cli.commands.COMMANDS`. A
:class:`~wstats.errors.WstatsError` is caught once, at the edge, and printed as one line
(``--debug`` shows the traceback).
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Sequence
from typing import Any

from wstats import __version__
from wstats.cli.args import Parser, one_line
from wstats.cli.commands import COMMANDS
from wstats.errors import WstatsError, WstatsWarning

__all__ = ["build_parser", "main"]

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
    _one_blas_thread()
    debug = "--debug" in argv
    _show_warnings_as_lines(debug)
    argv = [a for a in argv if a != "--debug"]
    from wstats.readers.undo import removing_created

    previous = _terminate_like_interrupt()
    try:
        with removing_created():  # a failed or interrupted command leaves nothing it made
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
    except KeyboardInterrupt as exc:
        stopped = isinstance(exc, Terminated)
        print("wstats: interrupted" + (" (SIGTERM)" if stopped else ""), file=sys.stderr)
        return 143 if stopped else 130
    except BrokenPipeError:
        return 0
    finally:
        _restore_terminate(previous)


class Terminated(KeyboardInterrupt):
    """SIGTERM arrived: unwound like Ctrl-C, so the outputs already made are removed again."""


def _terminate_like_interrupt() -> Any:
    """Make SIGTERM raise :class:`Terminated` in the main thread; return the old handler."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        return None

    def stop(signum: int, frame: Any) -> None:
        raise Terminated()

    return signal.signal(signal.SIGTERM, stop)


def _restore_terminate(previous: Any) -> None:
    """Put back the SIGTERM handler that was there before :func:`main`."""
    import signal

    if previous is not None:
        signal.signal(signal.SIGTERM, previous)


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


def _one_blas_thread() -> None:
    """Ask numpy's OpenBLAS for one thread, unless the user chose a number.

    wstats runs its passes on threads of its own and barely uses BLAS (dot products of a
    tile), but OpenBLAS starts a worker per core when numpy is imported and lets it spin
    after each call, taking a core from the reader's and the row passes' threads: A's CPU
    time 0.49 -> 0.38 s (docs/performance.md). Works only before numpy is first imported,
    which the command line does later.
    """
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")


def _show_warnings_as_lines(debug: bool) -> None:
    """Print each wstats warning once per command, as one line on stderr; others with --debug.

    The shown messages are remembered here: the warnings module's own "once" registry is
    cleared whenever a library enters ``warnings.catch_warnings`` (pandas does, often), and a
    `table` or `run` made the same warning once per estimate.
    """
    import warnings

    shown: set[str] = set()

    def show(message: Warning | str, category: type[Warning], *_: Any, **__: Any) -> None:
        if issubclass(category, WstatsWarning):
            line = one_line(str(message))
            if line not in shown:
                shown.add(line)
                print(f"wstats: warning: {line}", file=sys.stderr)
        elif debug:
            print(f"wstats: library warning ({category.__name__}): {message}", file=sys.stderr)

    warnings.showwarning = show
    warnings.simplefilter("always", WstatsWarning)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
