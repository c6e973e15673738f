"""Digests started early equal digests computed on demand, and follow file changes."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest

from wstats.readers.output import prefetch_sha256, sha256_of


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


def test_digest_cache_is_reused_and_follows_changes(tmp_path: Path,
                                                     monkeypatch: pytest.MonkeyPatch) -> None:
    import wstats.readers.output as io_mod

    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    monkeypatch.delenv("WSTATS_NO_DIGEST_CACHE", raising=False)
    f = tmp_path / "c.bin"
    f.write_bytes(b"x" * 5000)
    first = sha256_of(f)
    assert (tmp_path / "cache" / "wstats" / "digests.json").exists()
    calls: list[int] = []
    real = hashlib.sha256
    monkeypatch.setattr(io_mod.hashlib, "sha256", lambda *a: calls.append(1) or real(*a))
    assert sha256_of(f) == first and calls == []  # taken from the cache
    f.write_bytes(b"y" * 5001)
    assert sha256_of(f) == real(b"y" * 5001).hexdigest() and calls == [1]


def test_digest_cache_can_be_switched_off(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    monkeypatch.setenv("WSTATS_NO_DIGEST_CACHE", "1")
    f = tmp_path / "d.bin"
    f.write_bytes(b"z")
    assert sha256_of(f) == hashlib.sha256(b"z").hexdigest()
    assert not (tmp_path / "cache").exists()
