"""Benchmark wstats against the baselines named in docs/performance.md.

One command (from the repository root):

    .venv/bin/python benchmarks/run.py [--repeat 5] [--repeat-memory 9] [--cache DIR]
                                       [--json OUT.json]

It builds the 464,664 x 283 demo-scenario transport file once (cached outside the repository,
default ~/.cache/wstats-bench; several minutes the first time), its Parquet cache and a
2x-rows copy, then times whole processes in the same run, each several times after one warm-up
(median and min-max), with the peak resident memory of each process from ``os.wait4``:

  A  wstats estimate FILE.xpt, 10 variables, weight/strata/PSU, codebook, JSON out
  B  pyreadstat.read_xport(FILE, usecols=the raw columns A reads)
  C  cat FILE > /dev/null
  D  wstats estimate FILE.xpt on every item variable by the 5-level dm_age5 domain
  E  pyreadstat.read_xport(FILE) (every column; fewer runs, no warm-up: it is slow)
  F  A on the Parquet cache
  A2 A on the 2x-rows file (memory must not grow beyond the selected columns: A and A2 run
     --repeat-memory times, and their median peaks give the growth and its standard error)
  H  wstats --help (start-up)

and prints the ratios A/B, A/C, D/E, F/B against their targets, the memory targets, and the
machine (cores, RAM, load average before and after: timings on a shared machine are noisy).
"""

from __future__ import annotations

import argparse
import json
import math
import os
import platform
import statistics
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

ROWS, COLUMNS = 464_664, 283
HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
# A realistic mix: a categorical item (proportions per level), 1/2/3-digit don't-know and
# refused codes (7/9, 77/99, 777/999), "none" codes (88/888 = 0), a unit-prefixed frequency
# (fd_fruit: 1xx/day ... 4xx/year), a skip-pattern follow-up (tc_now), a measurement with
# "not measured" blanks (mx_sys) and a derived variable (bd_bmi from bd_mass and bd_hgt).
TEN = ["hs_rate", "sl_hours", "hs_body", "fd_fruit", "pa_hday", "bd_bmi", "mx_sys", "tc_now",
       "dm_incbd", "al_days"]
WEIGHT, STRATA, PSU = "wt_final", "ds_strat", "ds_psu"
DESIGN = ["--weight", WEIGHT, "--strata", STRATA, "--psu", PSU]
DOMAIN = "dm_age5"  # 5 levels
NOT_ITEMS = {"id_resp", "wt_base", WEIGHT, STRATA, PSU, DOMAIN}  # design/id columns, domain
TARGETS = {"A/B": 0.10, "A/C": 5.0, "D/E": 0.20, "F/B": None}


def _wstats() -> list[str]:
    return [sys.executable, "-m", "wstats", "--quiet"]


def timed(cmd: list[str]) -> tuple[float, float]:
    """Run *cmd* (stdout discarded); return (wall seconds, peak RSS in MB) of that process."""
    start = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, cwd=ROOT)
    assert proc.stderr is not None
    err = proc.stderr.read().decode()  # read before waiting: a full pipe would block it
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - start
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode != 0:
        raise SystemExit(f"benchmark command failed ({proc.returncode}): {' '.join(cmd)}\n{err}")
    return wall, usage.ru_maxrss / 1024.0  # Linux: kilobytes


def cpu_ticks() -> tuple[int, int] | None:
    """Return (all, stolen) CPU ticks of the machine so far (Linux ``/proc/stat``; else None).

    Steal time is what the hypervisor gave to other guests while this one wanted the CPU: on a
    shared virtual machine it slows every case, but not evenly (it hits user-space work more
    than ``cat``'s kernel copies), so the ratios move with it.
    """
    try:
        with open("/proc/stat") as f:
            fields = [int(x) for x in f.readline().split()[1:]]
    except (OSError, ValueError):
        return None
    return sum(fields[:8]), fields[7] if len(fields) > 7 else 0


def _steal(before: tuple[int, int] | None, after: tuple[int, int] | None) -> float | None:
    """Return the share of CPU time stolen between two :func:`cpu_ticks` readings."""
    if before is None or after is None or after[0] == before[0]:
        return None
    return (after[1] - before[1]) / (after[0] - before[0])


def measure(name: str, cmd: list[str], repeat: int, warm_up: bool = True) -> dict[str, Any]:
    """Time *cmd* *repeat* times (after one warm-up run); print and return the summary."""
    if warm_up:
        timed(cmd)
    start = cpu_ticks()
    runs = [timed(cmd) for _ in range(repeat)]
    steal = _steal(start, cpu_ticks())
    walls, rss = [w for w, _ in runs], [r for _, r in runs]
    row = {"median": statistics.median(walls), "min": min(walls), "max": max(walls),
           "rss_mb": max(rss), "rss_median_mb": statistics.median(rss), "rss_runs_mb": rss,
           "runs": len(runs), "steal": steal}
    stolen = "" if steal is None else f"  CPU steal {100 * steal:4.1f}%"
    print(f"  {name:<3} {row['median']:8.3f} s  (min {row['min']:.3f}, max {row['max']:.3f}, "
          f"{len(runs)} runs)  peak RSS {row['rss_mb']:7.0f} MB{stolen}", flush=True)
    return row


