"""A look at variables: their raw codes, what decoding makes of them, a summary and a chart.

:func:`look` reads only the named columns (and the weight), decodes them with the codebook
(or with the file's own declarations when there is none) and returns a tidy
:class:`LookResult`; the renderers in :mod:`wstats.render` draw it. Nothing here estimates a
standard error: this is a first look, not an estimate.

Conventions:

- A raw code is *explained* when a rule (codebook code, file declaration, tag, blank rule)
  decided its rows, when the file or codebook labels it, or when it is an ordinary valid
  value of a variable that is not categorical. Otherwise (a code that fell outside the range
  and became ``invalid``, or an unlabelled code of a categorical variable) it is marked.
- Variables with more than :data:`MAX_CODES` distinct codes list their labelled, ruled,
  substituted and non-valid codes one by one; the other valid codes share one row
  ("``low..high``", with the number of codes).
- Weights: rows whose weight is not a positive number are left out of the weighted figures
  (their number is reported). Without a weight every row weighs 1.
- Quartiles are the lower weighted quantiles ``min{y : F(y) >= p}`` (``numpy.quantile`` with
  ``method="inverted_cdf"`` and weights), the definition the estimates use.
- Chart: a weighted share per level for categorical, binary and text variables; otherwise a
  weighted histogram of the valid values (one bar per value when there are at most
  :data:`HISTOGRAM_BINS` distinct values, else at most that many bins of a round width).
"""

from __future__ import annotations

import os
from collections.abc import Sequence

import numpy as np

from wstats.decoding.codebook import Codebook
from wstats.decoding.columns import DecodedColumn
from wstats.decoding.decode import decode_column, new_vocabulary
from wstats.errors import ColumnError, WeightError
from wstats.readers.dispatch import read_raw
from wstats.readers.raw import RawColumn
from wstats.reports.look_parts import code_rows, summary
from wstats.reports.look_types import LookResult, VariableLook

__all__ = ["HISTOGRAM_BINS", "MAX_CODES", "look"]

MAX_CODES = 20
HISTOGRAM_BINS = 12


def look(path: str | os.PathLike[str], variables: Sequence[str], *,
         codebook: Codebook | str | os.PathLike[str] | None = None, weight: str | None = None,
         rows: tuple[int, int | None] | None = None, encoding: str = "utf-8") -> LookResult:
    """Look at variables of a file: raw codes, decoding, summary and a chart.

    Parameters
    ----------
    path : the data file.
    variables : column names of the file to look at (only these and *weight* are read).
    codebook : a :class:`Codebook` or the path of one; None uses the file's declarations.
    weight : column of weights for the weighted mean, quartiles and chart; None: all 1.
    rows : ``(start, stop)`` row subset, as for :func:`wstats.read_raw`.
    encoding : as for :func:`wstats.read_raw`.

    Returns
    -------
    LookResult

    Raises
    ------
    ColumnError
        A variable or the weight is not a column of the file.
    ReadError, CodebookError
        The file or the codebook cannot be read.

    Examples
    --------
    >>> result = look("survey.sav", ["SLEEPHRS"], weight="FINALWT")  # doctest: +SKIP
    >>> result.variables[0].reasons  # doctest: +SKIP
    {'dont_know': 212, 'refused': 97}
    """
    book = _codebook_of(codebook)
    names = _names(variables, book)
    raw = read_raw(path, columns=list(dict.fromkeys([*names, *([weight] if weight else [])])),
                   rows=rows, encoding=encoding)
    w, left_out = _weights(raw.columns[weight], book) if weight else (np.ones(raw.n_rows), 0)
    looks = tuple(_look_one(raw.columns[n], book, w) for n in names)
    return LookResult(str(path), None if book.source == "<dict>" else str(book.source), weight,
                      left_out, looks)


def _codebook_of(codebook: Codebook | str | os.PathLike[str] | None) -> Codebook:
    """Return the codebook given, loaded from its path, or an empty one."""
    from wstats.decoding.codebook import load_codebook

    if isinstance(codebook, (str, os.PathLike)):
        return load_codebook(os.fspath(codebook))
    return codebook or Codebook()


def _names(variables: Sequence[str], book: Codebook) -> list[str]:
    """Return the variables, each once, refusing none at all and derived variables."""
    names = list(dict.fromkeys(variables))
    if not names:
        raise ColumnError("look needs at least one variable; name a column of the file")
    for name in names:
        if name in book.derived:
            inputs = ", ".join(sorted(book.derived[name].expression.inputs)) or "none"
            raise ColumnError(f"{name} is a derived variable of the codebook and has no raw "
                              f"codes; look at its inputs ({inputs}) instead")
    return names


def _weights(col: RawColumn, book: Codebook) -> tuple[np.ndarray, int]:
    """Return the weights (0 where not a positive number) and how many rows that is."""
    if not col.numeric:
        raise WeightError(f"weight column '{col.name}' holds text, not numbers; give a "
                          "numeric column to --weight")
    values = decode_column(col, book, new_vocabulary(book), ruled=False).column.values
    w = np.asarray(values, dtype=np.float64)
    bad = ~(np.isfinite(w) & (w > 0))
    return np.where(bad, 0.0, w), int(bad.sum())


def _look_one(col: RawColumn, book: Codebook, w: np.ndarray) -> VariableLook:
    """Decode one column and describe it."""
    result = decode_column(col, book, new_vocabulary(book), ruled=True)
    dec: DecodedColumn = result.column
    assert result.ruled is not None  # asked for
    codes = code_rows(col, dec, result.ruled, w, MAX_CODES)
    return summary(col, dec, codes, w, HISTOGRAM_BINS)
