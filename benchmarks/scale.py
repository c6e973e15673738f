"""Scale benchmark: the Dask engine on the benchmark survey repeated 1x, 4x and 10x.

One command (from the repository root; needs ``pip install -e '.[dask]'``):

    .venv/bin/python benchmarks/scale.py [--rows 464664] [--columns 283] [--scales 1,4,10]
                                         [--workers N] [--memory-scales 1,4] [--cache DIR]
                                         [--scheduler ADDRESS] [--json OUT.json]

It writes the demo-scenario survey once (cached outside the repository, as benchmarks/run.py
does) and its Parquet cache, then for each scale k a folder of k Parquet files (hard links of
the one file: no extra disk) read as k pooled periods, partition by partition. For each scale
it estimates the 10 items of benchmarks/run.py, overall and by the 5-level dm_age5 domain, on
a fresh local Dask cluster (or on --scheduler), and reports:

  - wall time, and its ratio to the 1x time (target: within 12x at 10x);
  - peak resident memory of each worker (the largest), and its ratio to 1x (target: flat);
  - where the in-memory engine fits (--memory-scales), the largest relative difference
    between its estimates and standard errors and the Dask engine's (target: 1e-10).

Do not run the default sizes on a shared machine: 10x is about 4.6 million rows x 283
columns. ``--rows 20000 --columns 80 --scales 1,2`` shows that it works in a minute.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import time
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(HERE))

from run import DOMAIN, PSU, STRATA, TEN, WEIGHT, machine  # noqa: E402


def build(cache: Path, rows: int, columns: int) -> tuple[Path, Path]:
    """Write the survey once (transport file, then its Parquet cache); return it, codebook."""
    folder = cache / f"tbchs_{rows}x{columns}"
    parquet, xpt = folder / "tbchs_sample.parquet", folder / "tbchs_sample.xpt"
    if not parquet.exists():
        if not xpt.exists():
            print(f"building {rows:,} x {columns} demo-scenario file in {folder} ...", flush=True)
            from demo import write_demo

            write_demo(folder, rows=rows, columns=columns, formats=("xpt",))
        from wstats import convert

        convert(xpt, parquet)
    return parquet, folder / "tbchs_codebook.toml"


def dataset(parquet: Path, k: int) -> Path:
    """Return a folder of *k* hard links of *parquet* (k periods of the same survey)."""
    folder = parquet.parent / f"scale_{k}x"
    folder.mkdir(exist_ok=True)
    for i in range(k):
        part = folder / f"part{i + 1:02d}.parquet"
        if not part.exists():
            os.link(parquet, part)
    return folder


def _peak_rss_mb(client: Any) -> float:
    """Return the largest peak resident memory of the cluster's workers, in MiB.

    The high-water mark of each worker's own address space (VmHWM), not ``ru_maxrss``: a
    worker started by this script inherits the script's ``ru_maxrss`` through exec, and the
    script grows when it runs the in-memory engine for the equality check (a worker at 10x
    then showed the script's 740 MiB instead of its own 390).
    """
    def peak() -> float:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
        import resource  # not Linux: the best there is

        return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024

    return max(client.run(peak).values())


def run_scale(folder: Path, codebook: Path, workers: int, scheduler: str | None
              ) -> tuple[float, float, Any]:
    """Estimate on the Dask engine; return (wall seconds, peak worker MiB, the table)."""
    import logging

    from distributed import Client, LocalCluster

    from wstats import Design, estimate

    design = Design(WEIGHT, strata=STRATA, psu=PSU)
    cluster = None if scheduler else LocalCluster(
        n_workers=workers, threads_per_worker=1, dashboard_address=None,
        silence_logs=logging.ERROR)
    address = scheduler or cluster.scheduler_address  # type: ignore[union-attr]
    with Client(address) as client:
        start = time.perf_counter()
        table = estimate(str(folder), design, TEN, by=[DOMAIN], codebook=codebook,
                         engine="dask", scheduler=address)
        wall = time.perf_counter() - start
        peak = _peak_rss_mb(client)
    if cluster is not None:
        cluster.close()
    return wall, peak, table


def largest_difference(a: Any, b: Any) -> float:
    """Return the largest relative difference of estimates and SEs of two tables."""
    import numpy as np

    worst = 0.0
    for col in ("estimate", "se"):
        x, y = a.frame[col].to_numpy(float), b.frame[col].to_numpy(float)
        ok = np.isfinite(x) & (x != 0)
        worst = max(worst, float(np.max(np.abs(x[ok] - y[ok]) / np.abs(x[ok]), initial=0.0)))
    return worst


def main() -> None:
    """Build (once), run every scale, print the ratios."""
    ap = argparse.ArgumentParser(description=(__doc__ or "").splitlines()[0])
    ap.add_argument("--rows", type=int, default=464_664)
    ap.add_argument("--columns", type=int, default=283)
    ap.add_argument("--scales", default="1,4,10")
    ap.add_argument("--memory-scales", default="1,4",
                    help="scales also run in memory for the equality check")
    ap.add_argument("--workers", type=int, default=os.cpu_count() or 1)
    ap.add_argument("--scheduler", help="a running cluster instead of a local one")
    ap.add_argument("--cache", type=Path, default=Path.home() / ".cache" / "wstats-bench")
    ap.add_argument("--json", type=Path)
    args = ap.parse_args()
    parquet, codebook = build(args.cache, args.rows, args.columns)
    info = machine()
    print(f"machine: {info['cores']} cores, {info['ram_gib']} GiB, load {info['load_average']}; "
          f"{args.workers} workers; base {args.rows:,} rows x {args.columns} columns")
    rows: dict[int, dict[str, Any]] = {}
    for k in [int(x) for x in args.scales.split(",")]:
        folder = dataset(parquet, k)
        wall, peak, table = run_scale(folder, codebook, args.workers, args.scheduler)
        row: dict[str, Any] = {"rows": k * args.rows, "wall_s": wall, "peak_worker_mb": peak}
        if str(k) in args.memory_scales.split(","):
            from wstats import Design, estimate

            memory = estimate(str(folder), Design(WEIGHT, strata=STRATA, psu=PSU), TEN,
                              by=[DOMAIN], codebook=codebook)
            row["max_rel_diff_vs_memory"] = largest_difference(memory, table)
        rows[k] = row
        base = rows[min(rows)]
        row["time_ratio"] = wall / base["wall_s"]
        row["memory_ratio"] = peak / base["peak_worker_mb"]
        diff = row.get("max_rel_diff_vs_memory")
        shown = "" if diff is None else f"  max rel. diff vs memory {diff:.1e}"
        print(f"  {k:>3}x {k * args.rows:>11,} rows  {wall:8.2f} s (x{row['time_ratio']:.2f})  "
              f"peak/worker {peak:7.0f} MiB (x{row['memory_ratio']:.2f}){shown}", flush=True)
    if args.json:
        args.json.write_text(json.dumps({"machine": info, "scales": rows}, indent=2) + "\n")


if __name__ == "__main__":
    main()
