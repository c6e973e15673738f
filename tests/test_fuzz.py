"""Mutated inputs read or fail with a WstatsError: no other exception, no hang, no crash.

Binary survey files (.xpt, .sav, .dta, .parquet, and .csv) are read in a separate worker
process, because a C library (readstat, Arrow) that crashes on a damaged file would
otherwise take pytest down with it: a dead or silent worker is reported as a failure naming
the mutation. Codebooks and expressions are pure Python and fuzzed in-process under
``signal.alarm``. The budget is ``max_examples`` per test (25, or ``WSTATS_FUZZ_EXAMPLES``).
"""

from __future__ import annotations

import json
import os
import select
import signal
import subprocess
import sys
from collections.abc import Iterator
from datetime import timedelta
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from conftest import CODEBOOK_TOML, ROOT
from wstats.decoding.codebook import load_codebook
from wstats.decoding.columns import Dataset
from wstats.decoding.expressions import parse_expression
from wstats.errors import CodebookError, ExpressionError, WstatsError
from wstats.readers.raw import RawColumn, RawTable

EXAMPLES = int(os.environ.get("WSTATS_FUZZ_EXAMPLES", "25"))
#: Seconds one read may take (the worker's alarm); the parent kills the worker after twice it.
READ_SECONDS = 5
FUZZ = settings(max_examples=EXAMPLES, deadline=timedelta(seconds=3 * READ_SECONDS),
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
                derandomize=EXAMPLES <= 25)

# ---------------------------------------------------------------- mutations

Op = tuple[Any, ...]
_BOUNDARY = [0, 1, 0x7F, 0xFF, 0x7FFF, 0xFFFF, 0x7FFFFFFF, 0x80000000, 0xFFFFFFFF]

mutation = st.one_of(
    st.tuples(st.just("flip"), st.integers(0, 1 << 20), st.integers(0, 7)),
    st.tuples(st.just("truncate"), st.integers(0, 1 << 20)),
    st.tuples(st.just("insert"), st.integers(0, 1 << 20), st.binary(min_size=1, max_size=16)),
    st.tuples(st.just("overwrite"), st.integers(0, 1 << 20),
              st.binary(min_size=1, max_size=64)),
    st.tuples(st.just("int32"), st.integers(0, 1 << 20), st.sampled_from(_BOUNDARY),
              st.sampled_from(["little", "big"])),
)
mutations = st.lists(mutation, min_size=1, max_size=4)


def mutate(data: bytes, ops: list[Op]) -> bytes:
    """Apply byte-level operations; positions are taken modulo the current length."""
    buf = bytearray(data)
    for op in ops:
        pos = op[1] % max(len(buf), 1)
        if op[0] == "flip" and buf:
            buf[pos] ^= 1 << op[2]
        elif op[0] == "truncate":
            del buf[pos:]
        elif op[0] == "insert":
            buf[pos:pos] = op[2]
        elif op[0] == "overwrite":
            buf[pos:pos + len(op[2])] = op[2]
        elif op[0] == "int32":
            buf[pos:pos + 4] = op[2].to_bytes(4, op[3])
    return bytes(buf)


# ---------------------------------------------------------------- the reading worker

_WORKER = r"""
import json, signal, sys, traceback, tomllib
from wstats.decoding.codebook import Codebook
from wstats.readers.dispatch import file_columns, read_raw
from wstats.errors import WstatsError

class Slow(Exception):
    pass

def alarm(*_):
    raise Slow()

signal.signal(signal.SIGALRM, alarm)
codebook = Codebook.from_dict(tomllib.loads(sys.argv[2]))
out = sys.stdout
sys.stdout = sys.stderr
out.write("ready\n"); out.flush()
for line in sys.stdin:
    path = json.loads(line)
    signal.alarm(int(sys.argv[1]))
    try:
        file_columns(path)
        codebook.decode(read_raw(path))
        answer = {"outcome": "ok"}
    except WstatsError as exc:
        answer = {"outcome": "error", "message": str(exc)}
    except Slow:
        answer = {"outcome": "slow"}
    except BaseException as exc:
        answer = {"outcome": "foreign", "type": type(exc).__name__, "message": str(exc)[:300],
                  "trace": traceback.format_exc()[-1500:]}
    finally:
        signal.alarm(0)
    out.write(json.dumps(answer) + "\n"); out.flush()
"""


