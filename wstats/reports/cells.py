"""Shared cell formatting: numbers to text, cell templates, flag marks and footnotes.

Rounding convention (documented in ``docs/tables.md``): a number is rounded **half away from
zero on its shortest decimal representation** (``repr``), so ``2.675`` shows as ``2.68`` and
``0.125`` as ``0.13`` -- what a reader checking by hand expects -- rather than the binary
half-even result of ``format(2.675, ".2f") == "2.67"``. Negative zero prints as ``0``.
"""

from __future__ import annotations

import math
import string
from collections.abc import Iterable, Mapping, Sequence
from decimal import ROUND_HALF_UP, Context, Decimal
from typing import Any

__all__ = [
    "CELL_FIELDS",
    "MARKS",
    "REASON_ABBREVIATIONS",
    "SUPPRESSED",
    "FlagNotes",
    "auto_decimals",
    "cell_text",
    "fmt_count",
    "fmt_number",
    "group_text",
    "interval",
    "reason_breakdown",
    "reason_legend",
    "reason_legend_items",
    "reason_words",
    "rule_info",
    "rule_text",
    "short_reason",
    "template_fields",
    "with_marks",
]

#: Marks given to reliability rules in order of first appearance in a table.
MARKS: tuple[str, ...] = ("‡", "§", "¶", "#", "‡‡", "§§", "¶¶", "##")
#: Text of a suppressed cell where there is room for words (terminal, tidy tables).
SUPPRESSED = "[suppressed]"
#: Short names of the core reasons in the compact "not valid" breakdown.
REASON_ABBREVIATIONS: dict[str, str] = {
    "skipped": "skip", "dont_know": "dk", "refused": "ref", "invalid": "inv", "missing": "miss",
}
_REASON_WORDS: dict[str, str] = {
    "skipped": "skipped / not asked", "dont_know": "don't know", "refused": "refused",
    "invalid": "invalid (out of range)", "missing": "missing (not ascertained)",
}
#: Placeholders a cell template may use.
CELL_FIELDS: tuple[str, ...] = ("est", "se", "lo", "hi", "pct", "n", "cv", "deff")
_DASH = "–"
#: From this magnitude on a number is shown in exponent notation.
_HUGE = 1e15


def fmt_number(x: Any, decimals: int, *, grouping: bool = False) -> str:
    """Return *x* rounded half away from zero to *decimals* places ('' for NaN/None)."""
    if x is None:
        return ""
    v = float(x)
    if math.isnan(v):
        return ""
    if math.isinf(v):
        return "inf" if v > 0 else "-inf"
    if abs(v) >= _HUGE:  # 300 digits help no reader; machine formats keep the full value
        return format(v, ".6e")
    # Enough digits for any double (up to 309 before the point): the default context's 28
    # would refuse to round a value such as 1e300 to whole units.
    digits = Context(prec=max(28, 330 + max(decimals, 0)))
    q = Decimal(repr(v)).quantize(Decimal(1).scaleb(-decimals), rounding=ROUND_HALF_UP,
                                  context=digits)
    if q.is_zero():
        q = abs(q)
    return format(q, ",f" if grouping else "f")


def fmt_count(x: Any) -> str:
    """Return a count or weighted count as a whole number with thousands separators."""
    return fmt_number(x, 0, grouping=True)


def auto_decimals(se: float, *, lowest: int = 0, highest: int = 6) -> int:
    """Return decimals that show *se* to two significant digits (clipped to a range)."""
    if not math.isfinite(se) or se <= 0:
        return max(lowest, min(highest, 2))
    return max(lowest, min(highest, 1 - math.floor(math.log10(se))))


def template_fields(template: str) -> list[str]:
    """Return the placeholder names used in a cell template (raise ValueError if malformed)."""
    names = []
    for _, field, spec, conv in string.Formatter().parse(template):
        if field is None:
            continue
        if spec or conv or not field.isidentifier():
            raise ValueError(f"placeholder '{{{field}}}' must be a plain name like {{est}}")
        names.append(field)
    return names


def cell_text(
    template: str, row: Mapping[str, Any], *, decimals: int, se_decimals: int, scale: float
) -> str:
    """Fill *template* with the formatted numbers of one estimate row."""
    est, se = float(row["estimate"]) * scale, float(row["se"]) * scale
    lo, hi = float(row["ci_low"]) * scale, float(row["ci_high"]) * scale
    # one separator style for every cell: a column mixing 9876.5 and 12,345.6 reads badly
    values = {
        "est": fmt_number(est, decimals, grouping=True),
        "se": fmt_number(se, se_decimals, grouping=True),
        "lo": fmt_number(lo, decimals, grouping=True),
        "hi": fmt_number(hi, decimals, grouping=True),
        "pct": fmt_number(float(row["estimate"]) * 100, decimals) + "%",
        "n": fmt_count(row["n"]),
        "cv": fmt_number(float(row["cv"]) * 100, 1) + "%",
        "deff": fmt_number(row["deff"], 2),
    }
    return template.format(**values)


