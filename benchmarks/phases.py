"""Time the phases of one wstats command inside its process (the profile in performance.md).

    OPENBLAS_NUM_THREADS=1 .venv/bin/python benchmarks/phases.py estimate FILE.xpt VARS... \\
        --codebook CB.toml --weight W --strata S --psu P --format json > /dev/null

Prints one JSON line on stderr: wall and CPU seconds (all threads) of the imports, the
codebook, reading, decoding, estimation and rendering. The stage functions are wrapped with
timers; numpy is imported first to time it alone, so set ``OPENBLAS_NUM_THREADS=1`` yourself
as the command line does. Run it several times and take medians: one process is one sample.
"""

from __future__ import annotations

import json
import sys
import time
from collections.abc import Callable
from typing import Any

T0, C0 = time.perf_counter(), time.process_time()
TIMES: dict[str, float] = {}


def wrap(owner: Any, name: str, label: str) -> None:
    """Replace ``owner.name`` by a function that adds its wall and CPU time to TIMES."""
    inner: Callable[..., Any] = getattr(owner, name)

    def timed(*args: Any, **kwargs: Any) -> Any:
        wall, cpu = time.perf_counter(), time.process_time()
        try:
            return inner(*args, **kwargs)
        finally:
            TIMES[label] = TIMES.get(label, 0.0) + time.perf_counter() - wall
            TIMES[label + "_cpu"] = TIMES.get(label + "_cpu", 0.0) + time.process_time() - cpu

    setattr(owner, name, timed)


def main() -> None:
    """Import, wrap the stages, run the command line, print the phases."""
    import numpy  # noqa: F401  (timed alone)

    TIMES["numpy_import"] = time.perf_counter() - T0
    import wstats.cli.commands as commands
    import wstats.cli.main as cli
    import wstats.decoding.codebook as codebook
    import wstats.estimation.estimate as estimate
    import wstats.readers.dispatch as dispatch

    TIMES["imports"], TIMES["imports_cpu"] = time.perf_counter() - T0, time.process_time() - C0
    wrap(commands, "_load_codebook", "codebook")
    wrap(dispatch, "read_raw", "read")
    wrap(codebook.Codebook, "decode", "decode")
    wrap(estimate, "estimate", "estimate")
    wrap(commands, "_emit", "render")
    cli.main(sys.argv[1:])
    TIMES["total"], TIMES["total_cpu"] = time.perf_counter() - T0, time.process_time() - C0
    print(json.dumps({k: round(v, 4) for k, v in TIMES.items()}), file=sys.stderr)


if __name__ == "__main__":
    main()
