"""Benchmark wstats against the baselines named in docs/performance.md.

One command:  .venv/bin/python benchmarks/run.py [--repeat 5] [--cache DIR]

It builds the 464,664 x 283 demo-scenario transport file once (cached outside the repository,
default ~/.cache/wstats-bench), its Parquet cache and a 2x-rows copy, then times whole
processes in the same run, each several times (median and min-max), with the peak resident
memory of each process from ``os.wait4``:

  A  wstats estimate FILE.xpt, 10 variables, weight/strata/PSU, codebook, JSON out
  B  pyreadstat.read_xport(FILE, usecols=the same 13 columns)
  C  cat FILE > /dev/null
  D  wstats estimate FILE.xpt on all item variables by a 5-level domain
  E  pyreadstat.read_xport(FILE) (every column)
  F  A on the Parquet cache
  A2 A on the 2x-rows file (memory must not grow beyond the selected columns)

and prints the ratios A/B, A/C, D/E, F/B against their targets, and the machine.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROWS, COLUMNS = 464_664, 283
HERE = Path(__file__).resolve().parent
TEN = ["GENHLTH", "SLEEPHRS", "FRUITFRQ", "SYSBP", "VIGDAYS", "PHYSDAYS", "MENTDAYS",
       "SMKNOW", "BMI", "INCGRP"]
DESIGN = ["--weight", "FINALWT", "--strata", "STRAT_ID", "--psu", "CLUSTRID"]


def _python() -> str:
    return sys.executable


def _wstats() -> list[str]:
    return [_python(), "-m", "wstats", "--quiet"]


def timed(cmd: list[str], stdout: int | None = subprocess.DEVNULL) -> tuple[float, float]:
    """Run *cmd*; return (wall seconds, peak RSS in MB) of that process alone."""
    start = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=stdout, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - start
    err = proc.stderr.read().decode() if proc.stderr else ""
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode != 0:
        raise SystemExit(f"benchmark command failed ({proc.returncode}): {' '.join(cmd)}\n{err}")
    return wall, usage.ru_maxrss / 1024.0


def measure(name: str, cmd: list[str], repeat: int) -> dict[str, float]:
    """Time *cmd* *repeat* times after one warm-up run."""
    timed(cmd)
    runs = [timed(cmd) for _ in range(repeat)]
    walls = [w for w, _ in runs]
    row = {"median": statistics.median(walls), "min": min(walls), "max": max(walls),
           "rss_mb": max(r for _, r in runs)}
    print(f"  {name:<3} {row['median']:8.3f} s  (min {row['min']:.3f}, max {row['max']:.3f})"
          f"  peak RSS {row['rss_mb']:8.1f} MB   {' '.join(cmd[-6:])[:70]}", flush=True)
    return row


def build(cache: Path, rows: int) -> dict[str, Path]:
    """Write the demo-scenario files for *rows* rows once; return their paths."""
    folder = cache / f"tbchs_{rows}x{COLUMNS}"
    xpt = folder / "tbchs_sample.xpt"
    if not xpt.exists():
        print(f"building {rows:,} x {COLUMNS} demo-scenario file in {folder} (once) ...",
              flush=True)
        sys.path.insert(0, str(HERE.parent))
        from demo import write_demo

        write_demo(folder, rows=rows, columns=COLUMNS, formats=("xpt",), overwrite=True)
    parquet = folder / "tbchs_sample.parquet"
    if not parquet.exists():
        subprocess.run([*_wstats(), "convert", str(xpt), str(parquet)], check=True)
    return {"xpt": xpt, "parquet": parquet, "codebook": folder / "tbchs_codebook.toml"}


def item_columns(xpt: Path) -> list[str]:
    """Return every column except the design, id and domain columns."""
    out = subprocess.run([*_wstats(), "columns", str(xpt)], check=True, capture_output=True,
                         text=True).stdout.split()
    skip = {"FINALWT", "STRAT_ID", "CLUSTRID", "RESP_ID", "AGE_GRP"}
    return [c for c in out if c not in skip]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--cache", type=Path, default=Path.home() / ".cache" / "wstats-bench")
    args = ap.parse_args()
    files = build(args.cache, ROWS)
    double = build(args.cache, 2 * ROWS)
    xpt, cb = str(files["xpt"]), str(files["codebook"])
    items = item_columns(files["xpt"])
    usecols = json.dumps([*TEN, "FINALWT", "STRAT_ID", "CLUSTRID"])
    est = ["estimate", "--codebook", cb, *DESIGN, "--format", "json"]
    cmds = {
        "A": [*_wstats(), est[0], xpt, *TEN, *est[1:]],
        "B": [_python(), "-c", f"import pyreadstat; pyreadstat.read_xport({xpt!r}, "
              f"usecols={usecols})"],
        "C": ["sh", "-c", f"cat '{xpt}' > /dev/null"],
        "D": [*_wstats(), est[0], xpt, *items, *est[1:], "--by", "AGE_GRP"],
        "E": [_python(), "-c", f"import pyreadstat; pyreadstat.read_xport({xpt!r})"],
        "F": [*_wstats(), est[0], str(files["parquet"]), *TEN, *est[1:]],
        "A2": [*_wstats(), est[0], str(double["xpt"]), *TEN, "--codebook",
               str(double["codebook"]), *DESIGN, "--format", "json"],
    }
    print(f"machine: {os.cpu_count()} cores, "
          f"{os.sysconf('SC_PAGE_SIZE') * os.sysconf('SC_PHYS_PAGES') / 2**30:.1f} GiB RAM, "
          f"{platform.platform()}, Python {platform.python_version()}")
    print(f"file: {xpt} ({files['xpt'].stat().st_size / 2**20:,.0f} MiB), "
          f"{len(items)} item variables; each command {args.repeat} runs after a warm-up")
    res = {k: measure(k, c, args.repeat if k != "E" else max(2, args.repeat // 2))
           for k, c in cmds.items()}
    ratio = {k: res[a]["median"] / res[b]["median"]
             for k, (a, b) in {"A/B": ("A", "B"), "A/C": ("A", "C"), "D/E": ("D", "E"),
                               "F/B": ("F", "B")}.items()}
    targets = {"A/B": 0.10, "A/C": 5.0, "D/E": 0.20, "F/B": None}
    print("ratios (median wall time):")
    for k, v in ratio.items():
        t = targets[k]
        verdict = "" if t is None else ("  target <= %.2f: %s" % (t, "met" if v <= t else "MISSED"))
        print(f"  {k:<4} {v:8.3f}{verdict}")
    selected_mb = len(items) * ROWS * 8 / 2**20
    print("memory:")
    print(f"  A peak {res['A']['rss_mb']:.0f} MB (target <= 400): "
          f"{'met' if res['A']['rss_mb'] <= 400 else 'MISSED'}")
    limit = 1.5 * selected_mb + 200
    print(f"  D peak {res['D']['rss_mb']:.0f} MB (target <= 1.5 x {selected_mb:.0f} + 200 = "
          f"{limit:.0f}): {'met' if res['D']['rss_mb'] <= limit else 'MISSED'}")
    print(f"  A on 1x rows {res['A']['rss_mb']:.0f} MB, on 2x rows {res['A2']['rss_mb']:.0f} MB"
          f" (the 10+3 selected columns grow by {13 * ROWS * 8 / 2**20:.0f} MB)")


if __name__ == "__main__":
    main()