class Worker:
    """A child process that reads files on request; restarted after it dies."""

    def __init__(self) -> None:
        self.proc: subprocess.Popen[str] | None = None

    def start(self) -> subprocess.Popen[str]:
        """Start the child and wait until it has imported wstats."""
        env = dict(os.environ, PYTHONPATH=str(ROOT))
        proc = subprocess.Popen(
            [sys.executable, "-c", _WORKER, str(READ_SECONDS), CODEBOOK_TOML],
            stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL,
            text=True, env=env,
        )
        assert proc.stdout is not None
        assert proc.stdout.readline().strip() == "ready", "fuzz worker did not start"
        return proc

    def read(self, path: Path) -> dict[str, Any]:
        """Return the worker's answer for *path*, or a crash/hang record."""
        if self.proc is None or self.proc.poll() is not None:
            self.proc = self.start()
        proc = self.proc
        assert proc.stdin is not None and proc.stdout is not None
        proc.stdin.write(json.dumps(str(path)) + "\n")
        proc.stdin.flush()
        ready, _, _ = select.select([proc.stdout], [], [], 2 * READ_SECONDS)
        line = proc.stdout.readline() if ready else ""
        if line:
            answer: dict[str, Any] = json.loads(line)
            return answer
        if not ready:
            proc.kill()
            self.close()
            return {"outcome": "hang"}
        code = proc.wait()
        self.close()
        return {"outcome": "crash", "signal": -code if code < 0 else None, "code": code}

    def close(self) -> None:
        """Stop the worker and close its pipes."""
        if self.proc is None:
            return
        for pipe in (self.proc.stdin, self.proc.stdout):
            if pipe is not None:
                try:
                    pipe.close()
                except BrokenPipeError:
                    pass
        self.proc.wait(timeout=30)
        self.proc = None


@pytest.fixture(scope="module")
def worker() -> Iterator[Worker]:
    """Return the module's reading worker."""
    w = Worker()
    yield w
    w.close()


