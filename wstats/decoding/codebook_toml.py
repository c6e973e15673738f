"""Reading and validating a codebook's TOML into a :class:`~wstats.decoding.codebook.Codebook`.

The schema is documented in ``docs/codebook.md``. Every problem raises a one-line
:class:`~wstats.errors.CodebookError` naming the file, the TOML line when known (header lines
are indexed once), the table and the key, with a suggestion for a misspelt name.
"""

from __future__ import annotations

import math
import re
import tomllib
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any, TypeVar

from wstats.decoding.codebook_records import (
    DEFAULT_FACTORS,
    DEFAULT_UNITS,
    CodebookRules,
    CodeMap,
    DerivedSpec,
    Family,
    Rule,
    UnitPrefix,
    VariableSpec,
    _show,
)
from wstats.decoding.columns import KINDS
from wstats.decoding.expressions import parse_expression
from wstats.decoding.reasons import CORE_REASONS, Reasons
from wstats.errors import CodebookError, did_you_mean

__all__ = ["codebook_from_dict", "read_toml"]

_CB = TypeVar("_CB", bound=CodebookRules)

_TOP = ("survey", "design", "defaults", "reasons", "family", "variables", "derived")
_SURVEY = ("name", "population", "description")
_DEFAULTS = ("blank",)
_VARIABLE = ("label", "kind", "range", "codes", "blank", "labels", "unit_prefixed")
_FAMILY = ("name", "match", "digits", "codes")
_DERIVED = ("label", "kind", "expr", "labels")
_UNIT = ("to", "units", "factors", "digits")
_TAG_KEY = re.compile(r"^\.([A-Za-z_])$")
_HEADER_NAME = re.compile(r'^\s*\[\s*([^\s.\[\]]+)\s*\.\s*"?([^".\]\s]*)')
_TOML_POS = re.compile(r"\s*\(at line (\d+), column (\d+)\)")


def read_toml(path: Path) -> tuple[dict[str, Any], str]:
    """Return the parsed TOML of a codebook file and its text; fail in one line."""
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise CodebookError(f"codebook file {path} does not exist; check the path") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise CodebookError(f"codebook file {path} cannot be read as UTF-8 text: {exc}"
                            ) from exc
    try:
        return tomllib.loads(text), text
    except tomllib.TOMLDecodeError as exc:
        raise CodebookError(_toml_message(str(path), str(exc))) from exc


def codebook_from_dict(cls: type[_CB], d: Mapping[str, Any], source: str,
                       text: str | None) -> _CB:
    """Validate a codebook given as a dict (see ``Codebook.from_dict``)."""
    if not isinstance(d, Mapping):
        raise CodebookError(f"{source}: a codebook must be a table of tables")
    _check_keys(d, _TOP, source)
    p = _Parser(d, source, text)
    reasons = p.reasons()
    survey = _table(d.get("survey"), f"{source}, [survey]", "survey")
    _check_keys(survey, _SURVEY, f"{source}, [survey]")
    defaults = _table(d.get("defaults"), f"{source}, [defaults]", "defaults")
    _check_keys(defaults, _DEFAULTS, f"{source}, [defaults]")
    population = survey.get("population")
    fams = d.get("family", [])
    if not isinstance(fams, list):
        raise CodebookError(f"{source}: write code families as [[family]] tables")
    derived = {n: p.derived(n, v) for n, v in
               _table(d.get("derived"), source, "derived").items()}
    cb = cls(
        source=source,
        name=_text(survey.get("name"), f"{source}, [survey]", "name"),
        population=None if population is None else _number(population, source,
                                                            "survey.population"),
        design=_table(d["design"], source, "design") if "design" in d else None,
        blank=p.rule(defaults.get("blank", "skipped"), f"{source}, [defaults]", "blank",
                     "[defaults]"),
        reasons=reasons,
        families=tuple(p.family(i, f) for i, f in enumerate(fams)),
        variables={n: p.variable(n, v) for n, v in
                   _table(d.get("variables"), source, "variables").items()},
        derived={n: derived[n] for n in _topological(derived, source)},
    )
    cb._check_overlaps()
    return cb


