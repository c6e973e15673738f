"""The one call that reads a file and applies a codebook: :func:`read`."""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Any

from wstats.decoding.codebook import Codebook, load_codebook
from wstats.decoding.columns import Dataset
from wstats.errors import ColumnError, did_you_mean

__all__ = ["read"]


def read(
    path: str | Path | Sequence[str | Path],
    columns: Sequence[str] | None = None,
    codebook: Codebook | str | Path | Sequence[Codebook | str | Path | None] | None = None,
    rows: tuple[int, int | None] | None = None,
    progress: bool = False,
    encoding: str = "utf-8",
) -> Dataset:
    """Read a survey file and decode it into values with a missing reason per row.

    Parameters
    ----------
    path : the data file (.xpt, .sas7bdat, .sav, .zsav, .por, .dta, .csv, .tsv, .parquet);
        or several files pooled as one analysis (each file one period): a list, a glob
        (``"cycle*.xpt"``) or a folder of data files. Pooled records carry the by-variable
        ``_file`` (see :mod:`wstats.design.pooling` for how the design treats them).
    columns : variables wanted (raw or derived); None reads every column and computes every
        derived variable. Only the raw columns needed are read from the file.
    codebook : a Codebook, the path of a codebook TOML file, or None (the file's own
        declarations only); for several files, one codebook for all or a list with one per
        file (None for a file that has none).
    rows : ``(start, stop)`` row range to read (stop None = to the end); None reads all.
    progress : show a progress bar while reading.
    encoding : text encoding of a CSV/TSV file, or of the labels of a .sas7bdat/.sav/.dta file
        ("utf-8", the default, means the file's own declared encoding for those).

    Returns
    -------
    Dataset
        The requested variables in the requested order (all columns when ``columns`` is None).

    Raises
    ------
    ReadError, ColumnError, CodebookError

    Examples
    --------
    >>> ds = read("tbchs_sample.xpt", ["dm_age", "bd_bmi"], "tbchs_codebook.toml")  # doctest: +SKIP
    >>> ds["bd_bmi"].reason_counts()  # doctest: +SKIP
    """
    from wstats.decoding.stacking import is_several
    from wstats.readers.dispatch import read_raw

    if is_several(path):
        return _read_several(path, columns, codebook, rows, progress, encoding)
    if not (codebook is None or isinstance(codebook, Codebook | str | Path)):
        raise ColumnError("a list of codebooks needs a list of files; give one codebook")
    assert not isinstance(path, list | tuple)
    cb = load_codebook(codebook) if isinstance(codebook, str | Path) else codebook
    wanted = list(dict.fromkeys(columns)) if columns is not None else None
    needed = (cb or Codebook()).raw_columns_for(wanted) if wanted is not None else None
    if cb is not None and needed is not None:
        _check_derived_inputs(cb, needed, str(path))
    raw = read_raw(str(path), needed, rows, progress, encoding=encoding)
    # raw is ours: decode in place; inputs nobody asked for may hold derived values
    data = (cb or Codebook()).decode(raw, consume=True, keep=wanted)
    if wanted is None:
        return data
    for name in wanted:
        if name not in data.columns:
            hint = did_you_mean(name, [*raw.file_columns, *(cb.derived if cb else ())])
            raise ColumnError(f"variable '{name}' is neither a column of {path} nor a derived "
                              f"variable of the codebook{hint}")
    return Dataset({n: data.columns[n] for n in wanted}, data.vocabulary, data.n_rows,
                   data.source, data.metadata)


def _check_derived_inputs(cb: Codebook, needed: Sequence[str], path: str) -> None:
    """Name the derived variable whose input is not in the file, before reading any data."""
    from wstats.decoding.decode import unknown_input
    from wstats.readers.dispatch import file_columns

    present = file_columns(path)
    for name in needed:
        if name in present:
            continue
        for spec in cb.derived.values():
            if name in spec.expression.inputs:
                raise unknown_input(spec.expression, name, path, [*present, *cb.derived])


def _read_several(path: str | Path | Sequence[str | Path], columns: Sequence[str] | None,
                  codebook: Any, rows: tuple[int, int | None] | None, progress: bool,
                  encoding: str) -> Dataset:
    """Read every file of a pool with its codebook and stack them (see :func:`read`)."""
    from wstats.decoding.stacking import FILE_COLUMN, expand_paths, stack_datasets
    from wstats.readers.dispatch import file_columns

    paths = expand_paths(path)
    books = list(codebook) if isinstance(codebook, list | tuple) else [codebook] * len(paths)
    if len(books) != len(paths):
        raise ColumnError(f"{len(books)} codebooks were given for {len(paths)} files; give one "
                          "codebook, or one per file in file order")
    books = [load_codebook(b) if isinstance(b, str | Path) else b for b in books]
    wanted = None if columns is None else [c for c in dict.fromkeys(columns) if c != FILE_COLUMN]
    known = [[*file_columns(p), *(cb.derived if cb else ())] for p, cb in
             zip(paths, books, strict=True)]
    for name in wanted or ():
        if not any(name in k for k in known):
            raise ColumnError(f"variable '{name}' is in none of the {len(paths)} files nor a "
                              f"derived variable{did_you_mean(name, known[0])}")
    parts = []
    for p, cb, k in zip(paths, books, known, strict=True):
        # a file holding none of the variables still gives its rows (they are not_in_file)
        own = None if wanted is None else [c for c in wanted if c in k] or k[:1]
        parts.append(read(p, own, cb, rows, progress, encoding))
    labels = next((b.labels_for(FILE_COLUMN) for b in books if b and b.labels_for(FILE_COLUMN)),
                  None)
    return stack_datasets(parts, paths, wanted, labels, books)
