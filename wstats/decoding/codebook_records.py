"""A codebook's records: rules, code maps, unit prefixes, variables, families, derived
variables, and :class:`CodebookRules`, the validated content with its lookups.

Reading the TOML is in :mod:`wstats.decoding.codebook_toml`, decoding with it in
:mod:`wstats.decoding.decode`; the public :class:`~wstats.decoding.codebook.Codebook` adds both
to these records.
"""

from __future__ import annotations

import fnmatch
import re
from collections.abc import Iterable
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

from wstats.decoding.expressions import Expression
from wstats.errors import CodebookError

__all__ = [
    "DEFAULT_FACTORS",
    "DEFAULT_UNITS",
    "CodeMap",
    "CodebookRules",
    "DerivedSpec",
    "Family",
    "Rule",
    "UnitPrefix",
    "VariableSpec",
]

# Common practice in telephone health-survey codebooks (no single source): 1xx per day,
# 2xx per week, 3xx per month, 4xx per year; per-year factors 365, 52, 12, 1 (overridable).
DEFAULT_UNITS: dict[int, str] = {1: "day", 2: "week", 3: "month", 4: "year"}
DEFAULT_FACTORS: dict[str, float] = {"day": 365.0, "week": 52.0, "month": 12.0, "year": 1.0}

_WILD = re.compile(r"[*?\[]")


@dataclass(frozen=True)
class Rule:
    """What one raw code means: a reason name, or a substitute value (reason None)."""

    reason: str | None
    value: float | None
    origin: str

    def same_meaning(self, other: Rule) -> bool:
        """Tell whether two rules give the code the same meaning."""
        return (self.reason, self.value) == (other.reason, other.value)

    def describe(self) -> str:
        """Return the meaning in words, e.g. ``"refused"`` or ``"the value 0"``."""
        return f"'{self.reason}'" if self.reason else f"the value {self.value:g}"


@dataclass(frozen=True)
class CodeMap:
    """Rules by raw code: numeric codes, tag letters (lower case) and text codes."""

    numeric: dict[float, Rule] = field(default_factory=dict)
    tags: dict[str, Rule] = field(default_factory=dict)
    text: dict[str, Rule] = field(default_factory=dict)

    def __bool__(self) -> bool:
        return bool(self.numeric or self.tags or self.text)


@dataclass(frozen=True)
class UnitPrefix:
    """A unit-prefixed answer: the leading digit is the unit, the other digits the count.

    Attributes
    ----------
    to : the unit the result is expressed in (a key of ``factors``).
    units : leading digit -> unit name.
    factors : unit name -> how many of it make one year (per-year factor).
    digits : width of the code (3: ``203`` = unit 2, count 03).
    """

    to: str = "year"
    units: dict[int, str] = field(default_factory=lambda: dict(DEFAULT_UNITS))
    factors: dict[str, float] = field(default_factory=lambda: dict(DEFAULT_FACTORS))
    digits: int = 3


@dataclass(frozen=True)
class VariableSpec:
    """The codebook entry of one raw variable (``[variables.NAME]``)."""

    name: str
    label: str | None = None
    kind: str | None = None
    range: tuple[float, float] | None = None
    codes: CodeMap = field(default_factory=CodeMap)
    blank: Rule | None = None
    labels: dict[float, str] | None = None
    unit_prefixed: UnitPrefix | None = None
    where: str = ""


@dataclass(frozen=True)
class Family:
    """One rule for many variables: name globs and/or the digit count of the largest code."""

    name: str
    match: tuple[str, ...]
    digits: int | None
    codes: CodeMap
    where: str = ""

    def applies(self, variable: str, digits: int | None) -> bool:
        """Tell whether the family covers *variable* whose largest code has *digits* digits."""
        if self.match and variable not in self._names and not any(
                fnmatch.fnmatchcase(variable, g) for g in self._globs):
            return False
        return self.digits is None or self.digits == digits

    @cached_property
    def _names(self) -> frozenset[str]:
        """The match entries without wildcards: a set lookup instead of a glob each."""
        return frozenset(g for g in self.match if not _WILD.search(g))

    @cached_property
    def _globs(self) -> tuple[str, ...]:
        """The match entries with wildcards."""
        return tuple(g for g in self.match if _WILD.search(g))


