"""Codes a file declares missing itself (user-missing values and ranges, tagged missing
values) and the reasons they get, named from their value labels when the label is clear."""

from __future__ import annotations

import re
from typing import TYPE_CHECKING

from wstats.decoding.codebook_records import Rule

if TYPE_CHECKING:
    from wstats.readers.raw import RawColumn

__all__ = ["LABEL_PATTERNS", "declared_codes", "declared_reason", "tag_reason"]

# Label wording -> core reason. A label matching exactly one of these names the reason; a
# label matching several ("Don't know/Refused") or none keeps a reason of its own.
LABEL_PATTERNS: dict[str, re.Pattern[str]] = {
    "dont_know": re.compile(r"\bdon['’]?t\s+know\b|\bdo not know\b|\bdk\b|\bnot sure\b"
                            r"|\bunsure\b|\bcan['’]?t say\b", re.I),
    "refused": re.compile(r"\brefus(ed|al|es?)\b|\brf\b|\bdeclined\b", re.I),
    "skipped": re.compile(r"\bnot asked\b|\blegitimate(ly)?\s+skip|\bvalid skip\b|\binapplicable"
                          r"\b|\bnot applicable\b|\bn/a\b|\bskipped\b", re.I),
    "missing": re.compile(r"\bnot ascertained\b|\bno answer\b|\bmissing\b|\bno response\b",
                          re.I),
}


def _code_name(value: float) -> str:
    """Spell a numeric code for a reason name: 7 -> '7', -9 -> 'm9', 7.5 -> '7_5'."""
    text = str(int(value)) if value.is_integer() and abs(value) < 1e15 else repr(value)
    return text.replace("-", "m").replace(".", "_").replace("+", "")


def declared_reason(value: float | str, label: str | None) -> str:
    """Name the reason of a code the file declares missing, from its label when clear."""
    if label:
        hits = [name for name, pat in LABEL_PATTERNS.items() if pat.search(label)]
        if len(hits) == 1:
            return hits[0]
    if isinstance(value, str):
        slug = re.sub(r"[^a-z0-9]+", "_", value.lower()).strip("_") or "blank"
        return f"declared_{slug}"[:40]
    return f"declared_{_code_name(value)}"[:40]


def tag_reason(letter: str) -> str:
    """Name a tagged missing value's reason: ``.a``/``.A`` -> tag_a, ``._`` -> tag_underscore."""
    return "tag_underscore" if letter == "_" else f"tag_{letter.lower()}"


def declared_codes(col: RawColumn) -> tuple[dict[float, Rule], list[tuple[float, float, Rule]]]:
    """Return rules for the file's user-missing singles (and labelled codes inside ranges)."""
    labels = {float(k): v for k, v in col.value_labels.items() if not isinstance(k, str)}
    singles: dict[float, Rule] = {}
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
