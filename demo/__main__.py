"""Command line: ``python -m demo OUTDIR [--rows N] [--columns M] [--seed S] [--formats ...]``."""

from __future__ import annotations

import argparse
import sys
import time
from collections.abc import Sequence

from demo.sample import DEFAULT_ROWS, SAMPLE_SEED
from demo.write import write_demo


def _parser() -> argparse.ArgumentParser:
    """Build the argument parser."""
    p = argparse.ArgumentParser(
        prog="python -m demo",
        description="Write the fictional TBCHS demo survey: data files, codebook, analysis file.",
    )
    p.add_argument("outdir", help="folder to write into (created if missing)")
    p.add_argument("--rows", type=int, default=None,
                   help=f"respondents (default {DEFAULT_ROWS})")
    p.add_argument("--columns", type=int, default=None,
                   help="total columns; extra ones are padding items px_001...")
    p.add_argument("--seed", type=int, default=SAMPLE_SEED, help="sample seed")
    p.add_argument("--formats", default="xpt,sav,dta",
                   help="comma-separated subset of xpt,sav,dta (default all three)")
    return p


def main(argv: Sequence[str] | None = None) -> int:
    """Write the demo files and print what was written."""
    args = _parser().parse_args(argv)
    formats = tuple(f.strip() for f in args.formats.split(",") if f.strip())
    start = time.perf_counter()
    try:
        paths = write_demo(args.outdir, args.rows, args.columns, formats, args.seed)
    except ValueError as exc:
        print(f"python -m demo: {exc}", file=sys.stderr)
        return 2
    for kind, path in paths.items():
        print(f"{kind:9s} {path}")
    print(f"done in {time.perf_counter() - start:.1f} s", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
