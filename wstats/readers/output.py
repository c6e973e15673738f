"""Output files written safely: all or nothing, never over an existing file unless asked.

An output is written to a temporary file in the target's own folder and renamed into place
only when writing succeeded, so a reader of the target never sees half a file and a failed
run leaves nothing behind. Rename is atomic only within one file system, hence the same
folder. Special files (``/dev/stdout``, ``/dev/full``, a FIFO) cannot be renamed onto; they
are written directly, and since there is nothing on them to destroy they need no overwrite.
"""

from __future__ import annotations

import errno
import hashlib
import os
import stat
import tempfile
import threading
from collections.abc import Iterator
from contextlib import AbstractContextManager, contextmanager
from pathlib import Path
from typing import IO, Any, Literal, overload

from wstats.errors import OutputError, ReadError

__all__ = ["atomic_output", "atomic_write", "check_output", "prefetch_sha256", "sha256_of"]

_CHUNK = 1 << 20
_FULL = (errno.ENOSPC, errno.EDQUOT)


def check_output(path: str | os.PathLike[str], overwrite: bool = False) -> Path:
    """Return *path* as a Path after checking that it can be written.

    Parameters
    ----------
    path : the output file.
    overwrite : allow replacing an existing regular file.

    Returns
    -------
    Path
        The output path, unchanged.

    Raises
    ------
    OutputError
        The output exists (without *overwrite*), is a folder, or its folder is missing or
        not writable.
    """
    target = Path(path)
    if target.is_dir():
        raise OutputError(f"output '{target}' is a folder; give a file name")
    if target.exists() and _is_special(target):
        return target
    if target.exists() and not overwrite:
        raise OutputError(f"output '{target}' exists; pass --overwrite to replace it")
    folder = target.parent
    if not folder.is_dir():
        raise OutputError(
            f"folder '{folder}' for output '{target.name}' does not exist; create it first"
        )
    if not os.access(folder, os.W_OK | os.X_OK):
        raise OutputError(f"folder '{folder}' is not writable; choose another output folder")
    return target


@overload
def atomic_output(
    path: str | os.PathLike[str], overwrite: bool = ..., binary: Literal[True] = ...
) -> AbstractContextManager[IO[bytes]]: ...
@overload
def atomic_output(
    path: str | os.PathLike[str], overwrite: bool = ..., *, binary: Literal[False]
) -> AbstractContextManager[IO[str]]: ...
@contextmanager
def atomic_output(
    path: str | os.PathLike[str], overwrite: bool = False, binary: bool = True
) -> Iterator[IO[Any]]:
    """Yield an open file that becomes *path* only if the ``with`` block succeeds.

    Parameters
    ----------
    path : the output file.
    overwrite : allow replacing an existing file.
    binary : open the file in binary mode (default) or as UTF-8 text.

    Yields
    ------
    IO
        A temporary file in the same folder as *path* (or *path* itself when it is a special
        file such as ``/dev/stdout``).

    Raises
    ------
    OutputError
        See :func:`check_output`; also when the disk is full or writing fails otherwise.

    Examples
    --------
    >>> with atomic_output("table.md", binary=False) as fh:  # doctest: +SKIP
    ...     fh.write("| a |\\n")
    """
    target = check_output(path, overwrite)
    if target.exists() and _is_special(target):
        with _mapped_errors(target):
            with _open(target, binary) as fh:
                yield fh
        return
    with _mapped_errors(target, creating=True):
        fd, tmp_name = tempfile.mkstemp(
            prefix=f".{target.name}.", suffix=".part", dir=target.parent
        )
    tmp = Path(tmp_name)
    try:
        with _mapped_errors(target):
            os.close(fd)  # reopened by name so that ``fh.name`` is the temporary path
            with _open(tmp, binary) as fh:
                yield fh
                fh.flush()
                os.fsync(fh.fileno())
            os.chmod(tmp, _default_mode())
            os.replace(tmp, target)
    finally:
        tmp.unlink(missing_ok=True)


def atomic_write(path: str | os.PathLike[str], data: str | bytes, overwrite: bool = False) -> None:
    """Write *data* to *path* all at once (UTF-8 for text).

    Parameters
    ----------
    path : the output file.
    data : text (written as UTF-8, newlines unchanged) or bytes.
    overwrite : allow replacing an existing file.

    Raises
    ------
    OutputError
        The output exists, its folder is missing or read-only, or the disk is full.

    Examples
    --------
    >>> atomic_write("methods.txt", "Estimates are weighted.\\n")  # doctest: +SKIP
    """
    payload = data.encode("utf-8") if isinstance(data, str) else data
    with atomic_output(path, overwrite) as fh:
        fh.write(payload)


def sha256_of(path: str | os.PathLike[str]) -> str:
    """Return the hex SHA-256 digest of a file, read in 1 MiB chunks.

    Parameters
    ----------
    path : the file.

    Returns
    -------
    str
        64 hexadecimal characters.

    Raises
    ------
    ReadError
        The file is missing or cannot be read.
    """
    key = _identity(path)
    pending = _PENDING.pop(key, None)
    if pending is not None:
        pending.join()
        if pending.digest is not None:
            return pending.digest
    return _digest(path, key)


