"""Decoding: raw coded columns + a codebook -> values with one missing reason per row.

Order per variable (each step only sees rows no earlier step decided):
1. file tags (``.a``/``.A`` special missing values) -> the codebook's tag code, else ``tag_a``;
2. codes: the file's own user-missing declarations, then the codebook's codes on top (a
   variable's own codes override its families' codes for the same raw code); a reason name
   makes the row non-valid, a number substitutes the value (``888 -> 0``) and the row is valid;
3. unit-prefixed conversion of the remaining values (unknown leading digit -> ``invalid``);
4. range check (after conversion; substitutes are exempt) -> ``invalid``;
5. blank / system missing -> the variable's ``blank`` (default ``[defaults] blank``).
Codes declared by the file become one reason each (``7`` and ``9`` never merge), named after
their value label when it clearly says don't know / refused / not asked / missing.
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.columns import Dataset, DecodedColumn, row_tiles
from wstats.decoding.declared_codes import declared_codes, declared_reason, tag_reason
from wstats.decoding.decode_tiles import Decoded, NumberPlan, run_plan
from wstats.decoding.reasons import VALID, Reasons
from wstats.errors import CodebookError, ExpressionError, did_you_mean

if TYPE_CHECKING:
    from collections.abc import Collection

    from wstats.decoding.codebook_records import CodebookRules as Codebook
    from wstats.decoding.codebook_records import CodeMap, Rule, VariableSpec
    from wstats.decoding.expressions import Expression
    from wstats.readers.raw import RawColumn, RawTable

__all__ = [
    "ColumnResult",
    "add_derived",
    "decode_column",
    "decode_table",
    "new_vocabulary",
    "unknown_input",
]

@dataclass(frozen=True)
class ColumnResult:
    """A decoded column plus which rows a rule (code, tag, declaration, blank) explained."""

    column: DecodedColumn
    ruled: np.ndarray | None  # None when not asked for


@dataclass
class _TextWork:
    """Per-column state while a text column's rules run."""

    values: np.ndarray
    reasons: np.ndarray
    ruled: np.ndarray
    vocab: Reasons


_THREADS = 2  # columns decoded at once


def _digits(x: np.ndarray, lo: float, hi: float) -> int | None:
    """Count the digits of the largest absolute finite code (None when there is none).

    *lo* and *hi* are the column's least and greatest codes, NaN skipped (NaN: all blank).
    Infinite codes (rare) send the search through row tiles.
    """
    if np.isnan(hi):
        return None
    big = max(abs(hi), abs(lo))
    if not np.isfinite(big):
        big = 0.0
        for rows in row_tiles(len(x)):  # loop over row tiles, not rows
            part = np.abs(x[rows])
            part = part[np.isfinite(part)]
            big = max(big, float(part.max())) if len(part) else big
    return len(str(int(big))) if big >= 1 else 1


def _numeric(col: RawColumn, cb: Codebook, spec: VariableSpec | None, vocab: Reasons,
             pre: list[tuple[np.ndarray, Rule]], inplace: bool = False, ruled: bool = True
             ) -> tuple[Decoded, set[float]]:
    """Run the five decoding steps on a numeric column; return it and the coded codes."""
    x = np.asarray(col.data, dtype=np.float64)
    # least and greatest codes, NaN skipped (fmin/fmax make no temporary)
    least, most = ((float(np.fmin.reduce(x)), float(np.fmax.reduce(x))) if len(x)
                   else (np.nan, np.nan))
    digits = (_digits(x, least, most) if any(f.digits is not None for f in cb.families)
              else None)
    codes = cb.codes_for(col.name, digits)
    tags = None if col.tags is None else np.asarray(col.tags)
    tag_rules = []
    if tags is not None:
        seen = np.zeros(256, dtype=np.int64)
        for rows in row_tiles(len(tags)):  # row tiles: no mask as long as the column
            seen += np.bincount(tags[rows], minlength=256)
        for byte in (np.flatnonzero(seen[1:]) + 1).tolist():  # in byte order, as met
            letter = chr(byte).lower()
            tag_rules.append((byte, codes.tags.get(letter) or _reason_rule(tag_reason(letter))))
    singles, ranges = declared_codes(col)
    table = {**singles, **codes.numeric}
    blank = (spec.blank if spec and spec.blank else None) or cb.blank
    plan = NumberPlan(pre, tags, tag_rules, table, ranges,
                      spec.unit_prefixed if spec is not None else None,
                      spec.range if spec is not None else None, blank)
    # infinite codes keep a copy of the raw codes: the weight check reports them from there
    own = (inplace and x is col.data and bool(x.flags.writeable)
           and least != -np.inf and most != np.inf)
    decoded = run_plan(col.name, x, plan, vocab, own, ruled)
    coded = set(table) | {k for k in _label_keys(col) if any(lo <= k <= hi for lo, hi, _ in
                                                             ranges)}
    return decoded, coded


