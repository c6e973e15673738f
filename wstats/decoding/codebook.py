"""Codebooks: what raw codes mean, and the public :class:`Codebook`.

A codebook says what raw codes mean (a missing reason or a substitute value), the valid range,
unit-prefixed answers to convert, labels and kinds, and derived variables. The schema is
documented in ``docs/codebook.md``; the records are in :mod:`wstats.decoding.codebook_records`,
reading and validating the TOML in :mod:`wstats.decoding.codebook_toml`, decoding a
:class:`~wstats.readers.raw.RawTable` with a codebook in :mod:`wstats.decoding.decode`. Every
problem raises a one-line :class:`~wstats.errors.CodebookError` naming the file, the TOML line
when known, and the table.
"""

from __future__ import annotations

from collections.abc import Collection, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from wstats.decoding.codebook_records import CodebookRules
from wstats.decoding.codebook_toml import codebook_from_dict, read_toml
from wstats.decoding.decode import decode_table

if TYPE_CHECKING:
    from wstats.decoding.columns import Dataset
    from wstats.readers.raw import RawTable

__all__ = ["Codebook", "decode", "load_codebook"]


def load_codebook(path: str | Path) -> Codebook:
    """Load and validate a codebook TOML file.

    Parameters
    ----------
    path : the ``.toml`` file.

    Returns
    -------
    Codebook

    Raises
    ------
    CodebookError
        When the file cannot be read, is not valid TOML (the message gives line and column) or
        breaks the schema (the message names the table and key).

    Examples
    --------
    >>> cb = load_codebook("demo/tbchs_codebook.toml")  # doctest: +SKIP
    """
    data, text = read_toml(Path(path))
    return Codebook.from_dict(data, source=str(path), text=text)


@dataclass(frozen=True)
class Codebook(CodebookRules):
    """A validated codebook: its records (see :class:`CodebookRules` for the attributes), read
    from TOML with :meth:`from_dict` or :func:`load_codebook`, applied with :meth:`decode`."""

    @classmethod
    def from_dict(cls, d: Mapping[str, Any], source: str = "<dict>",
                  text: str | None = None) -> Codebook:
        """Validate a codebook given as a dict (the parsed TOML).

        Parameters
        ----------
        d : the codebook, shaped like the TOML schema.
        source : name used in messages.
        text : the TOML text, when available, to give line numbers in messages.

        Returns
        -------
        Codebook
        """
        return codebook_from_dict(cls, d, source, text)

    def decode(self, raw: RawTable, consume: bool = False,
               keep: Collection[str] | None = None) -> Dataset:
        """Apply the codebook to raw columns; see :func:`decode`.

        With *consume* the caller gives *raw* up: its numeric arrays are decoded in place, and
        a column not in *keep* (when given) may lend its memory to a derived variable.
        """
        return decode_table(raw, self, consume, keep)


def decode(raw: RawTable, codebook: Codebook | None = None) -> Dataset:
    """Decode raw columns into values and missing reasons.

    Parameters
    ----------
    raw : what a reader returned.
    codebook : the rules to apply; None uses only what the file itself declares.

    Returns
    -------
    Dataset
        One DecodedColumn per raw column, then the derived variables whose inputs were read.

    Examples
    --------
    >>> import numpy as np
    >>> from wstats.readers.raw import RawColumn, RawTable
    >>> col = RawColumn("X", np.array([1.0, 7.0, np.nan]))
    >>> raw = RawTable("x.csv", "csv", "test", 3, {"X": col}, ["X"])
    >>> cb = Codebook.from_dict({"variables": {"X": {"codes": {"7": "dont_know"}}}})
    >>> decode(raw, cb)["X"].reason_counts()["dont_know"]
    1
    """
    return (codebook or Codebook()).decode(raw)