def prefetch_sha256(path: str | os.PathLike[str]) -> None:
    """Start hashing *path* on another thread; a later :func:`sha256_of` collects the digest.

    The provenance of a large input costs a full read of the file (about 1 s per GB); done
    beside reading and estimating it runs on the second core. A file that changes in between
    (size, modification time or inode) is hashed again.
    """
    key = _identity(path)
    if key is None or key in _PENDING or _cached(key) is not None:
        return
    job = _HashJob(path)
    _PENDING[key] = job
    job.start()


class _HashJob(threading.Thread):
    """A daemon thread computing one file's digest (None when the file cannot be read)."""

    def __init__(self, path: str | os.PathLike[str]) -> None:
        super().__init__(daemon=True)
        self.path = path
        self.digest: str | None = None

    def run(self) -> None:
        try:
            self.digest = _digest(self.path, _identity(self.path))
        except ReadError:
            self.digest = None


_PENDING: dict[tuple[str, int, int, int] | None, _HashJob] = {}


def _identity(path: str | os.PathLike[str]) -> tuple[str, int, int, int] | None:
    """Return (real path, size, mtime_ns, inode) of *path*, or None if it cannot be seen."""
    try:
        st = os.stat(path)
    except OSError:
        return None
    return os.path.realpath(path), st.st_size, st.st_mtime_ns, st.st_ino


def _digest_cache() -> Path | None:
    """Return the digest cache file, or None when caching is switched off."""
    if os.environ.get("WSTATS_NO_DIGEST_CACHE"):
        return None
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "wstats" / "digests.json"


def _cached(key: tuple[str, int, int, int] | None) -> str | None:
    """Return the cached digest of a file identity (path, size, mtime_ns, inode), if any."""
    cache = _digest_cache()
    if key is None or cache is None:
        return None
    import json

    try:
        entry = json.loads(cache.read_text(encoding="utf-8")).get(key[0])
    except (OSError, ValueError, AttributeError):
        return None
    if isinstance(entry, list) and len(entry) == 4 and tuple(entry[:3]) == key[1:]:
        return str(entry[3])
    return None


def _remember(key: tuple[str, int, int, int] | None, digest: str) -> None:
    """Store a digest for its file identity; any failure just leaves the cache as it was."""
    cache = _digest_cache()
    if key is None or cache is None:
        return
    import json

    try:
        cache.parent.mkdir(parents=True, exist_ok=True)
        try:
            table = json.loads(cache.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            table = {}
        if not isinstance(table, dict):
            table = {}
        table[key[0]] = [*key[1:], digest]
        tmp = cache.with_name(f".{cache.name}.{os.getpid()}.tmp")
        tmp.write_text(json.dumps(table), encoding="utf-8")
        os.replace(tmp, cache)
    except OSError:
        pass


def _digest(path: str | os.PathLike[str], key: tuple[str, int, int, int] | None = None) -> str:
    """Hash *path* in 1 MiB chunks (hashlib releases the GIL), or take it from the cache.

    The cache (``~/.cache/wstats/digests.json``; ``WSTATS_NO_DIGEST_CACHE=1`` switches it
    off) is keyed by the file's real path, size, modification time in nanoseconds and inode,
    as version-control tools do for their indexes: a file that changes gets hashed again.
    """
    hit = _cached(key)
    if hit is not None:
        return hit
    digest = hashlib.sha256()
    try:
        with open(path, "rb") as fh:
            for chunk in iter(lambda: fh.read(_CHUNK), b""):
                digest.update(chunk)
    except OSError as exc:
        raise ReadError(f"cannot read '{path}' to fingerprint it: {exc.strerror}") from exc
    _remember(key, digest.hexdigest())
    return digest.hexdigest()


def _is_special(path: Path) -> bool:
    """Tell whether *path* exists and is neither a regular file nor a folder."""
    mode = path.stat().st_mode
    return not (stat.S_ISREG(mode) or stat.S_ISDIR(mode))


def _open(path: Path, binary: bool) -> IO[Any]:
    """Open *path* for writing, binary or as UTF-8 text."""
    return open(path, "wb" if binary else "w", **_text_args(binary))


def _text_args(binary: bool) -> dict[str, Any]:
    """Return the open() keywords for text mode: UTF-8, newlines written as given."""
    return {} if binary else {"encoding": "utf-8", "newline": ""}


def _default_mode() -> int:
    """Return the permission bits a new file gets under the current umask."""
    # mkstemp creates 0600 files; a normal output should get the usual 0666 & ~umask.
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


@contextmanager
def _mapped_errors(target: Path, creating: bool = False) -> Iterator[None]:
    """Turn OSError while creating or writing *target* into a one-line OutputError."""
    try:
        yield
    except OSError as exc:
        if exc.errno in _FULL:
            raise OutputError(
                f"no space left on the device while writing '{target}'; "
                "free some space or write elsewhere"
            ) from exc
        if creating and isinstance(exc, PermissionError):
            raise OutputError(
                f"folder '{target.parent}' is not writable; choose another output folder"
            ) from exc
        raise OutputError(f"cannot write '{target}': {exc.strerror or exc}") from exc