def _reason_rule(name: str) -> Rule:
    """Build a reason rule for a file-declared code."""
    from wstats.decoding.codebook_records import Rule

    return Rule(name, None, "file")


def _label_keys(col: RawColumn) -> list[float]:
    """Return the numeric codes that carry a file value label."""
    return [float(k) for k in col.value_labels if not isinstance(k, str)]


def _text(col: RawColumn, codes: CodeMap, blank: Rule, vocab: Reasons) -> _TextWork:
    """Decode a character column: declared/codebook text codes, then blanks."""
    import pandas as pd

    s = pd.Series(np.asarray(col.data, dtype=object), dtype=object)
    empty = np.asarray(s.isna(), dtype=bool)
    text = s.where(~empty, "").astype(str).str.strip()
    work = _TextWork(np.asarray(text, dtype=object), np.zeros(len(s), dtype=np.int8),
                     np.zeros(len(s), dtype=bool), vocab)
    labels = {k: v for k, v in col.value_labels.items() if isinstance(k, str)}
    table = {str(k): _reason_rule(declared_reason(str(k), labels.get(str(k))))
             for k in col.user_missing if isinstance(k, str)}
    table.update(codes.text)
    for key, rule in table.items():
        _apply_text(work, rule, np.asarray(text == key, dtype=bool) & ~work.ruled)
    blank_rows = np.asarray(text == "", dtype=bool) & ~work.ruled
    _apply_text(work, blank, blank_rows)
    work.values[work.reasons != VALID] = None
    return work


def _apply_text(work: _TextWork, rule: Rule, mask: np.ndarray) -> None:
    """Give text rows the meaning of *rule* (a substitute is written as text)."""
    if rule.reason is not None:
        work.reasons[mask] = work.vocab.add(rule.reason)
    else:
        work.reasons[mask] = VALID
        work.values[mask] = f"{rule.value:g}"
    work.ruled |= mask


def _kind(spec_kind: str | None, numeric: bool, labels: dict[float, str]) -> str:
    """Choose the kind: the codebook's, else text / categorical / binary / continuous."""
    if spec_kind is not None:
        return spec_kind
    if not numeric:
        return "text"
    if labels:
        return "binary" if len(labels) == 2 else "categorical"
    return "continuous"


def _wants_number(spec: VariableSpec | None) -> bool:
    """Tell whether the codebook treats a variable as numeric."""
    return spec is not None and (spec.unit_prefixed is not None or spec.range is not None
                                 or spec.kind not in (None, "text"))


def _text_categories(spec: VariableSpec) -> bool:
    """Tell whether a text column may keep its text as categories (e.g. 'north', 'south')."""
    return (spec.kind in ("categorical", "binary") and spec.range is None
            and spec.unit_prefixed is None)


def _as_numeric(col: RawColumn, spec: VariableSpec, codes: CodeMap,
                vocab: Reasons) -> tuple[RawColumn, list[tuple[np.ndarray, Rule]]]:
    """Read a text column (e.g. CSV with 'NA' cells) as numbers once its text codes are set.

    Returns the numeric column and the text-code rules to apply first, as (rows, rule).
    """
    import dataclasses

    import pandas as pd

    text = pd.Series(np.asarray(col.data, dtype=object)).fillna("").astype(str).str.strip()
    number = np.asarray(pd.to_numeric(text.where(text != ""), errors="coerce"), dtype=np.float64)
    pre = [(np.asarray(text == key, dtype=bool), rule) for key, rule in codes.text.items()
           if not np.isfinite(number[np.asarray(text == key, dtype=bool)]).all()]
    taken = np.logical_or.reduce([m for m, _ in pre]) if pre else np.zeros(len(text), bool)
    bad = np.asarray(text != "", dtype=bool) & np.isnan(number) & ~taken
    if bad.any():
        first = str(text[bad].iloc[0])
        raise CodebookError(
            f"{spec.where}: {col.name} is treated as numeric (kind, range or unit_prefixed) "
            f"but holds text such as {first!r} in {int(bad.sum())} rows; give that text a "
            f"meaning under codes (e.g. \"{first}\" = \"missing\") if it is not an answer, or "
            "use kind = \"categorical\" to keep text answers as categories")
    return dataclasses.replace(col, data=number, numeric=True, tags=None), pre


