"""Cells and columns of transport (XPORT) files: IBM floating point, missing codes, text.

The file layout (headers, observations, chunks) is :mod:`wstats.readers.xpt`'s business;
this module turns one variable's bytes into a :class:`RawColumn`: the collectors
(:class:`NumberSink`, :class:`TextSink`) take the variable's bytes from each chunk and
convert them once all chunks are in.

A transport-file number is the leading 2..8 bytes of a big-endian IBM System/360 double:
1 sign bit, a 7-bit exponent in excess 64 of base 16, and a 56-bit fraction ``f`` read as
``0.f``, so that

    value = (-1)**sign * (f / 2**56) * 16**(exponent - 64)

("The Record Layout of a Data Set in Transport (XPORT) Format", technical
support document TS-140, on numeric data; from memory). Short numerics were cut from the
right, so they are restored by zero-padding on the right. The definition is applied as
written, so unnormalised fractions (leading hex digit 0) convert correctly too.

Missing values: a first byte of ``.`` (0x2E), ``_`` (0x5F) or ``A``-``Z`` (0x41-0x5A) with all
other bytes zero is a missing value (``.`` plain, the others the special missing ``._``,
``.A``-``.Z``); as numbers these byte patterns would be zero, and the format reserves them.

Negative zero (sign bit set, zero fraction) decodes to ``-0.0`` as the definition says; it
equals ``0.0`` in every comparison. (pyreadstat 1.3.8 returns NaN for that word, when measured;
we keep the number, since the format reserves only the patterns above for missing values.)

Text is decoded as UTF-8, value by value falling back to latin-1 for bytes that are not
UTF-8 (transport files do not declare an encoding); trailing blanks are padding and removed.
"""

from __future__ import annotations

from collections.abc import Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

from wstats.readers.raw import RawColumn

__all__ = [
    "NumberSink",
    "Sink",
    "TextSink",
    "Variable",
    "decode_ibm",
    "decode_texts",
    "finish_columns",
    "ibm_to_float64",
    "make_sink",
    "text_of",
]

_FRACTION_MASK = np.uint64(0x00FF_FFFF_FFFF_FFFF)
_TOP_SHIFT = np.uint64(56)

# value = f * 2**(4 * (e - 64) - 56) with the sign folded in: one factor per leading byte.
# Every factor is a power of two inside the normal double range (2**-312 .. 2**252), so the
# multiplication is exact and only the fraction's conversion to 53 bits rounds.
_SCALE = np.array(
    [(-1.0 if top & 0x80 else 1.0) * 2.0 ** (4 * ((top & 0x7F) - 64) - 56) for top in range(256)],
    dtype=np.float64,
)

_BATCH = 1 << 16  # rows converted at once: bounds the temporaries
_SYSTEM_MISSING = 0x2E
_MISSING_TOP = np.zeros(256, dtype=bool)
_MISSING_TOP[[_SYSTEM_MISSING, 0x5F, *range(0x41, 0x5B)]] = True


