"""Draft a codebook from a file's metadata, and check a codebook against a file.

Suspected special codes (written only as commented suggestions): a candidate code
``7 8 9 77 88 99 777 888 999 7777 8888 9999`` present in a numeric column is suspected when

1. it lies above the 99th percentile of the column's ordinary values (values that are not
   candidates), i.e. at the top of the range, and
2. either a gap separates it from the values below it (no value in the column lies in
   [code - 1, code)), or its count is more than ``SPIKE`` (3) times the average count of the
   five integers just below it (absent integers count 0; other candidates are left out): a
   frequency spike.

7/77/... are suggested as ``dont_know``, 9/99/... as ``refused``, 8/88/... as the value 0
("none") -- common practice in telephone health-survey codebooks, no single source. A column
whose ordinary values are mostly (>= 90 %) in 101-199, 201-299, 301-399, 401-499, using at least
two of these blocks, is suggested as unit-prefixed.
"""

from __future__ import annotations

import json
import re
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.codebook import Codebook
from wstats.decoding.declared_codes import declared_codes, tag_reason
from wstats.decoding.decode import add_derived, decode_column, new_vocabulary
from wstats.decoding.reasons import CORE_REASONS, INVALID
from wstats.errors import CodebookError, did_you_mean

if TYPE_CHECKING:
    import pandas as pd

    from wstats.decoding.columns import DecodedColumn
    from wstats.readers.raw import RawColumn, RawTable

__all__ = ["CANDIDATES", "SPIKE", "CodebookCheck", "check_codebook", "draft_codebook",
           "suspected_codes"]

CANDIDATES = (7.0, 8.0, 9.0, 77.0, 88.0, 99.0, 777.0, 888.0, 999.0, 7777.0, 8888.0, 9999.0)
SPIKE = 3.0
_MEANING = {"7": '"dont_know"', "8": "0", "9": '"refused"'}
_BARE = re.compile(r"^[A-Za-z0-9_]+$")


def _q(text: str) -> str:
    """Quote *text* as a TOML basic string (JSON escapes are valid TOML escapes)."""
    return json.dumps(text, ensure_ascii=False).replace("\x7f", "\\u007f")


def _key(name: str) -> str:
    """Write a TOML key, bare when possible."""
    return name if _BARE.match(name) else _q(name)


def _code(value: float) -> str:
    """Write a numeric code as a TOML key: bare digits, otherwise quoted."""
    text = str(int(value)) if float(value).is_integer() else repr(float(value))
    return text if text.isdigit() else _q(text)


def suspected_codes(x: np.ndarray) -> list[tuple[float, int]]:
    """Return (code, count) of suspected special codes in a numeric column (module docstring)."""
    values, counts = np.unique(x[np.isfinite(x)], return_counts=True)
    ordinary = ~np.isin(values, CANDIDATES)
    cum = np.cumsum(counts[ordinary])
    # the 99th percentile of the ordinary values (lower value, no interpolation), from counts
    top = (float(values[ordinary][np.searchsorted(cum, 0.99 * (cum[-1] - 1) + 1)])
           if len(cum) else -np.inf)
    count_of = dict(zip(values.tolist(), counts.tolist(), strict=True))
    found = []
    for code in CANDIDATES:
        k = count_of.get(code, 0)
        if k == 0 or code <= top:
            continue
        below = [count_of.get(code - i, 0) for i in range(1, 6) if code - i not in CANDIDATES]
        spike = k > SPIKE * (sum(below) / len(below) if below else 0.0)
        below_code = values[values < code]
        gap = not len(below_code) or below_code.max() < code - 1
        if gap or spike:
            found.append((code, int(k)))
    return found


def _unit_prefixed_share(x: np.ndarray) -> float:
    """Share of ordinary integer values that look like 1xx-4xx, 0 when fewer than two blocks."""
    values, counts = np.unique(x[np.isfinite(x)], return_counts=True)
    keep = ~np.isin(values, CANDIDATES)
    values, counts = values[keep], counts[keep]
    if counts.sum() < 5:
        return 0.0
    block = np.floor(values / 100)
    inside = (values == np.floor(values)) & (values - 100 * block >= 1) & (block >= 1) & \
        (block <= 4)
    used = len(np.unique(block[inside]))
    return float(counts[inside].sum() / counts.sum()) if used >= 2 else 0.0


