"""Benchmark wstats against the baselines named in docs/performance.md.

One command (from the repository root):

    .venv/bin/python benchmarks/run.py [--repeat 5] [--repeat-memory 9] [--cache DIR]
                                       [--json OUT.json]

It builds the 464,664 x 283 demo-scenario transport file once (cached outside the repository,
default ~/.cache/wstats-bench; several minutes the first time, in a child process), its Parquet
cache and a 2x-rows copy, then times whole processes in the same run, each several times after
one warm-up (median and min-max), with each process's own peak resident memory (see
benchmarks/measure.py for why the script itself stays small):

  A  wstats estimate FILE.xpt, 10 variables, weight/strata/PSU, codebook, JSON out
  B  pyreadstat.read_xport(FILE, usecols=the raw columns A reads)
  C  dd if=FILE of=/dev/null bs=16M (one read of the whole file into memory)
  D  wstats estimate FILE.xpt on every item variable by the 5-level dm_age5 domain
  E  pyreadstat.read_xport(FILE) (every column; fewer runs, no warm-up: it is slow)
  F  A on the Parquet cache
  A2 A on the 2x-rows file (memory must not grow beyond the selected columns: A and A2 run
     --repeat-memory times, and their median peaks give the growth and its standard error)
  H  wstats --help (start-up)
  L  wstats columns FILE (the file's columns from its header)
  Acold  A after dropping FILE from the page cache (POSIX_FADV_DONTNEED, before every run)
  Ccold  dd if=FILE of=/dev/null bs=16M iflag=direct (a cold sequential read)

and prints the ratios A/C, F/A, D/E, Acold/Ccold and A/B against their targets, the memory
targets, and the machine (cores, RAM, load average before and after: timings on a shared
machine are noisy).
"""

from __future__ import annotations

import argparse
import json
import math
import os
import platform
import subprocess
import sys
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parent))
from measure import (  # noqa: E402  (this folder is not a package)
    drop_from_cache,
    measure,
    median_se,
    parent_peak_mb,
    resident_share,
    settle_in_cache,
)

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
# ratio: (numerator case, denominator case, target or None)
RATIOS = {"A/C": ("A", "C", 2.5), "F/A": ("F", "A", 0.4), "D/E": ("D", "E", 0.07),
          "Acold/Ccold": ("Acold", "Ccold", 1.5), "A/B": ("A", "B", 0.10)}


def _wstats() -> list[str]:
    return [sys.executable, "-m", "wstats", "--quiet"]


def demo_stamp() -> str:
    """Return a short digest of the demo generator's sources: files built by another are stale."""
    import hashlib

    digest = hashlib.sha256()
    for path in sorted((ROOT / "demo").rglob("*")):
        if path.suffix in (".py", ".toml") and "__pycache__" not in path.parts:
            digest.update(path.relative_to(ROOT).as_posix().encode() + path.read_bytes())
    return digest.hexdigest()[:10]


def build(cache: Path, rows: int) -> dict[str, Path]:
    """Write the demo-scenario files for *rows* rows once (per demo version); return them."""
    folder = cache / f"tbchs_{rows}x{COLUMNS}_{demo_stamp()}"
    xpt = folder / "tbchs_sample.xpt"
    if not xpt.exists():
        print(f"building {rows:,} x {COLUMNS} demo-scenario file in {folder} (once; several "
              "minutes) ...", flush=True)
        # in a child: this process's peak is the floor of every case's peak (measure.py)
        code = ("from demo import write_demo; "
                f"write_demo({str(folder)!r}, rows={rows}, columns={COLUMNS}, formats=('xpt',))")
        subprocess.run([sys.executable, "-c", code], check=True, cwd=ROOT)
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


def in_child(function: str, *args: Any) -> Any:
    """Return ``function(*args)`` of this module, computed in a child process (via JSON).

    Whatever the work holds in memory then stays out of this process's peak, the floor of
    every timed case's peak (see measure.py).
    """
    code = (f"import json, sys; sys.path[:0] = [{str(HERE)!r}, {str(ROOT)!r}]; import run; "
            f"print(json.dumps(run.{function}(*{list(args)!r})))")
    out = subprocess.run([sys.executable, "-c", code], check=True, cwd=ROOT,
                         capture_output=True, text=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def reason_bytes(xpt: str, codebook: str, raw_a: list[str]) -> int:
    """Return the bytes of the reason codes that A's columns keep, decoded (not timed).

    A decoded number column keeps one reason code (1 byte) for each value that is missing.
    """
    from wstats.decoding.load import read

    data = read(xpt, columns=raw_a, codebook=codebook)
    return sum(int(col.missing_codes.nbytes) for col in data.columns.values())


def columns_of(xpt: str, codebook: str) -> tuple[list[str], list[str]]:
    """Return (the raw columns A reads, the item variables of D)."""
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
        "C": ["dd", f"if={xpt}", "of=/dev/null", "bs=16M", "status=none"],
        "D": [*_wstats(), "estimate", xpt, *items, "--by", DOMAIN, *tail],
        "E": [sys.executable, "-c", read.format(xpt, "")],
        "F": [*_wstats(), "estimate", str(files["parquet"]), *TEN, *tail],
        "A2": [*_wstats(), "estimate", str(double["xpt"]), *TEN, "--codebook",
               str(double["codebook"]), *DESIGN, "--format", "json"],
        "H": [*_wstats(), "--help"],
        "L": [*_wstats(), "columns", xpt],
        "K": [*_wstats(), "look", xpt, "sl_hours", "hs_rate", "--codebook", cb],
        "Acold": [*_wstats(), "estimate", xpt, *TEN, *tail],
        "Ccold": ["dd", f"if={xpt}", "of=/dev/null", "bs=16M", "iflag=direct", "status=none"],
    }