class _Locator:
    """Name a place in a codebook file: the source and, when found, the TOML line.

    Header lines are indexed once by (table, name), so locating every table of a codebook
    with hundreds of variables reads the text once, not once per table.
    """

    def __init__(self, source: str, text: str | None) -> None:
        self.source, self.lines = source, (text.splitlines() if text else [])
        self.headers = [(i, line) for i, line in enumerate(self.lines)
                        if line.lstrip().startswith("[")]
        self.by_name: dict[tuple[str, str], list[tuple[int, str]]] = {}
        for i, line in self.headers:
            m = _HEADER_NAME.match(line)
            # a whole name: the header closes (or a sub-table starts) right after it
            if m and line[m.end():].lstrip('"').lstrip().startswith(("]", ".")):
                self.by_name.setdefault((m.group(1), m.group(2)), []).append((i, line))

    def table(self, head: str, name: str | None = None, nth: int = 0) -> str:
        """Return ``"<source> line N, [head.name]"`` for a table header (nth for arrays)."""
        label = f"[{head}.{name}]" if name is not None else f"[[{head}]] #{nth + 1}"
        # the (table, name) index holds the header lines of whole names: no pattern needed
        hits = [i for i, _ in self.by_name.get((head, name), [])] if name is not None else []
        if not hits:  # a quoted or unusual header, or an array of tables: match each line
            pat = (re.compile(rf"^\s*\[\s*{head}\s*\.\s*\"?{re.escape(name)}\"?\s*[\].]")
                   if name is not None else re.compile(rf"^\s*\[\[\s*{head}\s*\]\]"))
            hits = [i for i, line in self.headers if pat.match(line)]
        if name is None:
            hits = hits[nth:nth + 1]
        if not hits and name is not None:
            word = re.compile(rf"(^|[\s.\"]){re.escape(name)}([\s.\"=]|$)")
            hits = [i for i, line in enumerate(self.lines) if word.search(line)]
        return f"{self.source} line {hits[0] + 1}, {label}" if hits else f"{self.source}, {label}"


def _toml_message(source: str, message: str) -> str:
    """Turn tomllib's message into ``file:line:col: ...`` with a hint."""
    m = _TOML_POS.search(message)
    what = _TOML_POS.sub("", message).strip().rstrip(".")
    at = f"{source} line {m.group(1)}, column {m.group(2)}" if m else source
    return (f"{at}: TOML syntax error: {what}; fix the TOML there (quote text and negative "
            "codes, e.g. \"-9\" = \"refused\")")


def _check_keys(table: Mapping[str, Any], allowed: Sequence[str], where: str) -> None:
    """Refuse keys that the schema does not know."""
    for key in table:
        if key not in allowed:
            raise CodebookError(f"{where}: unknown key '{key}'{did_you_mean(key, allowed)}; "
                                f"allowed keys: {', '.join(allowed)}")


def _table(value: Any, where: str, key: str) -> dict[str, Any]:
    """Return *value* if it is a TOML table, else fail naming *key*."""
    if value is None:
        return {}
    if not isinstance(value, dict):
        raise CodebookError(f"{where}: '{key}' must be a table like {{ 1 = \"...\" }}")
    return value


def _number(value: Any, where: str, key: str) -> float:
    """Return a finite number or fail naming *key*."""
    if isinstance(value, bool) or not isinstance(value, int | float) or not math.isfinite(value):
        raise CodebookError(f"{where}: '{key}' must be a number, got {value!r}")
    return float(value)


def _text(value: Any, where: str, key: str) -> str | None:
    """Return a string (or None when absent) or fail naming *key*."""
    if value is not None and not isinstance(value, str):
        raise CodebookError(f"{where}: '{key}' must be text in quotes, got {value!r}")
    return value


def _code_key(key: str) -> float | None:
    """Parse a code key to a finite float, or None when it is not a number."""
    try:
        v = float(key)
    except ValueError:
        return None
    return v if math.isfinite(v) else None


