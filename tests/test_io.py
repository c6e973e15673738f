"""Atomic output files: all or nothing, no silent overwrite, clear errors, SHA-256 fingerprints."""

from __future__ import annotations

import errno
import hashlib
import os
import stat
import tempfile
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from wstats.errors import OutputError, ReadError
from wstats.readers.output import atomic_output, atomic_write, check_output, sha256_of

IS_ROOT = hasattr(os, "geteuid") and os.geteuid() == 0


def _leftovers(folder: Path) -> list[str]:
    """Names of temporary files left in *folder*."""
    return [p.name for p in folder.iterdir() if p.name.endswith(".part")]


def test_atomic_write_text_and_bytes(tmp_path: Path) -> None:
    atomic_write(tmp_path / "a.txt", "héllo\r\nworld\n")
    atomic_write(tmp_path / "b.bin", b"\x00\xff\x10")
    # Text is stored as UTF-8 with newlines exactly as given (no translation).
    assert (tmp_path / "a.txt").read_bytes() == "héllo\r\nworld\n".encode()
    assert (tmp_path / "b.bin").read_bytes() == b"\x00\xff\x10"
    assert _leftovers(tmp_path) == []


def test_existing_output_is_refused_and_kept(tmp_path: Path) -> None:
    target = tmp_path / "x.json"
    target.write_text("old")
    with pytest.raises(OutputError, match=r"^output '.*x\.json' exists; pass --overwrite"):
        atomic_write(target, "new")
    assert target.read_text() == "old"


def test_overwrite_replaces(tmp_path: Path) -> None:
    target = tmp_path / "x.json"
    target.write_text("old")
    atomic_write(target, "new", overwrite=True)
    assert target.read_text() == "new"


def test_missing_folder(tmp_path: Path) -> None:
    with pytest.raises(OutputError, match=r"folder '.*nope' for output 'x\.md' does not exist"):
        atomic_write(tmp_path / "nope" / "x.md", "a")


def test_output_is_a_folder(tmp_path: Path) -> None:
    with pytest.raises(OutputError, match="is a folder; give a file name"):
        atomic_write(tmp_path, "a", overwrite=True)


@pytest.mark.skipif(IS_ROOT, reason="root may write into read-only folders")
def test_read_only_folder(tmp_path: Path) -> None:
    folder = tmp_path / "ro"
    folder.mkdir()
    folder.chmod(0o500)
    try:
        with pytest.raises(OutputError, match="is not writable"):
            atomic_write(folder / "x.md", "a")
    finally:
        folder.chmod(0o700)


def test_permission_denied_when_creating_temp_file(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Stands in for a read-only folder when the tests run as root (where chmod does not bite).
    def deny(*_args: object, **_kwargs: object) -> tuple[int, str]:
        raise PermissionError(errno.EACCES, "Permission denied")

    monkeypatch.setattr(tempfile, "mkstemp", deny)
    with pytest.raises(OutputError, match=r"folder '.*' is not writable; choose another"):
        atomic_write(tmp_path / "x.md", "a")
    assert not (tmp_path / "x.md").exists()


@pytest.mark.skipif(not os.path.exists("/dev/full"), reason="needs /dev/full")
def test_disk_full_on_dev_full() -> None:
    # /dev/full accepts open() and fails every write with ENOSPC (Linux full(4) man page).
    with pytest.raises(OutputError, match="no space left on the device while writing '/dev/full'"):
        atomic_write("/dev/full", b"x" * 10_000)


def test_disk_full_while_writing_temp_file_leaves_nothing(tmp_path: Path) -> None:
    target = tmp_path / "big.parquet"
    with pytest.raises(OutputError, match="no space left"):
        with atomic_output(target) as fh:
            fh.write(b"partial")
            raise OSError(errno.ENOSPC, "No space left on device")
    assert not target.exists()
    assert _leftovers(tmp_path) == []


def test_failure_inside_block_removes_temp_and_keeps_old(tmp_path: Path) -> None:
    target = tmp_path / "t.md"
    target.write_text("old")
    with pytest.raises(RuntimeError, match="boom"):
        with atomic_output(target, overwrite=True, binary=False) as fh:
            fh.write("half")
            raise RuntimeError("boom")
    assert target.read_text() == "old"
    assert _leftovers(tmp_path) == []


def test_temp_file_is_in_target_folder_until_success(tmp_path: Path) -> None:
    target = tmp_path / "t.txt"
    with atomic_output(target, binary=False) as fh:
        fh.write("x")
        # Same folder, so the final rename is atomic (POSIX rename(2)); target not there yet.
        assert Path(fh.name).parent == tmp_path
        assert not target.exists()
    assert target.read_text() == "x"


def test_new_file_gets_umask_permissions(tmp_path: Path) -> None:
    # mkstemp makes 0600 files; the output must look like any file open() would create.
    mask = os.umask(0o022)
    try:
        atomic_write(tmp_path / "m.txt", "x")
    finally:
        os.umask(mask)
    assert stat.S_IMODE((tmp_path / "m.txt").stat().st_mode) == 0o644


def test_special_file_needs_no_overwrite() -> None:
    # /dev/null is a character device: there is nothing to destroy, so no --overwrite needed.
    assert check_output("/dev/null") == Path("/dev/null")
    atomic_write("/dev/null", "discarded")


def test_sha256_known_vector(tmp_path: Path) -> None:
    # FIPS 180-2, Appendix B.1: SHA-256("abc").
    path = tmp_path / "abc"
    path.write_bytes(b"abc")
    assert sha256_of(path) == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"


def test_sha256_of_multi_chunk_file_matches_hashlib(tmp_path: Path) -> None:
    data = os.urandom(3 * (1 << 20) + 17)  # more than three 1 MiB chunks
    path = tmp_path / "big"
    path.write_bytes(data)
    assert sha256_of(path) == hashlib.sha256(data).hexdigest()


def test_sha256_missing_file(tmp_path: Path) -> None:
    with pytest.raises(ReadError, match="cannot read '.*nope' to fingerprint it"):
        sha256_of(tmp_path / "nope")


@settings(max_examples=25, deadline=None)
@given(payload=st.binary(max_size=4096))
def test_atomic_write_round_trips_any_bytes(payload: bytes) -> None:
    with tempfile.TemporaryDirectory() as folder:
        target = Path(folder) / "out.bin"
        atomic_write(target, payload)
        assert target.read_bytes() == payload
        assert _leftovers(Path(folder)) == []
