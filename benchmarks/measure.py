"""How benchmarks/run.py measures one process: wall and CPU time, its own peak memory, steal.

The peak resident memory of a child comes from ``os.wait4``. On Linux that figure has a
floor: when a child calls ``exec``, the kernel records the high-water mark of the memory it
leaves behind -- the parent's, which it shares after ``vfork`` or copies after ``fork`` --
as part of the child's own peak. A benchmark process that once held 4 GB (building the
files in-process) therefore made every case report at least 4 GB. So the script keeps its
own process small (heavy work runs in children), and every run records the parent's peak at
the moment it started the child (``floor_mb``): a peak at or below the floor is not the
case's own (``own`` is false), and checks that need per-case peaks refuse such runs.
"""

from __future__ import annotations

import os
import resource
import shutil
import statistics
import subprocess
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

Run = dict[str, Any]


def parent_peak_mb() -> float:
    """Return this process's own peak resident memory so far, in MiB (the children's floor)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # Linux: kilobytes


def timed(cmd: list[str], cwd: Path | None = None) -> Run:
    """Run *cmd* (stdout discarded) and return what it cost.

    Returns ``wall`` (s), ``cpu`` (user + system s of the child), ``rss_mb`` (its peak
    resident memory from ``os.wait4``), ``floor_mb`` (this process's peak when the child
    started: a child's figure is never below it) and ``own`` (the peak is above the floor,
    so it is the child's own).
    """
    floor = parent_peak_mb()
    start = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, cwd=cwd)
    assert proc.stderr is not None
    with proc.stderr:
        err = proc.stderr.read().decode()  # read before waiting: a full pipe would block it
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - start
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode != 0:
        raise SystemExit(f"benchmark command failed ({proc.returncode}): {' '.join(cmd)}\n{err}")
    rss = usage.ru_maxrss / 1024.0
    return {"wall": wall, "cpu": usage.ru_utime + usage.ru_stime, "rss_mb": rss,
            "floor_mb": floor, "own": rss > floor}


def cpu_ticks() -> tuple[int, int] | None:
    """Return (all, stolen) CPU ticks of the machine so far (Linux ``/proc/stat``; else None).

    Steal time is what the hypervisor gave to other guests while this one wanted the CPU: on a
    shared virtual machine it slows every case, but not evenly (it hits user-space work more
    than a kernel copy such as ``dd``'s), so the ratios move with it.
    """
    try:
        with open("/proc/stat") as f:
            fields = [int(x) for x in f.readline().split()[1:]]
    except (OSError, ValueError):
        return None
    return sum(fields[:8]), fields[7] if len(fields) > 7 else 0


def steal_share(before: tuple[int, int] | None, after: tuple[int, int] | None) -> float | None:
    """Return the share of CPU time stolen between two :func:`cpu_ticks` readings."""
    if before is None or after is None or after[0] == before[0]:
        return None
    return (after[1] - before[1]) / (after[0] - before[0])


def drop_from_cache(path: Path) -> None:
    """Ask the kernel to forget *path*'s pages (``POSIX_FADV_DONTNEED``; no root needed).

    Only clean pages that no process maps are dropped; :func:`resident_share` says whether it
    worked.
    """
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)  # harmless on a read-only file; makes pages written earlier clean
        os.posix_fadvise(fd, 0, 0, os.POSIX_FADV_DONTNEED)
    finally:
        os.close(fd)


def settle_in_cache(path: Path) -> float | None:
    """Drop *path* from the page cache and read it back with ``dd``; return the share cached.

    How a file came into the page cache changes how fast it is read from there: after the
    file was just written, or read in through ``POSIX_FADV_WILLNEED``, a warm ``dd`` of the
    1 GB benchmark file took 0.09-0.20 s; after a plain sequential read 0.04 s (the kernel's
    readahead then caches it in large folios). Every warm case starts from this same state.
    ``dd`` runs in a child, so that its buffer stays out of this process's peak.
    """
    drop_from_cache(path)
    subprocess.run(["dd", f"if={path}", "of=/dev/null", "bs=16M", "status=none"], check=True)
    return resident_share(path)


def resident_share(path: Path) -> float | None:
    """Return the share of *path* held in the page cache (util-linux ``fincore``), or None."""
    tool = shutil.which("fincore")
    if tool is None:
        return None
    out = subprocess.run([tool, "--bytes", "--noheadings", "--output", "RES", str(path)],
                         capture_output=True, text=True, check=False)
    try:
        return int(out.stdout.split()[0]) / max(path.stat().st_size, 1)
    except (IndexError, ValueError):
        return None


def summarize(runs: list[Run], steal: float | None) -> dict[str, Any]:
    """Return a case's summary: median and min-max wall time, CPU time, peaks, steal."""
    walls, rss = [r["wall"] for r in runs], [r["rss_mb"] for r in runs]
    return {"median": statistics.median(walls), "min": min(walls), "max": max(walls),
            "cpu_median": statistics.median(r["cpu"] for r in runs),
            "rss_mb": max(rss), "rss_median_mb": statistics.median(rss), "rss_runs_mb": rss,
            "floor_mb": max(r["floor_mb"] for r in runs),
            "rss_own": all(r["own"] for r in runs), "runs": len(runs), "steal": steal}


def measure(name: str, cmd: list[str], repeat: int, warm_up: bool = True,
            before_each: Callable[[], None] | None = None, cwd: Path | None = None) -> Run:
    """Time *cmd* *repeat* times (after one warm-up run); print and return the summary.

    *before_each* runs before every timed run, untimed (the cold cases drop the file from the
    page cache there).
    """
    if warm_up:
        timed(cmd, cwd)
    start, runs = cpu_ticks(), []
    for _ in range(repeat):
        if before_each is not None:
            before_each()
        runs.append(timed(cmd, cwd))
    row = summarize(runs, steal_share(start, cpu_ticks()))
    stolen = "" if row["steal"] is None else f"  CPU steal {100 * row['steal']:4.1f}%"
    peak = (f"peak RSS {row['rss_mb']:7.0f} MB" if row["rss_own"]
            else f"peak RSS <= {row['floor_mb']:.0f} MB (the floor: not its own)")
    print(f"  {name:<5} {row['median']:8.3f} s  (min {row['min']:.3f}, max {row['max']:.3f}, "
          f"{len(runs)} runs; CPU {row['cpu_median']:.3f} s)  {peak}{stolen}", flush=True)
    return row


def median_se(runs: list[float]) -> float:
    """Return the standard error of the median of *runs* (normal approximation)."""
    if len(runs) < 2:
        return 0.0
    return float((3.141592653589793 / 2) ** 0.5 * statistics.stdev(runs) / len(runs) ** 0.5)