@pytest.fixture(scope="module")
def scratch(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """Return a folder for mutated files."""
    return tmp_path_factory.mktemp("fuzz")


def _check_answer(answer: dict[str, Any], fmt: str, ops: list[Op], path: Path) -> None:
    """Fail with the mutation unless the read succeeded or raised a WstatsError."""
    what = f"{fmt} file mutated by {ops!r} (kept at {path})"
    outcome = answer["outcome"]
    if outcome == "crash":
        pytest.fail(f"reading a {what} killed the process (exit {answer['code']}, "
                    f"signal {answer['signal']})")
    if outcome in ("hang", "slow"):
        pytest.fail(f"reading a {what} took more than {READ_SECONDS} s ({outcome})")
    if outcome == "foreign":
        pytest.fail(f"reading a {what} raised {answer['type']}: {answer['message']}\n"
                    f"{answer['trace']}")
    path.unlink()


@pytest.mark.parametrize("fmt", ["xpt", "sav", "dta", "parquet", "csv"])
def test_mutated_file_reads_or_fails_cleanly(fmt: str, survey_files: dict[str, Path],
                                             worker: Worker, scratch: Path) -> None:
    original = survey_files[fmt].read_bytes()
    counter = iter(range(10**9))

    @FUZZ
    @given(ops=mutations)
    def check(ops: list[Op]) -> None:
        path = scratch / f"m{next(counter)}.{fmt}"
        path.write_bytes(mutate(original, ops))
        _check_answer(worker.read(path), fmt, ops, path)

    check()


#: Mutations the fuzzer found once, kept as fixed examples: (format, operations, what it does).
REGRESSIONS = [
    ("sav", [("overwrite", 344, b"\x00")], "first byte of a variable name zeroed"),
    ("parquet", [("insert", 0, b"\x00")], "every page shifted by one byte"),
]


@pytest.mark.parametrize(("fmt", "ops", "what"), REGRESSIONS, ids=[r[2] for r in REGRESSIONS])
def test_known_mutations(fmt: str, ops: list[Op], what: str, survey_files: dict[str, Path],
                         worker: Worker, scratch: Path) -> None:
    path = scratch / f"known.{fmt}"
    path.write_bytes(mutate(survey_files[fmt].read_bytes(), ops))
    _check_answer(worker.read(path), fmt, ops, path)


def test_worker_reports_the_unmutated_file_as_readable(survey_files: dict[str, Path],
                                                       worker: Worker) -> None:
    # The harness itself: a valid file reads, a garbage one is a WstatsError.
    for path in survey_files.values():
        assert worker.read(path) == {"outcome": "ok"}, path


def test_damaged_parquet_message_is_one_line(survey_files: dict[str, Path],
                                             tmp_path: Path) -> None:
    # One byte in front shifts every page: pyarrow's own message runs over several lines.
    from wstats.errors import ReadError
    from wstats.readers.dispatch import read_raw

    path = tmp_path / "shifted.parquet"
    path.write_bytes(mutate(survey_files["parquet"].read_bytes(), [("insert", 0, b"\x00")]))
    with pytest.raises(ReadError) as info:
        read_raw(path)
    assert "\n" not in str(info.value), str(info.value)
    assert "shifted.parquet" in str(info.value)


def test_worker_sees_a_wstats_error(tmp_path: Path, worker: Worker) -> None:
    garbage = tmp_path / "garbage.sav"
    garbage.write_bytes(b"\x00\x01 not a system file " * 20)
    assert worker.read(garbage)["outcome"] == "error"


# ---------------------------------------------------------------- codebooks

class _Slow(Exception):
    """Raised by the alarm when an in-process check takes too long."""


def _alarm(*_: Any) -> None:
    raise _Slow()


def _raw_table() -> RawTable:
    """Return the raw columns a fuzzed codebook is applied to (no file involved)."""
    n = 12
    rng = np.random.default_rng(3)
    cols = {
        "SLEEP": np.r_[rng.integers(1, 12, n - 3), 77, 99, np.nan].astype(float),
        "SMOKE": rng.integers(1, 3, n).astype(float),
        "EXER": np.r_[rng.choice([102, 203, 305, 412, 777, 888], n - 1), np.nan],
        "AGE": rng.integers(18, 90, n).astype(float),
    }
    raw = {k: RawColumn(k, v) for k, v in cols.items()}
    raw["REGION"] = RawColumn("REGION", np.array(["north", "south", ""] * 4, dtype=object),
                              numeric=False)
    return RawTable("fuzz.csv", "csv", "test", n, raw, list(raw))


RICH_CODEBOOK = CODEBOOK_TOML + """
[reasons]
not_eligible = "Not eligible"

[defaults]
blank = "skipped"

[[family]]
name = "three-digit"
match = ["EX*"]
digits = 3
codes = { 777 = "dont_know", 999 = "refused" }

[variables.EXER]
kind = "count"
codes = { 888 = 0 }
[variables.EXER.unit_prefixed]
to = "year"

[variables.AGE]
range = [18, 99]
codes = { "-9" = "not_eligible" }

[derived.OLD]
kind = "binary"
expr = "if(AGE >= 65, 1, 0) + between(SLEEP, 1, 5) * 0 + oneof(SMOKE, 1, 2) * 0"
"""

#: Fragments that are valid TOML but stress the schema checks; spliced in at line starts.
SNIPPETS = [
    'range = [24, 1]', 'range = ["a", 2]', "range = [1e309, 2]", "range = [1]",
    'codes = { nan = "refused" }', 'codes = { "inf" = 0 }', 'codes = { 7 = "nonsense" }',
    "codes = 5", "kind = 5", 'kind = "ordinal"', "labels = { x = 1 }", 'labels = { 1 = 2 }',
    'expr = "((((("', 'expr = "1/0"', 'expr = "SLEEP ^ 1e308"', 'expr = "OLD + 1"',
    'expr = "SLEEP.__class__"', 'expr = "min()"', 'expr = "oneof(REGION, \\"x\\")"',
    "digits = 0", "factors = { day = 0 }", 'to = "decade"', "population = -1",
    'population = "many"', "blank = 7", 'blank = "valid"', "match = [1]", "units = { 12 = 3 }",
    '[variables.SLEEP.unit_prefixed]\nto = "week"', "[[family]]\ncodes = { 7 = 1 }",
    '[derived.SLEEP]\nexpr = "1"', '[derived.A]\nexpr = "B"\n[derived.B]\nexpr = "A"',
    "[variables]\nX = 1", "[design]\nweight = 3", "[reasons]\nvalid = \"x\"",
    '[reasons]\n"bad name" = "x"', "unknown_key = 1",
]


def _decode_all(text: str, folder: Path) -> None:
    """Load *text* as a codebook file and decode the raw table with it, under an alarm."""
    path = folder / "fuzzed.toml"
    path.write_bytes(text.encode("utf-8", "surrogatepass"))
    old = signal.signal(signal.SIGALRM, _alarm)
    signal.alarm(READ_SECONDS)
    try:
        cb = load_codebook(path)
        raw = _raw_table()
        cb.raw_columns_for(list(raw.columns) + list(cb.derived))
        cb.decode(raw)
    except CodebookError as exc:
        assert "\n" not in str(exc).strip(), str(exc)
    except WstatsError:
        pass
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


@FUZZ
@given(ops=mutations)
def test_mutated_codebook_bytes(ops: list[Op], tmp_path_factory: pytest.TempPathFactory) -> None:
    folder = tmp_path_factory.mktemp("cb", numbered=True)
    data = mutate(RICH_CODEBOOK.encode("utf-8"), ops)
    path = folder / "fuzzed.toml"
    path.write_bytes(data)
    old = signal.signal(signal.SIGALRM, _alarm)
    signal.alarm(READ_SECONDS)
    try:
        try:
            cb = load_codebook(path)
        except CodebookError as exc:
            assert "\n" not in str(exc).strip(), str(exc)
            return
        try:
            cb.decode(_raw_table())
        except WstatsError:
            pass
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


@FUZZ
@given(splices=st.lists(st.tuples(st.integers(0, 200), st.sampled_from(SNIPPETS)),
                        min_size=1, max_size=3))
def test_spliced_codebook_schema(splices: list[tuple[int, str]],
                                 tmp_path_factory: pytest.TempPathFactory) -> None:
    lines = RICH_CODEBOOK.splitlines()
    for at, snippet in splices:
        lines.insert(at % (len(lines) + 1), snippet)
    _decode_all("\n".join(lines) + "\n", tmp_path_factory.mktemp("cb", numbered=True))


# ---------------------------------------------------------------- expressions

_TOKENS = ["A", "B", "REGION", "1", "0", "2.5", "1e308", "-", "+", "*", "/", "^", "(", ")",
           ",", "==", "!=", "<", "<=", ">", ">=", "and", "or", "not", "if", "min", "max",
           "abs", "sqrt", "log", "exp", "round", "floor", "ceil", "between", "oneof", '"a"',
           ".", "[", "]", "__x", "'", "lambda", ":", "**", "=", "%", "@", "import", "é"]


@FUZZ
@given(tokens=st.lists(st.sampled_from(_TOKENS), min_size=1, max_size=14),
       spaced=st.booleans())
def test_fuzzed_expressions(tokens: list[str], spaced: bool) -> None:
    text = (" " if spaced else "").join(tokens)
    data = Dataset.from_arrays({"A": [1.0, 0.0, -2.0, float("nan")],
                                "B": [0.0, 3.0, 1e308, 2.0]})
    old = signal.signal(signal.SIGALRM, _alarm)
    signal.alarm(READ_SECONDS)
    try:
        try:
            expr = parse_expression(text, ["A", "B", "REGION"], "fuzz")
        except ExpressionError as exc:
            assert str(exc).startswith("fuzz"), str(exc)
            return
        if "REGION" in expr.inputs:
            return
        try:
            values, reasons = expr.evaluate(data.columns, data.vocabulary)
        except ExpressionError:
            return
        assert values.shape == (4,) and reasons.shape == (4,)
        if expr.boolean:  # truth values are 1.0 / 0.0, NaN where an input is not valid
            assert set(np.unique(values[~np.isnan(values)])) <= {0.0, 1.0}, (text, values)
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)