def ibm_to_float64(words: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
    """Convert uint64 IBM doubles to float64 by the format's definition (no missing values).

    The 56-bit fraction goes through int64 to float64, which rounds to the nearest double with
    ties to even (IEEE 754 conversion in the default rounding mode); the power-of-16 scale is
    then applied exactly.
    """
    result = np.empty(words.shape[0]) if out is None else out
    _convert(words, result)
    return result


def decode_ibm(words: np.ndarray, out: np.ndarray) -> np.ndarray | None:
    """Write the numbers of *words* into *out* (NaN where missing) and return the missing tags.

    Returns None when no special missing value (``._``, ``.A``-``.Z``) occurs, else a uint8
    array, one per row: the tag letter's ASCII code, 0 for numbers and the plain ``.``.
    """
    fraction = _convert(words, out)
    # Missing values have a zero fraction; look only at those few rows.
    zero = np.flatnonzero(fraction == 0)
    if zero.size == 0:
        return None
    top = (words[zero] >> _TOP_SHIFT).astype(np.uint8)
    missing = _MISSING_TOP[top]
    out[zero[missing]] = np.nan
    special = missing & (top != _SYSTEM_MISSING)
    if not special.any():
        return None
    tags = np.zeros(words.shape[0], dtype=np.uint8)
    tags[zero[special]] = top[special]
    return tags


def _convert(words: np.ndarray, out: np.ndarray) -> np.ndarray:
    """Write the values of *words* into *out*; return their fractions."""
    fraction = words & _FRACTION_MASK
    # take() with intp indices: several times faster than indexing with uint64 (measured).
    scale = _SCALE.take((words >> _TOP_SHIFT).astype(np.intp))
    np.multiply(fraction.view(np.int64).astype(np.float64), scale, out=out)
    return fraction


def text_of(raw: bytes) -> str:
    """Decode bytes as UTF-8, else latin-1, without trailing blanks (and NUL padding)."""
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        text = raw.decode("latin-1")
    return text.rstrip(" \x00")


def decode_texts(raw: np.ndarray) -> np.ndarray:
    """Decode a fixed-width bytes array to an object array of str, as :func:`text_of` does."""
    if raw.size == 0 or int(raw.view(np.uint8).max()) < 0x80:  # ASCII: vectorised
        decoded: np.ndarray = np.char.rstrip(raw, b" \x00").astype(np.str_).astype(object)
        return decoded
    # Decode each distinct value once, not each row.
    distinct, inverse = np.unique(raw, return_inverse=True)
    texts = np.array([text_of(value) for value in distinct.tolist()] + [None], dtype=object)
    return texts[:-1][inverse]


@dataclass(frozen=True)
class Variable:
    """One NAMESTR: where a variable sits in the observation and what the file says of it."""

    name: str
    numeric: bool
    width: int
    position: int
    label: str | None
    format: str | None


class NumberSink:
    """Collects one numeric column: raw words chunk by chunk, converted once at the end."""

    def __init__(self, var: Variable, n_rows: int) -> None:
        self.var = var
        # The IBM words are staged in the output's own memory (8 bytes a row either way);
        # zeros supply the right-padding of short numerics.
        self.data = np.zeros(n_rows) if var.width < 8 else np.empty(n_rows)
        self.tags: np.ndarray | None = None

    def stage(self, buf: bytearray, rows: int, at: int, length: int) -> None:
        """Copy this column's bytes of the *rows* observations in *buf* to rows *at* on."""
        var = self.var
        if var.width == 8:
            source = np.ndarray((rows,), ">u8", buf, var.position, (length,))
            self.data[at : at + rows].view(">u8")[:] = source
        else:
            source = np.ndarray((rows, var.width), np.uint8, buf, var.position, (length, 1))
            self.data[at : at + rows].view(np.uint8).reshape(rows, 8)[:, : var.width] = source

    def finish(self) -> RawColumn:
        """Convert the staged words in place, batch by batch, and return the column."""
        data, var = self.data, self.var
        for begin in range(0, data.shape[0], _BATCH):
            part = data[begin : begin + _BATCH]
            tags = decode_ibm(part.view(">u8").astype(np.uint64), part)
            if tags is not None:
                if self.tags is None:
                    self.tags = np.zeros(data.shape[0], dtype=np.uint8)
                self.tags[begin : begin + part.shape[0]] = tags
        return RawColumn(var.name, data, var.label, tags=self.tags, format=var.format)


class TextSink:
    """Collects one character column: raw bytes chunk by chunk, decoded once at the end."""

    def __init__(self, var: Variable, n_rows: int) -> None:
        self.var = var
        self.raw = np.empty(n_rows, dtype=f"S{var.width}")

    def stage(self, buf: bytearray, rows: int, at: int, length: int) -> None:
        """Copy this column's bytes of the *rows* observations in *buf* to rows *at* on."""
        var = self.var
        self.raw[at : at + rows] = np.ndarray((rows,), self.raw.dtype, buf, var.position, (length,))

    def finish(self) -> RawColumn:
        """Decode the staged bytes batch by batch and return the column."""
        data = np.empty(self.raw.shape[0], dtype=object)
        for begin in range(0, data.shape[0], _BATCH):
            data[begin : begin + _BATCH] = decode_texts(self.raw[begin : begin + _BATCH])
        var = self.var
        return RawColumn(var.name, data, var.label, numeric=False, format=var.format)


Sink = NumberSink | TextSink


def make_sink(var: Variable, n_rows: int) -> Sink:
    """Return the collector for *var*."""
    return NumberSink(var, n_rows) if var.numeric else TextSink(var, n_rows)


def finish_columns(sinks: Sequence[Sink], threads: int) -> dict[str, RawColumn]:
    """Convert every staged column, in *threads* threads (numpy releases the GIL)."""
    if threads <= 1:
        columns = [sink.finish() for sink in sinks]
    else:
        with ThreadPoolExecutor(threads) as pool:
            columns = list(pool.map(lambda sink: sink.finish(), sinks))
    return {column.name: column for column in columns}