class _Parser:
    """Validate a parsed TOML dict into the parts of a Codebook."""

    def __init__(self, data: Mapping[str, Any], source: str, text: str | None) -> None:
        self.data, self.source, self.loc = data, source, _Locator(source, text)
        self.known: tuple[str, ...] = CORE_REASONS

    def rule(self, value: Any, where: str, code: str, origin: str) -> Rule:
        """Turn one code's meaning (reason name or number) into a Rule."""
        if isinstance(value, str):
            if value not in self.known or value == "valid":
                hint = did_you_mean(value, self.known[1:])
                raise CodebookError(
                    f"{where}: code {code} names unknown reason '{value}'{hint}; known reasons: "
                    f"{', '.join(self.known[1:])} (add new ones under [reasons])")
            return Rule(value, None, origin)
        return Rule(None, _number(value, where, f"code {code}"), origin)

    def codes(self, value: Any, where: str, origin: str) -> CodeMap:
        """Parse a ``codes`` table into numeric, tag and text rules."""
        out = CodeMap()
        for key, meaning in _table(value, where, "codes").items():
            rule = self.rule(meaning, where, key, origin)
            tag = _TAG_KEY.match(key.strip())
            num = _code_key(key)
            slot: dict[Any, Rule] = out.tags if tag else out.numeric if num is not None \
                else out.text
            code: Any = tag.group(1).lower() if tag else num if num is not None else key.strip()
            if code in slot and not slot[code].same_meaning(rule):
                raise CodebookError(f"{where}: code {_show(code)} is written twice, as "
                                    f"{slot[code].describe()} and as {rule.describe()}; keep one")
            slot[code] = rule
            if not tag:
                out.text[key.strip()] = rule
        return out

    def labels(self, value: Any, where: str) -> dict[float, str] | None:
        """Parse a ``labels`` table (numeric codes -> text)."""
        if value is None:
            return None
        out: dict[float, str] = {}
        for key, text in _table(value, where, "labels").items():
            num = _code_key(key)
            if num is None or not isinstance(text, str):
                raise CodebookError(f"{where}: labels need numeric codes and quoted text, got "
                                    f"{key!r} = {text!r}")
            out[num] = text
        return out

    def kind(self, value: Any, where: str) -> str | None:
        """Check a ``kind``."""
        if value is not None and value not in KINDS:
            hint = did_you_mean(str(value), KINDS)
            raise CodebookError(f"{where}: unknown kind {value!r}{hint}; use one of "
                                f"{', '.join(KINDS)}")
        return None if value is None else str(value)

    def reasons(self) -> dict[str, str]:
        """Parse ``[reasons]`` and extend the known reason names."""
        where = f"{self.source}, [reasons]"
        table = _table(self.data.get("reasons"), where, "reasons")
        probe = Reasons()
        for name, text in table.items():
            try:
                probe.add(name)
            except CodebookError as exc:
                raise CodebookError(f"{where}: {exc}") from None
            if not isinstance(text, str):
                raise CodebookError(f"{where}: reason '{name}' needs a description in quotes")
        self.known = tuple(probe.names)
        return dict(table)

    def range(self, value: Any, where: str) -> tuple[float, float] | None:
        """Parse ``range = [min, max]``."""
        if value is None:
            return None
        if not isinstance(value, list) or len(value) != 2:
            raise CodebookError(f"{where}: range must be [min, max], got {value!r}")
        low, high = (_number(v, where, "range") for v in value)
        if low > high:
            raise CodebookError(f"{where}: range min {low:g} is greater than max {high:g}; "
                                f"write [{high:g}, {low:g}]")
        return low, high

    def unit_prefixed(self, value: Any, where: str) -> UnitPrefix | None:
        """Parse a ``unit_prefixed`` table."""
        if value is None:
            return None
        table = _table(value, where, "unit_prefixed")
        where = f"{where}.unit_prefixed"
        _check_keys(table, _UNIT, where)
        units = dict(DEFAULT_UNITS)
        if "units" in table:
            units = {}
            for key, unit in _table(table["units"], where, "units").items():
                if not key.isdigit() or len(key) != 1 or not isinstance(unit, str):
                    raise CodebookError(f"{where}: units map one leading digit to a unit name, "
                                        f"got {key!r} = {unit!r}")
                units[int(key)] = unit
        factors = {k: _number(v, where, f"factors.{k}")
                   for k, v in _table(table.get("factors", DEFAULT_FACTORS), where,
                                      "factors").items()}
        return self.unit_checked(table, units, factors, where)

    def unit_checked(self, table: Mapping[str, Any], units: dict[int, str],
                     factors: dict[str, float], where: str) -> UnitPrefix:
        """Check that every unit has a positive factor and build the UnitPrefix."""
        to = table.get("to", "year")
        for unit in [*units.values(), to]:
            if unit not in factors:
                raise CodebookError(f"{where}: unit {unit!r} has no per-year factor"
                                    f"{did_you_mean(str(unit), factors)}; known: "
                                    f"{', '.join(factors)}")
        if any(f <= 0 for f in factors.values()):
            raise CodebookError(f"{where}: per-year factors must be positive")
        digits = table.get("digits", 3)
        if isinstance(digits, bool) or not isinstance(digits, int) or not 2 <= digits <= 9:
            raise CodebookError(f"{where}: digits must be a whole number 2-9, got {digits!r}")
        return UnitPrefix(str(to), units, factors, digits)

    def variable(self, name: str, value: Any) -> VariableSpec:
        """Parse one ``[variables.NAME]`` table."""
        where = self.loc.table("variables", name)
        table = _table(value, where, name)
        _check_keys(table, _VARIABLE, where)
        blank = table.get("blank")
        return VariableSpec(
            name=name,
            label=_text(table.get("label"), where, "label"),
            kind=self.kind(table.get("kind"), where),
            range=self.range(table.get("range"), where),
            codes=self.codes(table.get("codes"), where, f"variable {name}"),
            blank=None if blank is None else self.rule(blank, where, "blank", f"variable {name}"),
            labels=self.labels(table.get("labels"), where),
            unit_prefixed=self.unit_prefixed(table.get("unit_prefixed"), where),
            where=where,
        )

    def family(self, nth: int, value: Any) -> Family:
        """Parse one ``[[family]]`` table."""
        where = self.loc.table("family", None, nth)
        table = _table(value, where, "family")
        _check_keys(table, _FAMILY, where)
        name = _text(table.get("name"), where, "name") or f"family #{nth + 1}"
        match = table.get("match", [])
        match = [match] if isinstance(match, str) else match
        if not isinstance(match, list) or not all(isinstance(g, str) for g in match):
            raise CodebookError(f"{where}: match must be a list of name patterns like [\"*\"]")
        digits = table.get("digits")
        if digits is not None and (isinstance(digits, bool) or not isinstance(digits, int)
                                   or digits < 1):
            raise CodebookError(f"{where}: digits must be a whole number >= 1, got {digits!r}")
        if "codes" not in table:
            raise CodebookError(f"{where}: a family needs a codes table")
        codes = self.codes(table["codes"], where, f"family '{name}'")
        return Family(name, tuple(match), digits, codes, where)

    def derived(self, name: str, value: Any) -> DerivedSpec:
        """Parse one ``[derived.NAME]`` table (the expression is checked for syntax here)."""
        where = self.loc.table("derived", name)
        table = _table(value, where, name)
        _check_keys(table, _DERIVED, where)
        text = table.get("expr")
        if not isinstance(text, str):
            raise CodebookError(f"{where}: a derived variable needs expr = \"...\" (text)")
        return DerivedSpec(name, parse_expression(text, None, where),
                           _text(table.get("label"), where, "label"),
                           self.kind(table.get("kind"), where),
                           self.labels(table.get("labels"), where))


def _topological(derived: Mapping[str, DerivedSpec], source: str) -> list[str]:
    """Order derived variables so each comes after the derived variables it reads."""
    order: list[str] = []
    state: dict[str, int] = {}

    def visit(name: str, path: tuple[str, ...]) -> None:
        if state.get(name) == 2:
            return
        if state.get(name) == 1:
            cycle = " -> ".join([*path[path.index(name):], name])
            raise CodebookError(f"{source}: derived variables form a cycle: {cycle}; "
                                "break it by computing one of them from raw variables")
        state[name] = 1
        for dep in sorted(derived[name].expression.inputs & set(derived)):
            visit(dep, (*path, name))
        state[name] = 2
        order.append(name)

    for name in derived:
        visit(name, ())
    return order
