"""Codes a file declares missing itself (user-missing values and ranges, tagged missing
values), and codes it labels with nothing but reason words; the reasons they get, named from
their value labels when the label is clear (see :mod:`wstats.decoding.label_reasons`)."""

from __future__ import annotations

import re
from typing import TYPE_CHECKING

from wstats.decoding.codebook_records import Rule
from wstats.decoding.label_reasons import label_reason, only_reason_words

if TYPE_CHECKING:
    from wstats.readers.raw import RawColumn

__all__ = ["declared_codes", "declared_reason", "tag_label", "tag_reason"]


def _code_name(value: float) -> str:
    """Spell a numeric code for a reason name: 7 -> '7', -9 -> 'm9', 7.5 -> '7_5'."""
    text = str(int(value)) if value.is_integer() and abs(value) < 1e15 else repr(value)
    return text.replace("-", "m").replace(".", "_").replace("+", "")


def declared_reason(value: float | str, label: str | None) -> str:
    """Name the reason of a code the file declares missing, from its label when clear."""
    named = label_reason(label)
    if named is not None:
        return named
    if isinstance(value, str):
        slug = re.sub(r"[^a-z0-9]+", "_", value.lower()).strip("_") or "blank"
        return f"declared_{slug}"[:40]
    return f"declared_{_code_name(value)}"[:40]


def tag_reason(letter: str, label: str | None = None) -> str:
    """Name a tagged missing value's reason: from its label when clear, else ``.a``/``.A`` ->
    tag_a, ``._`` -> tag_underscore."""
    named = label_reason(label)
    if named is not None:
        return named
    return "tag_underscore" if letter == "_" else f"tag_{letter.lower()}"


def tag_label(col: RawColumn, byte: int) -> str | None:
    """Return the file's value label of the tag letter *byte* (either case), or None."""
    letter = chr(byte)
    for key in (letter, letter.lower(), letter.upper(), f".{letter}", f".{letter.lower()}"):
        label = col.value_labels.get(key)
        if label is not None:
            return label
    return None


def declared_codes(col: RawColumn) -> tuple[dict[float, Rule], list[tuple[float, float, Rule]]]:
    """Return rules for the file's user-missing singles (and labelled codes inside ranges),
    and for codes whose label holds nothing but reason words (origin ``file label``)."""
    labels = {float(k): v for k, v in col.value_labels.items() if not isinstance(k, str)}
    singles: dict[float, Rule] = {}
    for code, text in labels.items():
        inferred = only_reason_words(text)
        if inferred is not None:
            singles[code] = Rule(inferred, None, "file label")
    ranges: list[tuple[float, float, Rule]] = []
    for item in col.user_missing:
        if isinstance(item, tuple):
            low, high = float(item[0]), float(item[1])
            name = f"declared_{_code_name(low)}_to_{_code_name(high)}"[:40]
            ranges.append((low, high, Rule(name, None, "file declaration")))
            for code, text in labels.items():
                if low <= code <= high:
                    singles[code] = Rule(declared_reason(code, text), None, "file declaration")
        elif not isinstance(item, str):
            code = float(item)
            singles[code] = Rule(declared_reason(code, labels.get(code)), None,
                                 "file declaration")
    return singles, ranges