def _code_lines(col: RawColumn, reasons: dict[str, str],
                suspects: list[tuple[float, int]]) -> list[str]:
    """Write the codes table lines: file declarations, tags, then commented suspicions."""
    lines: list[str] = []
    singles, ranges = declared_codes(col)
    for code, rule in sorted(singles.items()):
        name = str(rule.reason)
        reasons.setdefault(name, f"Declared missing in the file (code {code:g})")
        label = col.value_labels.get(code)
        note = f"  # declared missing in the file, label {_q(label)}" if label else \
            "  # declared missing in the file"
        lines.append(f"{_code(code)} = {_q(name)}{note}")
    for low, high, _rule in ranges:
        lines.append(f"# the file declares codes {low:g} to {high:g} missing (kept as a range)")
    if col.tags is not None:
        tags, counts = np.unique(col.tags[col.tags != 0], return_counts=True)
        for t, k in zip(tags.tolist(), counts.tolist(), strict=True):
            letter = chr(int(t))
            name = tag_reason(letter)
            reasons.setdefault(name, f"Special missing value .{letter} in the file")
            lines.append(f"{_q('.' + letter)} = {_q(name)}  # tagged missing in the file, "
                         f"{k} rows")
    for code, k in suspects:
        if code in singles:
            continue
        meaning = _MEANING[str(int(code))[0]]
        what = "'none' code (a valid 0)" if meaning == "0" else "special code"
        lines.append(f"# {_code(code)} = {meaning}   # suspected {what}: {k} rows at the top "
                     "of the range")
    return lines


def _variable_block(col: RawColumn, decoded: DecodedColumn, reasons: dict[str, str]) -> str:
    """Write the ``[variables.NAME]`` block of one column."""
    head = f"variables.{_key(col.name)}"
    out = [f"[{head}]"]
    if decoded.label:
        out.append(f"label = {_q(decoded.label)}")
    x = np.asarray(col.data, dtype=np.float64) if col.numeric else None
    suspects = suspected_codes(x) if x is not None else []
    kind = decoded.kind
    if x is not None and decoded.value_labels:
        kept = [k for k in decoded.value_labels if k not in {c for c, _ in suspects}]
        kind = "binary" if len(kept) == 2 else "categorical" if kept else "continuous"
    out.append(f"kind = {_q(kind)}")
    if x is not None:
        ordinary = np.where(decoded.valid & ~np.isin(x, [c for c, _ in suspects]), x, np.nan)
        if not np.isnan(ordinary).all():
            out.append(f"# range = [{np.nanmin(ordinary):g}, {np.nanmax(ordinary):g}]   # "
                       "observed range of the ordinary values")
    blanks = int(np.sum(decoded.reasons == decoded.vocabulary["skipped"]))
    if blanks:
        out.append(f'# blank = "skipped"   # {blanks} blank rows; the default meaning')
    codes = _code_lines(col, reasons, suspects)
    if codes:
        out += ["", f"[{head}.codes]", *codes]
    if decoded.value_labels:
        out += ["", f"[{head}.labels]"]
        out += [f"{_code(k)} = {_q(v)}" for k, v in sorted(decoded.value_labels.items())]
    share = round(100 * _unit_prefixed_share(x)) if x is not None else 0
    if share >= 90:
        out += ["", f"# [{head}.unit_prefixed]   # suspected: {share}% of values look like "
                "1xx/2xx/3xx/4xx", '# to = "year"   # 1xx per day, 2xx per week, 3xx per month, '
                "4xx per year"]
    return "\n".join(out)


