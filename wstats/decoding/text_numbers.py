"""Why a column of numbers was read as text: the few cells that are not numbers.

A CSV column of numbers with ``NA`` (or ``.``, ``-``) in some cells is text as read: only
an empty cell is blank, since a codebook may give such text a meaning. When such a column is
used where numbers are needed, the message names the text that made it text and how to give
it a meaning.
"""

from __future__ import annotations

from wstats.decoding.columns import DecodedColumn

__all__ = ["why_text"]

#: Show at most this many distinct non-number texts.
_SHOWN = 3


def why_text(col: DecodedColumn) -> str:
    """Return "; it is text because of ..." with the fix, or "" when it is not mostly numbers.

    Examples
    --------
    >>> from wstats.decoding.columns import Dataset
    >>> ds = Dataset.from_arrays({"q": ["1", "2", "NA", "4"]})
    >>> why_text(ds["q"])[:52]
    "; it is text only because of 'NA' (1 row) among numb"
    """
    if col.values.dtype.kind != "O" or not len(col):
        return ""
    import pandas as pd

    text = pd.Series(col.values, dtype=object).fillna("").astype(str).str.strip()
    text = text[text != ""]
    numbers = pd.to_numeric(text, errors="coerce")
    other = text[numbers.isna()]
    if not len(text) or len(other) * 2 > len(text):
        return ""
    counts = other.value_counts()
    shown = ", ".join(f"'{v}' ({n} row{'s' if n != 1 else ''})"
                      for v, n in counts.iloc[:_SHOWN].items())
    more = f" and {len(counts) - _SHOWN} more" if len(counts) > _SHOWN else ""
    first = str(counts.index[0])
    return (f"; it is text only because of {shown}{more} among numbers: give that text a "
            f"meaning in the codebook, e.g. [variables.{col.name}] codes = "
            f"{{ \"{first}\" = \"missing\" }} with kind = \"continuous\"")