def _refuse_text_kind(col: RawColumn, spec: VariableSpec | None) -> None:
    """Refuse kind 'text' on a numeric column."""
    if spec is not None and spec.kind == "text" and col.numeric:
        raise CodebookError(f"{spec.where}: kind 'text' given but {col.name} is numeric in the "
                            "file; use continuous, count, categorical or binary")


def decode_column(col: RawColumn, cb: Codebook, vocab: Reasons,
                  inplace: bool = False, ruled: bool = True) -> ColumnResult:
    """Decode one raw column with the codebook's rules for it.

    With *inplace* a numeric column's values are written into its raw array (the caller
    owns the RawTable and drops it); the column's ``raw`` is then None when a value changed.
    *ruled* False: the result's ``ruled`` is None (no mask as long as the column is made).
    """
    spec = cb.variables.get(col.name)
    _refuse_text_kind(col, spec)
    pre: list[tuple[np.ndarray, Rule]] = []
    if not col.numeric and spec is not None and _wants_number(spec):
        try:
            col, pre = _as_numeric(col, spec, cb.codes_for(col.name, None), vocab)
        except CodebookError:
            if not _text_categories(spec):
                raise
    label = spec.label if spec is not None and spec.label else col.label
    if col.numeric:
        number, coded = _numeric(col, cb, spec, vocab, pre, inplace, ruled)
        labels = {} if spec and spec.unit_prefixed else {
            float(k): v for k, v in col.value_labels.items() if not isinstance(k, str)}
        if spec is not None and spec.labels is not None:
            labels = spec.labels
        labels = {k: v for k, v in labels.items() if k not in coded}
        kind = _kind(spec.kind if spec else None, True, labels)
        raw = None if number.changed and number.values is col.data else np.asarray(col.data)
        column = DecodedColumn.of_codes(col.name, number.values, number.missing_codes, vocab,
                                        label, kind, dict(labels), raw)
        return ColumnResult(column, number.ruled)
    blank = (spec.blank if spec and spec.blank else None) or cb.blank
    work = _text(col, cb.codes_for(col.name, None), blank, vocab)
    kind = _kind(spec.kind if spec else None, False, {})
    column = DecodedColumn(col.name, work.values, work.reasons, vocab, label, kind, {},
                           np.asarray(col.data))
    return ColumnResult(column, work.ruled if ruled else None)


def add_derived(cols: dict[str, DecodedColumn], raw: RawTable, cb: Codebook,
                 vocab: Reasons, spare: frozenset[str] = frozenset()) -> None:
    """Evaluate derived variables whose inputs were read, in dependency order.

    *spare* names columns of *cols* the caller will not use: a derived variable writes its
    values into the memory of one of its spare number inputs that no later derived variable
    reads (that input leaves *cols*), so making it costs no array as long as the file.
    """
    specs = list(cb.derived.items())
    for at, (name, spec) in enumerate(specs):
        expr = spec.expression
        if name in raw.file_columns:
            raise CodebookError(f"{expr.where}: derived variable {name} has the name of a "
                                f"column of {raw.path}; rename the derived variable")
        absent = sorted(expr.inputs - set(cols))
        unknown = [a for a in absent if a not in raw.file_columns and a not in cb.derived]
        if unknown:
            raise unknown_input(expr, unknown[0], raw.path, [*raw.file_columns, *cb.derived])
        if absent:
            continue  # an input was not read: the caller did not ask for this variable
        kind = spec.kind or ("binary" if expr.boolean else "continuous")
        later = {i for _, s in specs[at + 1:] for i in s.expression.inputs}
        donor = next((i for i in sorted(expr.inputs & spare - later) if _writable(cols[i])), None)
        out = None if donor is None else cols[donor].values
        values, codes = _evaluate_in_tiles(expr, cols, vocab, raw.n_rows, kind, out)
        if donor is not None:
            del cols[donor]  # its memory now holds the derived values
        cols[name] = DecodedColumn.of_codes(name, values, codes, vocab, spec.label, kind,
                                            dict(spec.labels or {}))


