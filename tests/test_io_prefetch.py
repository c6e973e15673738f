"""Digests started early equal digests computed on demand, and follow file changes."""

from __future__ import annotations

import hashlib
from pathlib import Path

from wstats._io import prefetch_sha256, sha256_of


def test_prefetched_digest_equals_hashlib(tmp_path: Path) -> None:
    f = tmp_path / "a.bin"
    f.write_bytes(bytes(range(256)) * 9000)
    prefetch_sha256(f)
    assert sha256_of(f) == hashlib.sha256(f.read_bytes()).hexdigest()  # hashlib is the oracle


def test_a_file_changed_after_prefetch_is_hashed_again(tmp_path: Path) -> None:
    f = tmp_path / "b.bin"
    f.write_bytes(b"first")
    prefetch_sha256(f)
    f.write_bytes(b"second, longer")
    assert sha256_of(f) == hashlib.sha256(b"second, longer").hexdigest()


def test_prefetch_of_a_missing_file_is_silent(tmp_path: Path) -> None:
    prefetch_sha256(tmp_path / "missing.bin")  # the read itself will report it