def draft_codebook(raw: RawTable) -> str:
    """Write a starting codebook (TOML text) from a file's own metadata.

    Parameters
    ----------
    raw : the columns read from the file.

    Returns
    -------
    str
        TOML that :func:`~wstats.decoding.codebook.load_codebook` accepts; suggestions that need a
        human decision are comments.

    Examples
    --------
    >>> import numpy as np
    >>> from wstats.readers.raw import RawColumn, RawTable
    >>> raw = RawTable("s.csv", "csv", "test", 3, {"X": RawColumn("X", np.ones(3))}, ["X"])
    >>> "[variables.X]" in draft_codebook(raw)
    True
    """
    vocab = new_vocabulary(Codebook())
    reasons: dict[str, str] = {}
    blocks = []
    for col in raw.columns.values():
        decoded = decode_column(col, Codebook(), vocab).column
        blocks.append(_variable_block(col, decoded, reasons))
    head = [f"# Codebook drafted by wstats from {raw.path} ({raw.format}, {raw.n_rows} rows, "
            f"{len(raw.columns)} columns).",
            "# Review every entry; remove the '#' in front of a suggestion to accept it.",
            "# The schema is described in docs/codebook.md.", "", "[survey]",
            f"name = {_q(raw.file_label or raw.path.rsplit('/', 1)[-1])}", "", "[defaults]",
            'blank = "skipped"']
    extra = {k: v for k, v in reasons.items() if k not in CORE_REASONS}
    if extra:
        head += ["", "[reasons]", *(f"{_key(k)} = {_q(v)}" for k, v in extra.items())]
    return "\n".join([*head, "", *("\n".join([b, ""]) for b in blocks)])


@dataclass(frozen=True)
class CodebookCheck:
    """What a codebook does to a file.

    Attributes
    ----------
    frame : rows explained by a rule, tidy: ``variable``, ``raw_code`` (text: ``777``, ``-9``,
        ``.a`` for a tag, ``blank``), ``reason`` (``valid`` for a substitute such as
        ``888 -> 0``), ``value`` (what a substitute became; NaN otherwise), ``count`` (rows).
    unexplained : ``variable``, ``code``, ``count`` of values no rule explains that became
        ``invalid`` (outside the range, or a bad unit prefix).
    absent : (variable, closest file column or None) for codebook variables not in the file.
    problems : one-line messages of rules that cannot be applied (conflicts, expressions).
    ok : False when variables are absent or problems were found.
    """

    frame: pd.DataFrame
    unexplained: pd.DataFrame
    absent: tuple[tuple[str, str | None], ...]
    problems: tuple[str, ...]
    ok: bool


def _explained(name: str, col: RawColumn, dec: DecodedColumn,
               ruled: np.ndarray) -> list[tuple[str, str, str, int]]:
    """Count rows explained by a rule by (raw code, reason), vectorised."""
    names = dec.vocabulary.names
    out: list[tuple[str, str, str, int]] = []
    if not col.numeric:
        import pandas as pd

        series = pd.Series(np.asarray(col.data, dtype=object)).fillna("")
        text = np.asarray(series.astype(str).str.strip(), dtype=str)
        for r in np.unique(dec.reasons[ruled]):
            codes, counts = np.unique(text[ruled & (dec.reasons == r)], return_counts=True)
            out += [(name, str(c) or "blank", names[int(r)], int(k))
                    for c, k in zip(codes, counts, strict=True)]
        return out
    x = np.asarray(col.data, dtype=np.float64)
    tags = np.zeros(len(x), np.uint8) if col.tags is None else np.asarray(col.tags, np.uint8)
    gap = np.isnan(x)
    # one small np.unique per reason present (a handful), never a sort of (code, reason) pairs
    for r in np.flatnonzero(np.bincount(dec.reasons[ruled], minlength=len(names))):
        rows = ruled & (dec.reasons == r)
        codes, counts = np.unique(x[rows & ~gap], return_counts=True)
        out += [(name, f"{c:g}", names[r], int(k)) for c, k in zip(codes, counts, strict=True)]
        by_tag = np.bincount(tags[rows & gap], minlength=256)
        out += [(name, f".{chr(t)}" if t else "blank", names[r], int(by_tag[t]))
                for t in np.flatnonzero(by_tag)]
    return sorted(out, key=_code_order)