def machine() -> dict[str, Any]:
    """Describe the machine: cores, RAM, platform, Python, load average."""
    return {"cores": os.cpu_count(),
            "ram_gib": round(os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES") / 2**30, 1),
            "platform": platform.platform(), "python": platform.python_version(),
            "load_average": [round(x, 2) for x in os.getloadavg()]}


def ratios(res: dict[str, dict[str, Any]]) -> dict[str, float]:
    """Print the ratios of median wall times against their targets; return them.

    Beside each, the ratio of the median CPU times (user + system of the process and its
    threads): not the target, but steadier than wall time when other work shares the cores.
    """
    out = {}
    print("ratios (median wall time):")
    for name, (num, den, target) in RATIOS.items():
        if num not in res or den not in res:
            continue
        out[name] = v = res[num]["median"] / res[den]["median"]
        verdict = "" if target is None else f"target <= {target:.2f}: " + (
            "met" if v <= target else "MISSED")
        if not all(res[k].get("cold", True) for k in (num, den)):
            verdict = "NOT MEASURED: the file could not be dropped from the page cache"
        cpu = res[num]["cpu_median"] / max(res[den]["cpu_median"], 1e-9)
        print(f"  {name:<11} {v:8.3f}  {verdict}  (CPU-time ratio {cpu:.3f})")
    return out


def _peak(row: dict[str, Any]) -> str:
    """Return a case's peak as printed, or why it is not the case's own."""
    if row["rss_own"]:
        return f"{row['rss_mb']:6.0f} MB"
    return f"NOT MEASURED (at the floor of {row['floor_mb']:.0f} MB, not its own)"


def memory(res: dict[str, dict[str, Any]], items: list[str], raw_a: list[str],
           reasons_mb: tuple[float, float] | None) -> dict[str, Any]:
    """Print the memory targets (each case's own peak RSS); return the figures."""
    sel_d = (len(items) + 3 + 1) * ROWS * 8 / 2**20  # items, design, domain as float64
    limit_d = 1.5 * sel_d + 200
    out: dict[str, Any] = {"selected_mb_d": sel_d, "limit_mb_d": limit_d}
    print("memory (peak RSS of each case's own process):")
    if "A" in res:
        a = res["A"]
        print(f"  A  {_peak(a)} (target <= 400): "
              f"{'met' if a['rss_own'] and a['rss_mb'] <= 400 else 'MISSED'}")
    if "D" in res:
        d = res["D"]
        print(f"  D  {_peak(d)} (target <= 1.5 x {sel_d:.0f} MB selected + 200 = "
              f"{limit_d:.0f}): {'met' if d['rss_own'] and d['rss_mb'] <= limit_d else 'MISSED'}")
    if "A" in res and "A2" in res and reasons_mb is not None:
        out.update(growth(res["A"], res["A2"], raw_a, reasons_mb))
    return out


def growth(a: dict[str, Any], a2: dict[str, Any], raw_a: list[str],
           reasons_mb: tuple[float, float]) -> dict[str, Any]:
    """Print how A's peak grows on twice the rows against its columns; return the figures.

    The check fails when either case's peaks are not its own (at the floor that this
    process's own peak sets, see measure.py): a difference of floors says nothing.
    """
    sel_a = len(raw_a) * ROWS * 8 / 2**20  # the raw columns A reads, 8 bytes a value
    grew = a2["rss_median_mb"] - a["rss_median_mb"]
    se = math.hypot(median_se(a["rss_runs_mb"]), median_se(a2["rss_runs_mb"]))
    reasons = reasons_mb[1] - reasons_mb[0]
    held = sel_a + reasons
    beyond = grew - held
    if not (a["rss_own"] and a2["rss_own"]):
        verdict = ("NOT MEASURED: a peak of A or A2 is not the case's own (at the floor of "
                   f"{max(a['floor_mb'], a2['floor_mb']):.0f} MB): MISSED")
    elif grew <= sel_a:
        verdict = "within its raw columns: met"
    elif beyond <= 0:
        verdict = "within its columns as decoded: met"
    elif beyond <= 2 * se:
        verdict = (f"{beyond:.1f} MB more than its columns as decoded, within two standard "
                   "errors: not measurably more: met")
    else:
        verdict = f"MORE by {beyond:.1f} MB than its columns as decoded: MISSED"
    spread = max(max(r["rss_runs_mb"]) - min(r["rss_runs_mb"]) for r in (a, a2))
    print(f"  A on 1x rows {a['rss_median_mb']:.1f} MB, on 2x rows {a2['rss_median_mb']:.1f} MB "
          f"(median peaks; largest {a['rss_mb']:.0f} and {a2['rss_mb']:.0f}; a case's peaks "
          f"spread over up to {spread:.1f} MB)")
    print(f"     grew {grew:.1f} MB (standard error {se:.1f}); its {len(raw_a)} raw columns grow "
          f"by {sel_a:.1f} MB (8 bytes a value), and the reasons of their missing values by "
          f"{reasons:.1f} MB (1 byte each): {held:.1f} MB as decoded")
    print(f"     memory beyond the selected columns: {verdict}")
    return {"selected_mb_a": sel_a, "reasons_mb_a": reasons, "grew_mb_a": grew,
            "grew_se_mb_a": se, "growth_verdict": verdict}


def run_case(name: str, cmd: list[str], repeat: int, xpt: Path) -> dict[str, Any]:
    """Measure one case; the cold ones drop *xpt* from the page cache before every run."""
    if not name.endswith("cold"):
        return measure(name, cmd, repeat, warm_up=name != "E", cwd=ROOT)
    left: list[float | None] = []

    def drop() -> None:
        drop_from_cache(xpt)
        left.append(resident_share(xpt))

    row = measure(name, cmd, repeat, warm_up=False, before_each=drop, cwd=ROOT)
    row["resident_after_drop"] = None if None in left else max(x or 0.0 for x in left)
    row["cold"] = row["resident_after_drop"] is not None and row["resident_after_drop"] < 0.01
    if not row["cold"]:
        print(f"        {name}: the file stayed in the page cache (share left "
              f"{row['resident_after_drop']}): not a cold run; as root, "
              "`sync; echo 1 > /proc/sys/vm/drop_caches` before each run does it", flush=True)
    return row


def main() -> None:
    """Build (once), time every case, print the comparison."""
    ap = argparse.ArgumentParser(description=(__doc__ or "").splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5, help="timed runs per case (default 5)")
    ap.add_argument("--repeat-slow", type=int, default=2, help="timed runs of E (default 2)")
    ap.add_argument("--repeat-memory", type=int, default=9,
                    help="timed runs of A and A2, whose peaks give the growth (default 9)")
    ap.add_argument("--cache", type=Path, default=Path.home() / ".cache" / "wstats-bench")
    ap.add_argument("--only", help="run only these cases, comma-separated (e.g. A,C,F)")
    ap.add_argument("--json", type=Path, help="also write the results here")
    args = ap.parse_args()
    files, double = build(args.cache, ROWS), build(args.cache, 2 * ROWS)
    compile_package()
    raw_a, items = in_child("columns_of", str(files["xpt"]), str(files["codebook"]))
    before = machine()
    print(f"machine: {before['cores']} cores, {before['ram_gib']} GiB RAM, {before['platform']}, "
          f"Python {before['python']}, load average {before['load_average']}")
    print(f"file: {files['xpt']} ({files['xpt'].stat().st_size / 2**20:,.0f} MiB), A reads "
          f"{len(raw_a)} raw columns, D {len(items)} item variables by {DOMAIN}; this "
          f"process's peak (every case's floor) {parent_peak_mb():.0f} MB")
    for path in (files["xpt"], files["parquet"], double["xpt"]):
        settle_in_cache(path)  # the same page-cache state whatever came before (measure.py)
    repeats = {"E": args.repeat_slow, "A": args.repeat_memory, "A2": args.repeat_memory}
    cases = commands(files, double, raw_a, items)
    wanted = args.only.split(",") if args.only else list(cases)
    res = {k: run_case(k, c, repeats.get(k, args.repeat), files["xpt"])
           for k, c in cases.items() if k in wanted}
    reasons_mb = None
    if "A" in res and "A2" in res:
        one, two = (in_child("reason_bytes", str(f["xpt"]), str(f["codebook"]), raw_a) / 2**20
                    for f in (files, double))
        reasons_mb = (one, two)
    out = {"ratios": ratios(res), **memory(res, items, raw_a, reasons_mb)}
    for case, what, limit in (("H", "wstats --help", 0.3), ("L", "wstats columns FILE", 0.5),
                              ("K", "wstats look FILE 2 VARs", 0.5)):
        if case in res:
            t = res[case]["median"]
            print(f"start-up: {what} {t:.3f} s (target < {limit}): "
                  f"{'met' if t < limit else 'MISSED'}")
    after = machine()["load_average"]
    print(f"load average after: {after}")
    if args.json:
        args.json.write_text(json.dumps({"machine": before, "load_after": after, "cases": res,
                                         **out}, indent=2) + "\n")


if __name__ == "__main__":
    main()
