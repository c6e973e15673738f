"""The pieces of a look (see :mod:`wstats.reports.look`): the code table and the summary."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from wstats.decoding.columns import DecodedColumn
from wstats.decoding.reasons import VALID
from wstats.readers.raw import RawColumn
from wstats.reports.look_types import CATEGORICAL, Bar, CodeRow, VariableLook

__all__ = ["code_rows", "summary"]


def code_rows(col: RawColumn, dec: DecodedColumn, ruled: np.ndarray, w: np.ndarray,
              max_codes: int) -> tuple[CodeRow, ...]:
    """Return one row per raw code (valid ordinary codes of a long list share one row).

    The choice is made on arrays of distinct codes, so a column of 400,000 distinct values
    costs one sort, not 400,000 rows.
    """
    if not col.numeric:
        return _text_rows(col, dec, ruled, w, max_codes)
    x = np.asarray(col.data, dtype=np.float64)
    nan = np.isnan(x)
    kept = np.flatnonzero(~nan)
    codes, first, inverse, counts = np.unique(x[kept], return_index=True, return_inverse=True,
                                              return_counts=True)
    weighted = np.bincount(inverse, weights=w[kept], minlength=len(codes))
    at = kept[first]
    facts = _CodeFacts(codes, counts, weighted, dec.reasons[at], dec.values[at], ruled[at])
    labels = {**{k: v for k, v in col.value_labels.items() if not isinstance(k, str)},
              **dec.value_labels}
    plain = ((facts.reasons == VALID) & ~facts.ruled
             & ~np.isin(codes, np.array(list(labels), dtype=np.float64)))
    merge = len(codes) > max_codes and int(plain.sum()) >= 2
    listed = np.flatnonzero(~plain) if merge else np.arange(len(codes))
    out = [_code_row(facts, i, labels, dec) for i in listed.tolist()]  # distinct codes only
    if merge:
        out = _with_span(out, facts, np.flatnonzero(plain), dec.kind not in CATEGORICAL)
    return (*out, *_gap_rows(col, dec, ruled, w, nan))


@dataclass(frozen=True)
class _CodeFacts:
    """Per distinct code: the code, rows, weight, and what its first row became."""

    codes: np.ndarray
    counts: np.ndarray
    weighted: np.ndarray
    reasons: np.ndarray
    values: np.ndarray
    ruled: np.ndarray


def _code_row(f: _CodeFacts, i: int, labels: dict[float, str], dec: DecodedColumn) -> CodeRow:
    """Build the row of the *i*-th distinct code."""
    code = float(f.codes[i])
    label = labels.get(code)
    reason = dec.vocabulary.names[int(f.reasons[i])]
    explained = bool(f.ruled[i]) or label is not None or (
        reason == "valid" and dec.kind not in CATEGORICAL)
    return CodeRow(f"{code:g}", int(f.counts[i]), float(f.weighted[i]), label, reason,
                   float(f.values[i]), explained, bool(f.ruled[i]))


def _with_span(rows: list[CodeRow], f: _CodeFacts, merged: np.ndarray,
               explained: bool) -> list[CodeRow]:
    """Insert one ``low..high`` row for the *merged* codes, in code order.

    Values made by a conversion (a unit prefix) share the row too: no rule names them.
    """
    low, high = float(f.codes[merged[0]]), float(f.codes[merged[-1]])
    span = CodeRow(f"{low:g}..{high:g}", int(f.counts[merged].sum()),
                   float(f.weighted[merged].sum()), None, "valid", float("nan"), explained,
                   False, len(merged))
    at = next((i for i, r in enumerate(rows) if float(r.code) > low), len(rows))
    return [*rows[:at], span, *rows[at:]]


def _gap_rows(col: RawColumn, dec: DecodedColumn, ruled: np.ndarray, w: np.ndarray,
              nan: np.ndarray) -> list[CodeRow]:
    """Return the rows of tagged missing values (by letter) and of blanks."""
    gaps = np.flatnonzero(nan)
    tags = (np.zeros(len(gaps), np.uint8) if col.tags is None
            else np.asarray(col.tags, np.uint8)[gaps])
    counts = np.bincount(tags, minlength=256)
    weighted = np.bincount(tags, weights=w[gaps], minlength=256)
    names = dec.vocabulary.names
    reasons = dec.reasons
    out = []
    for t in [*(np.flatnonzero(counts[1:]) + 1).tolist(), *([0] if counts[0] else [])]:
        at = int(gaps[np.argmax(tags == t)])
        code = "blank" if t == 0 else f".{chr(t)}"
        label = col.value_labels.get(chr(t)) if t else None
        out.append(CodeRow(code, int(counts[t]), float(weighted[t]), label,
                           names[int(reasons[at])], float("nan"), bool(ruled[at]),
                           bool(ruled[at])))
    return out


def _text_rows(col: RawColumn, dec: DecodedColumn, ruled: np.ndarray,
               w: np.ndarray, max_codes: int) -> tuple[CodeRow, ...]:
    """Return one row per distinct text (blank last); valid unlabelled texts of a long list
    share one row."""
    import pandas as pd

    text = pd.Series(np.asarray(col.data, dtype=object)).fillna("").astype(str)
    codes, first, inverse, counts = np.unique(np.asarray(text, dtype=str), return_index=True,
                                              return_inverse=True, return_counts=True)
    weighted = np.bincount(inverse, weights=w, minlength=len(codes))
    reasons, rule = dec.reasons[first], ruled[first]
    labelled = np.isin(codes, [k for k in col.value_labels if isinstance(k, str)])
    plain = (reasons == VALID) & ~rule & ~labelled & (np.char.strip(codes) != "")
    merge = len(codes) > max_codes and int(plain.sum()) >= 2
    out = []
    for i in (np.flatnonzero(~plain) if merge else range(len(codes))):  # distinct texts
        code = str(codes[i])
        label = col.value_labels.get(code)
        reason = dec.vocabulary.names[int(reasons[i])]
        explained = bool(rule[i]) or label is not None or reason == "valid"
        out.append(CodeRow(code.strip() or "blank", int(counts[i]), float(weighted[i]),
                           label, reason, float("nan"), explained, bool(rule[i])))
    if merge:
        out.append(CodeRow(f"{int(plain.sum()):,} other texts", int(counts[plain].sum()),
                           float(weighted[plain].sum()), None, "valid", float("nan"), True,
                           False, int(plain.sum())))
    return tuple(sorted(out, key=lambda r: r.code == "blank"))


def summary(col: RawColumn, dec: DecodedColumn, codes: tuple[CodeRow, ...], w: np.ndarray,
            bins: int) -> VariableLook:
    """Summarise the decoded column: valid n, means, quartiles, range, reasons, chart."""
    valid = dec.valid
    reasons = {k: v for k, v in dec.reason_counts().items() if k != "valid" and v}
    nan3 = (float("nan"),) * 3
    stats: tuple[float, float, tuple[float, float, float], float, float] = (
        float("nan"), float("nan"), nan3, float("nan"), float("nan"))
    chart = "none"
    bars: tuple[Bar, ...] = ()
    if dec.numeric:
        y, wv = dec.values[valid], w[valid]
        dist = _Distribution.of(y, wv)  # one sort serves the quartiles and the chart
        stats = _moments(y, wv, dist)
        chart, bars = (("frequency", _levels(dist, dec.value_labels))
                       if dec.kind in CATEGORICAL else ("histogram", _histogram(y, wv, dist,
                                                                               bins)))
    elif dec.kind in CATEGORICAL:
        chart, bars = "frequency", _text_levels(np.asarray(dec.values)[valid], w[valid])
    return VariableLook(dec.name, dec.label, dec.kind, "number" if col.numeric else "text",
                        codes, len(dec), int(valid.sum()), stats[0], stats[1], stats[2],
                        stats[3], stats[4], reasons, chart, bars)


@dataclass(frozen=True)
class _Distribution:
    """The distinct valid values with their rows and weights, in increasing order."""

    levels: np.ndarray
    counts: np.ndarray
    weighted: np.ndarray

    @classmethod
    def of(cls, y: np.ndarray, w: np.ndarray) -> _Distribution:
        """Sort *y* once and sum the weights per distinct value."""
        levels, inverse, counts = np.unique(y, return_inverse=True, return_counts=True)
        return cls(levels, counts, np.bincount(inverse, weights=w, minlength=len(levels)))

    def quantiles(self, probabilities: list[float]) -> tuple[float, ...]:
        """Return min{y : F(y) >= p} per p, F the weighted distribution function (cumulative
        weights compared with a relative tolerance of 1e-10, as the estimates do)."""
        cum = np.cumsum(self.weighted)
        at = np.searchsorted(cum, np.asarray(probabilities) * cum[-1] * (1 - 1e-10))
        return tuple(float(v) for v in self.levels[np.minimum(at, len(self.levels) - 1)])


def _moments(y: np.ndarray, w: np.ndarray, dist: _Distribution
             ) -> tuple[float, float, tuple[float, float, float], float, float]:
    """Return mean, weighted mean, weighted quartiles, min and max (NaN when empty)."""
    nan = float("nan")
    if not len(y):
        return nan, nan, (nan, nan, nan), nan, nan
    total = float(w.sum())
    if total > 0:
        wmean = float(np.dot(w, y) / total)
        q1, q2, q3 = dist.quantiles([0.25, 0.5, 0.75])
        quartiles = (q1, q2, q3)
    else:
        wmean, quartiles = nan, (nan, nan, nan)
    return float(y.mean()), wmean, quartiles, float(dist.levels[0]), float(dist.levels[-1])


def _levels(dist: _Distribution, labels: dict[float, str]) -> tuple[Bar, ...]:
    """Return a bar per valid level: its label (else its code) and weighted share."""
    total = float(dist.weighted.sum()) or float("nan")
    return tuple(Bar(labels.get(v) or f"{v:g}", v, v, float(s / total), int(k))
                 for v, s, k in zip(dist.levels.tolist(), dist.weighted.tolist(),
                                    dist.counts.tolist(), strict=True))


def _text_levels(text: np.ndarray, w: np.ndarray) -> tuple[Bar, ...]:
    """Return a bar per valid text level."""
    levels, inverse, counts = np.unique(text.astype(str), return_inverse=True,
                                        return_counts=True)
    weighted = np.bincount(inverse, weights=w, minlength=len(levels))
    total = float(weighted.sum()) or float("nan")
    nan = float("nan")
    return tuple(Bar(v, nan, nan, float(s / total), int(k))
                 for v, s, k in zip(levels.tolist(), weighted.tolist(), counts.tolist(),
                                    strict=True))


def _histogram(y: np.ndarray, w: np.ndarray, dist: _Distribution,
               bins: int) -> tuple[Bar, ...]:
    """Return a bar per value (few values) or per equal-width bin, weighted shares."""
    if not len(y):
        return ()
    if len(dist.levels) <= bins:
        return _levels(dist, {})
    whole = bool(np.all(np.mod(dist.levels, 1) == 0))  # counts, ages: whole-number bins
    edges = _round_edges(float(dist.levels[0]), float(dist.levels[-1]), bins, whole)
    weighted, _ = np.histogram(y, bins=edges, weights=w)
    counts, _ = np.histogram(y, bins=edges)
    total = float(weighted.sum()) or float("nan")
    return tuple(Bar(f"{lo:,g} to {hi:,g}", float(lo), float(hi), float(s / total), int(k))
                 for lo, hi, s, k in zip(edges[:-1].tolist(), edges[1:].tolist(),
                                         weighted.tolist(), counts.tolist(), strict=True))


def _round_edges(low: float, high: float, bins: int, whole: bool = False) -> np.ndarray:
    """Return equal-width bin edges of a round width (1, 2, 2.5 or 5 times a power of ten),
    at most *bins* bins, covering [low, high]; each bin is [a, b), the last [a, b].

    *whole*: the values are whole numbers, so the width is too (no 2.5, nothing below 1):
    a bin '2.5 to 5' of day counts would hold 3 and 4 and read as if it held halves.
    """
    raw = (high - low) / bins
    power = 10.0 ** np.floor(np.log10(raw))
    factors = (1.0, 2.0, 5.0, 10.0) if whole and power >= 1 else (1.0, 2.0, 2.5, 5.0, 10.0)
    if whole and power < 1:
        power = 1.0
    step = next(f * power for f in factors if f * power >= raw)
    start = np.floor(low / step) * step
    count = max(int(np.ceil((high - start) / step)), 1)
    while start + (count - 1) * step > high:  # no empty bin past the top
        count -= 1
    if count > bins:  # the floor of low moved the edges down: one step wider
        step = next(f * power for f in (*factors[1:], 20.0) if f * power > step)
        start = np.floor(low / step) * step
        count = max(int(np.ceil((high - start) / step)), 1)
    edges: np.ndarray = start + step * np.arange(count + 1)
    return edges

