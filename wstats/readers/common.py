"""Helpers every format reader shares: row ranges, column selection, progress, encodings."""

from __future__ import annotations

import codecs
import sys
from collections import Counter
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path

from wstats.errors import ColumnError, ReadError, did_you_mean

#: A row range ``(start, stop)``: 0-based, stop exclusive, None for the end of the file.
Rows = tuple[int, int | None]


def check_unique(path: Path, names: Sequence[str]) -> None:
    """Raise ReadError for a column without a name, or naming the first one that occurs twice."""
    for position, name in enumerate(names, start=1):
        # A damaged dictionary can hand over None or "" as a name (seen with .sav files).
        if not isinstance(name, str) or not name.strip():
            raise ReadError(
                f"'{path}' has a column with no name (position {position}); the file is "
                "damaged: export it again with every column named"
            )
    twice = [name for name, n in Counter(names).items() if n > 1]
    if twice:
        raise ReadError(
            f"column '{twice[0]}' occurs more than once in '{path}'; rename one of them"
        )


def select_columns(path: Path, names: Sequence[str], columns: Sequence[str] | None) -> list[str]:
    """Return the columns to read (requested order, repeats dropped) after checking them."""
    check_unique(path, names)
    if columns is None:
        return list(names)
    if isinstance(columns, str):
        columns = [columns]
    known = set(names)
    for name in columns:
        if name not in known:
            hint = did_you_mean(name, names)
            raise ColumnError(f"column '{name}' is not in '{path}'{hint}")
    return list(dict.fromkeys(columns))


@contextmanager
def progress_bar(
    enabled: bool, description: str, total: float | None
) -> Iterator[Callable[[float], None]]:
    """Yield a function that sets the progress done; a no-op unless stderr is a terminal."""
    if not (enabled and sys.stderr.isatty()):
        yield lambda _done: None
        return
    from rich.console import Console
    from rich.progress import Progress

    with Progress(console=Console(stderr=True), transient=True) as bar:
        task = bar.add_task(description, total=total)
        yield lambda done: bar.update(task, completed=done)


def encoding_error(path: Path, exc: Exception, encoding: str) -> ReadError:
    """Return the ReadError for text that is not in the expected encoding."""
    return ReadError(
        f"text in '{path}' is not valid {encoding} ({exc}); "
        "pass the file's encoding with the encoding option, e.g. encoding='latin-1'"
    )


def is_utf8(encoding: str) -> bool:
    """Tell whether *encoding* names UTF-8 (the default, which defers to the file's own)."""
    return codecs.lookup(encoding).name == "utf-8"
