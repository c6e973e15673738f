"""Convert any readable data file into a Parquet cache that keeps the file's metadata.

Reading a large .sas7bdat, .sav or .dta file takes long; the cache is a column store that reads
only the columns asked for, fast, and gives back the same :class:`RawTable` the source gives:
same data, labels, value labels, user-missing declarations and missing-value tags. The
layout is described in :mod:`wstats.readers.parquet`.
"""

from __future__ import annotations

import os
from pathlib import Path

from wstats.errors import OutputError
from wstats.readers.dispatch import check_file, read_raw
from wstats.readers.output import atomic_output, check_output, sha256_of

__all__ = ["convert"]


def convert(
    src: str | os.PathLike[str],
    out: str | os.PathLike[str],
    overwrite: bool = False,
    progress: bool = False,
) -> Path:
    """Write every column of a data file to a Parquet cache.

    Parameters
    ----------
    src : the data file (any format :func:`wstats.readers.dispatch.read_raw` reads).
    out : the Parquet file to write; its name must end in ``.parquet``.
    overwrite : replace *out* if it exists.
    progress : show a progress bar on stderr while reading (when stderr is a terminal).

    Returns
    -------
    Path
        *out*, written atomically (complete or not at all).

    Raises
    ------
    ReadError
        *src* cannot be read (see :func:`wstats.readers.dispatch.read_raw`).
    OutputError
        *out* exists (without *overwrite*), is *src* itself, does not end in ``.parquet``,
        or cannot be written (folder missing or read-only, disk full).

    Examples
    --------
    >>> convert("survey.sav", "survey.parquet")  # doctest: +SKIP
    PosixPath('survey.parquet')
    """
    from wstats.readers.parquet import write_parquet

    source, target = Path(src), Path(out)
    check_file(source)
    _check_target(source, target, overwrite)
    table = read_raw(source, progress=progress)
    fingerprint = sha256_of(source)
    with atomic_output(target, overwrite) as sink:
        write_parquet(table, sink, fingerprint)
    return target


def _check_target(source: Path, target: Path, overwrite: bool) -> None:
    """Refuse a cache name that is not ``.parquet``, is the source itself, or exists."""
    if not target.name.lower().endswith(".parquet"):
        raise OutputError(
            f"cache '{target}' must have a name ending in .parquet, so it can be read back"
        )
    if target.exists() and target.resolve() == source.resolve():
        raise OutputError(f"cache '{target}' is the input file itself; choose another name")
    check_output(target, overwrite)
