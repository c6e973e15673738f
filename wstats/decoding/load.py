"""The one call that reads a file and applies a codebook: :func:`read`."""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

from wstats.decoding.codebook import Codebook, load_codebook
from wstats.decoding.columns import Dataset
from wstats.errors import ColumnError, did_you_mean

__all__ = ["read"]


def read(
    path: str | Path,
    columns: Sequence[str] | None = None,
    codebook: Codebook | str | Path | None = None,
    rows: tuple[int, int | None] | None = None,
    progress: bool = False,
    encoding: str = "utf-8",
) -> Dataset:
    """Read a survey file and decode it into values with a missing reason per row.

    Parameters
    ----------
    path : the data file (.xpt, .sas7bdat, .sav, .zsav, .por, .dta, .csv, .tsv, .parquet).
    columns : variables wanted (raw or derived); None reads every column and computes every
        derived variable. Only the raw columns needed are read from the file.
    codebook : a Codebook, the path of a codebook TOML file, or None (the file's own
        declarations only).
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
    from wstats.readers.dispatch import read_raw

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
