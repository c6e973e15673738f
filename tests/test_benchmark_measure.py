"""The benchmark's process measurements: each case's own peak memory, cold-cache runs.

The floor of ``ru_maxrss`` (a child's figure includes the high-water mark of the memory it
replaced at ``exec``) is from the Linux source, ``fs/exec.c`` (``exec_mmap`` calls
``setmax_mm_hiwater_rss``) and getrusage(2); checked here on the machine itself.
"""

from __future__ import annotations

import importlib.util
import shutil
import subprocess
import sys
from pathlib import Path
from types import ModuleType

import pytest

BENCH = Path(__file__).resolve().parent.parent / "benchmarks"
pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux"), reason="Linux rusage")


def _load(name: str) -> ModuleType:
    spec = importlib.util.spec_from_file_location(name, BENCH / f"{name}.py")
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    sys.path.insert(0, str(BENCH))
    spec.loader.exec_module(module)
    return module


measure = _load("measure")


def _hog(mb: int) -> list[str]:
    """A child that touches *mb* MiB and exits."""
    return [sys.executable, "-c", f"b = bytearray({mb} << 20)\nfor i in range(0, len(b), 4096): "
            "b[i] = 1"]


def test_a_child_reports_its_own_peak() -> None:
    # a child bigger than this process has ever been: its figure is its own
    mb = int(measure.parent_peak_mb()) + 100
    run = measure.timed(_hog(mb))
    assert run["own"] and run["rss_mb"] >= mb
    assert run["floor_mb"] < run["rss_mb"]


def test_a_parent_that_once_held_much_makes_every_child_report_it() -> None:
    # A parent that once touched 300 MiB: a 40 MiB child reports the parent's 300, and the
    # run says so (the fresh-clone failure: every case showed the file builder's peak).
    script = (f"import sys; sys.path.insert(0, {str(BENCH)!r}); import measure\n"
              "b = bytearray(300 << 20)\nfor i in range(0, len(b), 4096): b[i] = 1\ndel b\n"
              f"r = measure.timed({_hog(40)!r})\nprint(r['own'], r['rss_mb'] >= 300, "
              "r['floor_mb'] >= 300)")
    out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True,
                         check=True).stdout.split()
    assert out == ["False", "True", "True"]


def _case(peaks: list[float], own: bool) -> dict[str, object]:
    runs = [{"wall": 1.0, "cpu": 1.0, "rss_mb": p, "floor_mb": 20.0, "own": own} for p in peaks]
    return measure.summarize(runs, None)  # type: ignore[no-any-return]


def test_growth_check_refuses_peaks_that_are_not_per_case() -> None:
    run = _load("run")
    cols = ["X"] * 14
    floored = _case([4246.0] * 5, own=False)
    out = run.growth(floored, floored, cols, (0.0, 0.0))
    assert out["grew_mb_a"] == 0.0 and "NOT MEASURED" in out["growth_verdict"]
    assert "MISSED" in out["growth_verdict"]
    good = run.growth(_case([99.0, 99.5, 98.5], True), _case([149.0, 149.5, 148.5], True),
                      cols, (0.0, 0.5))
    # 50 MB: more than 14 raw columns of 464,664 values (49.6 MB), less than with reasons
    assert good["growth_verdict"] == "within its columns as decoded: met"
    worse = run.growth(_case([99.0, 99.5, 98.5], True), _case([199.0, 199.5, 198.5], True),
                       cols, (0.0, 0.5))
    assert worse["growth_verdict"].startswith("MORE by")


@pytest.mark.skipif(shutil.which("fincore") is None, reason="needs util-linux fincore")
def test_drop_from_cache_empties_the_page_cache_of_a_file(tmp_path: Path) -> None:
    path = tmp_path / "data.bin"
    path.write_bytes(b"\x01" * (8 << 20))
    path.read_bytes()
    measure.drop_from_cache(path)
    share = measure.resident_share(path)
    assert share is not None and share < 0.01
    path.read_bytes()
    assert measure.resident_share(path) == pytest.approx(1.0)


@pytest.mark.skipif(shutil.which("fincore") is None or shutil.which("dd") is None,
                    reason="needs util-linux fincore and dd")
def test_settling_a_file_leaves_it_wholly_in_the_page_cache(tmp_path: Path) -> None:
    path = tmp_path / "data.bin"
    path.write_bytes(b"\x02" * (8 << 20))
    measure.drop_from_cache(path)
    assert measure.resident_share(path) < 0.01
    assert measure.settle_in_cache(path) == pytest.approx(1.0)