def short_reason(name: str) -> str:
    """Return a reason's short form: ``dk`` for the core ones, else initials (``na`` for
    ``not_applicable``, ``d88`` for ``declared_88``) or the first four letters of one word."""
    if name in REASON_ABBREVIATIONS:
        return REASON_ABBREVIATIONS[name]
    parts = [p for p in name.replace("-", "_").split("_") if p]
    if len(parts) < 2:
        return name[:4]
    return "".join(p if p.isdigit() else p[0] for p in parts).lower()


def reason_words(name: str) -> str:
    """Return a reason in words: ``don't know``, ``not applicable``."""
    return _REASON_WORDS.get(name, name.replace("_", " "))


def reason_legend_items(reasons: Iterable[str]) -> str:
    """Return ``dk = don't know; na = not applicable`` for the reasons given (no ``x = x``)."""
    items = [(short_reason(r), reason_words(r)) for r in dict.fromkeys(reasons) if r != "valid"]
    return "; ".join(f"{s} = {w}" for s, w in items if s != w)


def reason_breakdown(reasons: Mapping[str, int] | None, order: Sequence[str] = ()) -> str:
    """Return the compact non-valid breakdown, e.g. ``dk 41 · ref 12 · skip 903``."""
    if not reasons:
        return ""
    names = [r for r in order if r in reasons] + sorted(r for r in reasons if r not in order)
    parts = [f"{short_reason(r)} {fmt_count(reasons[r])}"
             for r in names if r != "valid" and int(reasons[r]) > 0]
    return " · ".join(parts)


def reason_legend(reasons: Iterable[str]) -> str:
    """Return the footnote explaining the abbreviations of the reasons shown."""
    seen = [r for r in dict.fromkeys(reasons) if r != "valid"]
    if not seen:
        return ""
    words = reason_legend_items(seen)
    return ("Not valid: domain rows left out of the estimate, by reason"
            + (f" ({words})." if words else "."))


def rule_info(rule_id: str) -> tuple[str, str]:
    """Return (description, source) of a reliability rule ('' for a rule not in RULES)."""
    try:
        from wstats.estimation.age_adjust import AGE_FLAGS
        from wstats.estimation.reliability import NONRESPONSE_RULES, RULES
    except ImportError:  # the rules module is optional for rendering hand-built tables
        return "", ""
    return (RULES.get(rule_id) or NONRESPONSE_RULES.get(rule_id)
            or AGE_FLAGS.get(rule_id, ("", "")))


def rule_text(rule_id: str) -> str:
    """Return ``rule_id: description (source)`` from the reliability rules registry."""
    description, source = rule_info(rule_id)
    if not description:
        return rule_id
    return f"{rule_id}: {description} ({source})" if source else f"{rule_id}: {description}"


class FlagNotes:
    """Marks for reliability rules, given in order of first use, and the footnotes they need."""

    def __init__(self) -> None:
        self._marks: dict[str, str] = {}
        self.suppressed = False

    def mark(self, flags: Iterable[str], suppress: bool = False) -> str:
        """Return the marks for one cell's rules, registering new rules."""
        self.suppressed = self.suppressed or bool(suppress)
        out = []
        for rule in flags:
            if rule not in self._marks:
                i = len(self._marks)
                self._marks[rule] = MARKS[i] if i < len(MARKS) else f"[{i + 1}]"
            out.append(self._marks[rule])
        return "".join(out)

    def notes(self, suppressed_text: str = SUPPRESSED) -> list[str]:
        """Return one footnote per rule used, plus one explaining suppressed cells."""
        out = [f"{m} Flagged by reliability rule {rule_text(r)}." for r, m in self._marks.items()]
        if self.suppressed:
            out.append(f"{suppressed_text} Estimate not shown: it does not meet the reliability "
                       "standard (rules marked in the cell).")
        return out

    @property
    def rules(self) -> tuple[str, ...]:
        """Rule ids in order of first use."""
        return tuple(self._marks)


def group_text(value: Any) -> str:
    """Return a by-variable value as text ('All' for whole-population rows; 2.0 -> '2')."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "All"
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


def with_marks(text: str, marks: str) -> str:
    """Return *text* followed by its marks (a space between when both are present)."""
    return f"{text} {marks}" if text and marks else (text or marks)


def interval(lo: str, hi: str, *, words: bool = False) -> str:
    """Return ``lo–hi`` with an en dash, or '' when either end is missing.

    A negative end, or ``words=True`` (a column of differences, which often span zero),
    reads as ``-0.10 to -0.02``: a dash between two minus signs (``-0.10–-0.02``) is easily
    misread.
    """
    if not (lo and hi):
        return ""
    if words or lo.startswith("-") or hi.startswith("-"):
        return f"{lo} to {hi}"
    return f"{lo}{_DASH}{hi}"