def _substitutes(frame: Any, cols: dict[str, DecodedColumn], raw: RawTable) -> list[float]:
    """Return, per explained row, the value a substitute code became (NaN for reasons)."""
    out = []
    for name, code, reason in zip(frame["variable"], frame["raw_code"], frame["reason"],
                                  strict=True):
        col, dec = raw.columns[name], cols.get(name)
        if reason != "valid" or dec is None or not col.numeric or code in ("blank",) \
                or code.startswith("."):
            out.append(float("nan"))
            continue
        hit = np.asarray(col.data, np.float64) == float(code)
        out.append(float(dec.values[np.argmax(hit)]) if hit.any() else float("nan"))
    return out


def _code_order(row: tuple[str, str, str, int]) -> tuple[int, float, str]:
    """Sort numeric codes by value, then tags, then blanks."""
    code = row[1]
    if code == "blank":
        return (2, 0.0, row[2])
    if code.startswith("."):
        return (1, float(ord(code[1])), row[2])
    return (0, float(code), row[2])


def _absent(raw: RawTable, cb: Codebook) -> tuple[tuple[str, str | None], ...]:
    """List codebook variables that the file lacks, with the closest file column."""
    out = []
    for name in cb.variables:
        if name not in raw.file_columns:
            hint = re.search(r"'(.+)'", did_you_mean(name, raw.file_columns))
            out.append((name, hint.group(1) if hint else None))
    return tuple(out)


def _design_problems(raw: RawTable, cb: Codebook) -> list[str]:
    """List ``[design]`` columns (weight, strata, PSU, FPC, replicates) the file lacks."""
    design = dict(cb.design or {})
    out = []
    for key in ("weight", "strata", "psu", "fpc"):
        name = design.get(key)
        if name and name not in raw.file_columns:
            out.append(f"[design] {key} = '{name}' is not a column of {raw.path}"
                       f"{did_you_mean(str(name), raw.file_columns)}")
    reps = design.get("replicates")
    if isinstance(reps, str):
        import fnmatch

        if not any(fnmatch.fnmatchcase(c, reps) for c in raw.file_columns):
            out.append(f"[design] replicates = '{reps}' matches no column of {raw.path}")
    elif reps:
        out += [f"[design] replicates: '{name}' is not a column of {raw.path}"
                f"{did_you_mean(str(name), raw.file_columns)}"
                for name in reps if name not in raw.file_columns]
    return out


def check_codebook(raw: RawTable, codebook: Codebook) -> CodebookCheck:
    """Apply a codebook to a file and report what each rule matched.

    Parameters
    ----------
    raw : the columns read from the file (read every column the codebook names).
    codebook : the codebook to check.

    Returns
    -------
    CodebookCheck
    """
    import pandas as pd

    vocab = new_vocabulary(codebook)
    explained: list[tuple[str, str, str, int]] = []
    odd: list[tuple[str, float, int]] = []
    problems: list[str] = []
    cols: dict[str, DecodedColumn] = {}
    for name, col in raw.columns.items():
        try:
            res = decode_column(col, codebook, vocab)
        except CodebookError as exc:
            problems.append(str(exc))
            continue
        cols[name], ruled = res.column, res.ruled
        assert ruled is not None  # asked for by default
        explained += _explained(name, col, res.column, ruled)
        bad = (res.column.reasons == INVALID) & ~ruled
        if bad.any() and col.numeric:
            codes, counts = np.unique(np.asarray(col.data, np.float64)[bad], return_counts=True)
            odd += [(name, float(c), int(k)) for c, k in zip(codes, counts, strict=True)]
    try:
        add_derived(cols, raw, codebook, vocab)
    except CodebookError as exc:
        problems.append(str(exc))
    problems += _design_problems(raw, codebook)
    absent = _absent(raw, codebook)
    frame = pd.DataFrame(explained, columns=["variable", "raw_code", "reason", "count"])
    frame.insert(3, "value", _substitutes(frame, cols, raw))
    return CodebookCheck(
        frame=frame,
        unexplained=pd.DataFrame(odd, columns=["variable", "code", "count"]),
        absent=absent, problems=tuple(problems), ok=not absent and not problems)