@dataclass(frozen=True)
class DerivedSpec:
    """A derived variable (``[derived.NAME]``)."""

    name: str
    expression: Expression
    label: str | None = None
    kind: str | None = None
    labels: dict[float, str] | None = None


@dataclass(frozen=True)
class CodebookRules:
    """A validated codebook's content and its lookups (see ``Codebook``).

    Attributes
    ----------
    source : the file it came from (or ``"<dict>"``).
    name : survey name, or None.
    population : stated population size, or None.
    design : the ``[design]`` table as given, or None.
    blank : the default meaning of a blank (``[defaults] blank``; ``skipped`` unless set).
    reasons : extra reasons name -> description, in declaration order.
    families : code families in declaration order.
    variables : raw-variable entries by name.
    derived : derived variables by name, in evaluation (topological) order.
    """

    source: str = "<dict>"
    name: str | None = None
    population: float | None = None
    design: dict[str, Any] | None = None
    blank: Rule = field(default_factory=lambda: Rule("skipped", None, "default"))
    reasons: dict[str, str] = field(default_factory=dict)
    families: tuple[Family, ...] = ()
    variables: dict[str, VariableSpec] = field(default_factory=dict)
    derived: dict[str, DerivedSpec] = field(default_factory=dict)

    def _check_overlaps(self) -> None:
        """Refuse names defined twice and families whose codes conflict on listed variables."""
        both = sorted(set(self.variables) & set(self.derived))
        if both:
            raise CodebookError(f"{self.source}: '{both[0]}' is both a variable and a derived "
                                "variable; rename the derived one")
        for name in self.variables:
            self.family_codes(name, None, static=True)

    def family_codes(self, variable: str, digits: int | None, static: bool = False) -> CodeMap:
        """Merge the codes of the families covering *variable*; conflicting families fail.

        With ``static`` only glob-only families are considered (digits are unknown before data).
        """
        merged = CodeMap()
        owner: dict[tuple[str, Any], Family] = {}
        for fam in self.families:
            if static and fam.digits is not None:
                continue
            if not fam.applies(variable, digits):
                continue
            for kind in ("numeric", "tags", "text"):
                target: dict[Any, Rule] = getattr(merged, kind)
                for code, rule in getattr(fam.codes, kind).items():
                    prior = owner.get((kind, code))
                    if prior is not None and not target[code].same_meaning(rule):
                        raise CodebookError(
                            f"{self.source}: variable {variable}: code {_show(code)} means "
                            f"{target[code].describe()} in family '{prior.name}' but "
                            f"{rule.describe()} in family '{fam.name}'; give the variable its "
                            "own code or narrow one family's match")
                    owner[(kind, code)] = fam
                    target[code] = rule
        return merged

    def codes_for(self, variable: str, digits: int | None) -> CodeMap:
        """Return the effective codes of *variable*: families, then its own codes on top."""
        merged = self.family_codes(variable, digits)
        own = self.variables[variable].codes if variable in self.variables else CodeMap()
        return CodeMap({**merged.numeric, **own.numeric}, {**merged.tags, **own.tags},
                       {**merged.text, **own.text})

    def kind_of(self, name: str) -> str | None:
        """Return the kind the codebook gives *name*, or None when it gives none."""
        spec = self.variables.get(name) or self.derived.get(name)
        return spec.kind if spec is not None else None

    def labels_for(self, name: str) -> dict[float, str] | None:
        """Return the value labels the codebook gives *name*, or None."""
        spec = self.variables.get(name) or self.derived.get(name)
        return spec.labels if spec is not None else None

    def raw_columns_for(self, variables: Iterable[str]) -> list[str]:
        """Return the raw columns needed for *variables*, derived inputs expanded, in order.

        Examples
        --------
        >>> cb = Codebook.from_dict({"derived": {"bd_bmi": {"expr": "KG / (CM / 100) ^ 2"}}})
        >>> cb.raw_columns_for(["AGE", "bd_bmi"])
        ['AGE', 'CM', 'KG']
        """
        out: dict[str, None] = {}

        def add(name: str) -> None:
            if name in self.derived:
                for dep in sorted(self.derived[name].expression.inputs):
                    add(dep)
            else:
                out.setdefault(name)

        for name in variables:
            add(name)
        return list(out)


def _show(code: Any) -> str:
    """Format a raw code for a message."""
    if isinstance(code, float):
        return f"{code:g}"
    return f".{code}" if isinstance(code, str) and len(code) == 1 else repr(code)