def build(cache: Path, rows: int) -> dict[str, Path]:
    """Write the demo-scenario files for *rows* rows once; return their paths."""
    folder = cache / f"tbchs_{rows}x{COLUMNS}"
    xpt = folder / "tbchs_sample.xpt"
    if not xpt.exists():
        print(f"building {rows:,} x {COLUMNS} demo-scenario file in {folder} (once; several "
              "minutes) ...", flush=True)
        sys.path.insert(0, str(ROOT))
        from demo import write_demo

        write_demo(folder, rows=rows, columns=COLUMNS, formats=("xpt",))
    parquet = folder / "tbchs_sample.parquet"
    if not parquet.exists():
        print(f"converting {xpt.name} to Parquet (once) ...", flush=True)
        subprocess.run([*_wstats(), "convert", str(xpt), str(parquet)], check=True, cwd=ROOT)
    return {"xpt": xpt, "parquet": parquet, "codebook": folder / "tbchs_codebook.toml"}


def compile_package() -> None:
    """Write wstats' bytecode, as installing or a first run does where Python may write it.

    Where ``PYTHONDONTWRITEBYTECODE`` is set (some containers), every timed process would
    otherwise compile the package from source again (about 0.1 s of each run).
    """
    if os.environ.get("PYTHONDONTWRITEBYTECODE"):
        print("PYTHONDONTWRITEBYTECODE is set: compiling wstats' bytecode once before timing")
    subprocess.run([sys.executable, "-m", "compileall", "-q", str(ROOT / "wstats")],
                   check=True, cwd=ROOT)


def reason_bytes(files: dict[str, Path], raw_a: list[str]) -> int:
    """Return the bytes of the reason codes that A's columns keep, decoded (not timed).

    A decoded number column keeps one reason code (1 byte) for each value that is missing.
    """
    sys.path.insert(0, str(ROOT))
    from wstats.decoding.load import read

    data = read(files["xpt"], columns=raw_a, codebook=files["codebook"])
    return sum(int(col.missing_codes.nbytes) for col in data.columns.values())


def columns_of(xpt: Path, codebook: Path) -> tuple[list[str], list[str]]:
    """Return (the raw columns A reads, the item variables of D)."""
    sys.path.insert(0, str(ROOT))
    from wstats.decoding.codebook import load_codebook
    from wstats.readers.dispatch import file_columns

    raw_a = [*load_codebook(codebook).raw_columns_for(TEN), WEIGHT, STRATA, PSU]
    items = [c for c in file_columns(xpt) if c not in NOT_ITEMS]
    return list(dict.fromkeys(raw_a)), items


def commands(files: dict[str, Path], double: dict[str, Path], raw_a: list[str],
             items: list[str]) -> dict[str, list[str]]:
    """Return the command line of every timed case."""
    xpt, cb = str(files["xpt"]), str(files["codebook"])
    tail = ["--codebook", cb, *DESIGN, "--format", "json"]
    read = "import pyreadstat; pyreadstat.read_xport({!r}{})"
    return {
        "A": [*_wstats(), "estimate", xpt, *TEN, *tail],
        "B": [sys.executable, "-c", read.format(xpt, f", usecols={raw_a!r}")],
        "C": ["sh", "-c", f"cat '{xpt}' > /dev/null"],
        "D": [*_wstats(), "estimate", xpt, *items, "--by", DOMAIN, *tail],
        "E": [sys.executable, "-c", read.format(xpt, "")],
        "F": [*_wstats(), "estimate", str(files["parquet"]), *TEN, *tail],
        "A2": [*_wstats(), "estimate", str(double["xpt"]), *TEN, "--codebook",
               str(double["codebook"]), *DESIGN, "--format", "json"],
        "H": [*_wstats(), "--help"],
    }


