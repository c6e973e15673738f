"""Undoing a failed command: the outputs it created are removed, and only those.

An output is recorded here (path and inode) just before its name appears, so that a
failure or a signal at any later moment still finds it; a command runs inside
:func:`removing_created`, which removes its records' files when the command does not finish.
A file is removed only if its name still holds the inode that was recorded: a file another
process wrote (or replaced) under the same name meanwhile is not ours to delete.
"""

from __future__ import annotations

import os
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

__all__ = ["forget", "record", "removing_created", "signals_held"]

#: Outputs created inside :func:`removing_created` blocks: (path, inode), in order.
_CREATED: list[tuple[Path, int]] = []
#: How many :func:`removing_created` blocks are open (a list, to change it in place).
_DEPTH = [0]

def record(path: Path, ino: int) -> tuple[Path, int] | None:
    """Record that *path* is about to be created with inode *ino* (None: nobody will undo)."""
    if not _DEPTH[0]:
        return None
    entry = (path, ino)
    _CREATED.append(entry)
    return entry


def forget(entry: tuple[Path, int] | None) -> None:
    """Drop a creation record: the name turned out to be taken."""
    if entry is not None and entry in _CREATED:
        _CREATED.remove(entry)


@contextmanager
def removing_created() -> Iterator[list[Path]]:
    """Remove, when the block fails or is interrupted, every output it created.

    Yields the list of paths created so far (filled as outputs are written). Only a file
    still holding the inode this process wrote is removed: a path that another process has
    since taken over, or one that existed before (replaced with ``overwrite``), is left
    alone. Signals wait while the files are removed.

    Examples
    --------
    >>> with removing_created():  # doctest: +SKIP
    ...     atomic_write("a.csv", "x\n")
    ...     atomic_write("b.csv", "y\n")  # if this fails, a.csv is removed again
    """
    start = len(_CREATED)
    created: list[Path] = []
    _DEPTH[0] += 1
    try:
        yield created
    except BaseException:
        with signals_held():
            for path, ino in reversed(_CREATED[start:]):
                _remove_if_ours(path, ino)
            del _CREATED[start:]
        raise
    finally:
        _DEPTH[0] -= 1
        created.extend(p for p, _ in _CREATED[start:])
        if _DEPTH[0] == 0:  # nobody left to undo them: forget the records
            del _CREATED[start:]


def _remove_if_ours(path: Path, ino: int) -> None:
    """Unlink *path* if it is still the file with inode *ino*."""
    try:
        if os.lstat(path).st_ino == ino:
            os.unlink(path)
    except OSError:
        pass


@contextmanager
def signals_held() -> Iterator[None]:
    """Let SIGINT and SIGTERM wait until the block is done (main thread, POSIX only).

    Used around the steps that must not be cut in half: creating and naming an output,
    recording it, and removing files after a failure. A signal that arrives meanwhile is
    delivered as soon as the block ends.
    """
    import signal

    if not hasattr(signal, "pthread_sigmask") or threading.current_thread() is not \
            threading.main_thread():
        yield
        return
    wanted = {signal.SIGINT, signal.SIGTERM}
    old = signal.pthread_sigmask(signal.SIG_BLOCK, wanted)
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