def _writable(col: DecodedColumn) -> bool:
    """Tell whether *col*'s values may take a derived variable's (float64, writable)."""
    return bool(col.values.dtype == np.float64 and col.values.flags.writeable)


def _evaluate_in_tiles(expr: Expression, cols: dict[str, DecodedColumn], vocab: Reasons,
                       n_rows: int, kind: str, out: np.ndarray | None = None
                       ) -> tuple[np.ndarray, np.ndarray]:
    """Evaluate a derived variable tile by tile; return its values and not-valid codes.

    Every operation of the language is per row, so the intermediate arrays are the size of a
    tile, not of the file. The values go into *out* when given (an input's memory: each tile
    of it is read before it is written). Each tile is checked as a column.
    """
    names = sorted(expr.inputs)
    if not names:
        values, reasons = expr.evaluate(cols, vocab, n_rows)
        return values, DecodedColumn(expr.text, values, reasons, vocab, kind=kind).missing_codes
    values = np.empty(n_rows) if out is None else out
    codes: list[np.ndarray] = []
    for parts in zip(*(cols[i].tiles() for i in names), strict=True):  # row tiles, not rows
        tile = parts[0][0]
        part = {i: col for i, (_, col) in zip(names, parts, strict=True)}
        v, r = expr.evaluate(part, vocab, tile.stop - tile.start)
        codes.append(DecodedColumn(expr.text, v, r, vocab, kind=kind).missing_codes)
        values[tile] = v
        del v, r  # let the tile's arrays go before the next tile's are made
    return values, np.concatenate(codes) if codes else np.zeros(0, np.int8)


def unknown_input(expr: Expression, name: str, path: str,
                  choices: list[str]) -> ExpressionError:
    """Build the error for a derived expression reading a variable that does not exist."""
    return ExpressionError(f"{expr.where}: expression '{expr.text}' reads '{name}', which is "
                           f"neither a column of {path} nor a derived variable"
                           f"{did_you_mean(name, choices)}")


def _adopt(col: DecodedColumn, vocab: Reasons) -> DecodedColumn:
    """Return *col* on the shared vocabulary, registering its new reasons there in order."""
    codes = np.array([vocab.add(name) for name in col.vocabulary.names], dtype=np.int8)
    if np.array_equal(codes, np.arange(len(codes))):  # same codes: only the vocabulary changes
        return col.replace(vocabulary=vocab)
    return col.replace(missing_codes=codes[col.missing_codes], vocabulary=vocab)


def new_vocabulary(cb: Codebook) -> Reasons:
    """Start the dataset's vocabulary with the codebook's reasons in declaration order."""
    return Reasons(list(cb.reasons))


def decode_table(raw: RawTable, cb: Codebook, consume: bool = False,
                 keep: Collection[str] | None = None) -> Dataset:
    """Decode every column of *raw*, then the derived variables (see module docstring).

    With *consume* the caller gives up *raw*: numeric columns are decoded in place, so the
    dataset needs little memory beyond the raw columns (their ``raw`` codes are then not kept).
    *keep* (with *consume*) names the variables the caller wants: another column, read only as
    a derived variable's input, may lend the derived variable its memory and be left out.
    """
    vocab = new_vocabulary(cb)
    names = list(raw.columns)

    def one(name: str) -> DecodedColumn:  # on its own vocabulary: threads do not share one
        return decode_column(raw.columns[name], cb, Reasons(list(vocab.extra)), consume,
                             ruled=False).column

    threads = min(_THREADS, os.cpu_count() or 1, len(names))
    if threads > 1:
        with ThreadPoolExecutor(threads) as pool:  # numpy releases the GIL on whole columns
            decoded = list(pool.map(one, names))  # in order: the first failing column raises
    else:
        decoded = [one(name) for name in names]
    # reasons met while decoding join the shared vocabulary in column order, as if decoded
    # one after another (the order matters: it ranks the extra reasons' precedence)
    cols = {name: _adopt(col, vocab) for name, col in zip(names, decoded, strict=True)}
    spare = frozenset(cols) - frozenset(keep) if consume and keep is not None else frozenset()
    add_derived(cols, raw, cb, vocab, spare)
    meta: dict[str, Any] = {"format": raw.format, "reader": raw.reader,
                            "file_label": raw.file_label, "codebook": cb.source,
                            "file_columns": list(raw.file_columns),
                            "population": cb.population,
                            "described": sorted(n for n in raw.columns if n in cb.variables)}
    return Dataset(cols, vocab, raw.n_rows, raw.path, meta)