def machine() -> dict[str, Any]:
    """Describe the machine: cores, RAM, platform, Python, load average."""
    return {"cores": os.cpu_count(),
            "ram_gib": round(os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES") / 2**30, 1),
            "platform": platform.platform(), "python": platform.python_version(),
            "load_average": [round(x, 2) for x in os.getloadavg()]}


def report(res: dict[str, dict[str, Any]], items: list[str], raw_a: list[str],
           reasons_mb: tuple[float, float]) -> dict[str, Any]:
    """Print ratios and memory against the targets; return them."""
    ratio = {k: res[k[0]]["median"] / res[k[2]]["median"] for k in TARGETS}
    print("ratios (median wall time):")
    for k, v in ratio.items():
        t = TARGETS[k]
        verdict = "" if t is None else f"  target <= {t:.2f}: {'met' if v <= t else 'MISSED'}"
        print(f"  {k:<4} {v:8.3f}{verdict}")
    sel_d = (len(items) + 3 + 1) * ROWS * 8 / 2**20  # items, design, domain as float64
    limit_d = 1.5 * sel_d + 200
    sel_a = len(raw_a) * ROWS * 8 / 2**20  # the raw columns A reads, 8 bytes a value
    a, d, a2 = res["A"]["rss_mb"], res["D"]["rss_mb"], res["A2"]["rss_mb"]
    print("memory (peak RSS):")
    print(f"  A  {a:6.0f} MB (target <= 400): {'met' if a <= 400 else 'MISSED'}")
    print(f"  D  {d:6.0f} MB (target <= 1.5 x {sel_d:.0f} MB selected + 200 = {limit_d:.0f}): "
          f"{'met' if d <= limit_d else 'MISSED'}")
    # growth from the median peaks, with the standard error of that difference
    grew = res["A2"]["rss_median_mb"] - res["A"]["rss_median_mb"]
    se = math.hypot(_median_se(res["A"]["rss_runs_mb"]), _median_se(res["A2"]["rss_runs_mb"]))
    reasons = reasons_mb[1] - reasons_mb[0]
    held = sel_a + reasons
    beyond = grew - held
    if grew <= sel_a:
        verdict = "within its raw columns: met"
    elif beyond <= 0:
        verdict = "within its columns as decoded: met"
    elif beyond <= 2 * se:
        verdict = (f"{beyond:.1f} MB more than its columns as decoded, within two standard "
                   "errors: not measurably more: met")
    else:
        verdict = f"MORE by {beyond:.1f} MB than its columns as decoded: MISSED"
    spread = max(max(res[k]["rss_runs_mb"]) - min(res[k]["rss_runs_mb"]) for k in ("A", "A2"))
    print(f"  A on 1x rows {res['A']['rss_median_mb']:.1f} MB, on 2x rows "
          f"{res['A2']['rss_median_mb']:.1f} MB (median peaks; largest {a:.0f} and {a2:.0f}; "
          f"a case's peaks spread over up to {spread:.1f} MB)")
    print(f"     grew {grew:.1f} MB (standard error {se:.1f}); its {len(raw_a)} raw columns grow "
          f"by {sel_a:.1f} MB (8 bytes a value), and the reasons of their missing values by "
          f"{reasons:.1f} MB (1 byte each): {held:.1f} MB as decoded")
    print(f"     memory beyond the selected columns: {verdict}")
    h = res["H"]["median"]
    print(f"start-up: wstats --help {h:.3f} s (target < 0.3): {'met' if h < 0.3 else 'MISSED'}")
    return {"ratios": ratio, "selected_mb_d": sel_d, "limit_mb_d": limit_d,
            "selected_mb_a": sel_a, "reasons_mb_a": reasons, "grew_mb_a": grew,
            "grew_se_mb_a": se}


def _median_se(runs: list[float]) -> float:
    """Return the standard error of the median of *runs* (normal approximation)."""
    if len(runs) < 2:
        return 0.0
    return math.sqrt(math.pi / 2) * statistics.stdev(runs) / math.sqrt(len(runs))


def main() -> None:
    """Build (once), time every case, print the comparison."""
    ap = argparse.ArgumentParser(description=(__doc__ or "").splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5, help="timed runs per case (default 5)")
    ap.add_argument("--repeat-slow", type=int, default=2, help="timed runs of E (default 2)")
    ap.add_argument("--repeat-memory", type=int, default=9,
                    help="timed runs of A and A2, whose peaks give the growth (default 9)")
    ap.add_argument("--cache", type=Path, default=Path.home() / ".cache" / "wstats-bench")
    ap.add_argument("--json", type=Path, help="also write the results here")
    args = ap.parse_args()
    files, double = build(args.cache, ROWS), build(args.cache, 2 * ROWS)
    compile_package()
    raw_a, items = columns_of(files["xpt"], files["codebook"])
    before = machine()
    print(f"machine: {before['cores']} cores, {before['ram_gib']} GiB RAM, {before['platform']}, "
          f"Python {before['python']}, load average {before['load_average']}")
    print(f"file: {files['xpt']} ({files['xpt'].stat().st_size / 2**20:,.0f} MiB), A reads "
          f"{len(raw_a)} raw columns, D {len(items)} item variables by {DOMAIN}")
    repeats = {"E": args.repeat_slow, "A": args.repeat_memory, "A2": args.repeat_memory}
    res = {k: measure(k, c, repeats.get(k, args.repeat), warm_up=k != "E")
           for k, c in commands(files, double, raw_a, items).items()}
    reasons_mb = (reason_bytes(files, raw_a) / 2**20, reason_bytes(double, raw_a) / 2**20)
    out = report(res, items, raw_a, reasons_mb)
    after = machine()["load_average"]
    print(f"load average after: {after}")
    if args.json:
        args.json.write_text(json.dumps({"machine": before, "load_after": after, "cases": res,
                                         **out}, indent=2) + "\n")


if __name__ == "__main__":
    main()
