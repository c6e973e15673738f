"""IBM System/360 hexadecimal floating point -> IEEE double (wstats.readers.ibm).

The format's definition (.sas7bdat Institute, "The Record Layout of a Data Set in Transport
(XPORT) Format", TS-140; from memory): a big-endian word of 1 sign bit, a 7-bit exponent in
excess 64 of base 16 and a 56-bit fraction f, value = (-1)**s * (f / 2**56) * 16**(e - 64).
The oracle below evaluates that definition with exact rationals; ``float(Fraction)`` rounds
correctly, ties to even (Python documentation, ``fractions.Fraction.__float__`` via exact
integer true division; from memory).
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from wstats.readers.ibm import decode_ibm, decode_texts, ibm_to_float64, text_of

SMALLEST = 16.0**-65  # 0.1 (hex) * 16**-64: the smallest normalised IBM magnitude
LARGEST = 16.0**63  # every IBM magnitude is below 16**63


def ibm_value(word: int) -> float:
    """Evaluate the format's definition exactly, then round once to the nearest double."""
    sign = -1.0 if word >> 63 else 1.0
    exponent = (word >> 56) & 0x7F
    fraction = word & ((1 << 56) - 1)
    return math.copysign(float(Fraction(fraction, 1 << 56) * Fraction(16) ** (exponent - 64)), sign)


def ieee_to_ibm(x: float) -> int:
    """Encode a double in IBM's range as a normalised IBM double, exactly (test-side writer).

    With |x| = m * 2**e2 (0.5 <= m < 1), the exponent ceil(e2 / 4) puts 0.f in [1/16, 1); the
    53-bit mantissa shifted left by 0-3 bits fits the 56-bit fraction, so nothing is lost.
    """
    sign = 1 << 63 if math.copysign(1.0, x) < 0 else 0
    if x == 0:
        return sign
    mantissa, e2 = math.frexp(abs(x))
    hex_exponent = -(-e2 // 4)
    if not -64 <= hex_exponent <= 63:
        raise ValueError(f"{x} is outside the IBM range")
    shift = e2 + 3 - 4 * hex_exponent  # 0..3
    fraction = int(mantissa * 2**53) << shift
    assert (1 << 52) <= fraction < (1 << 56)
    return sign | (hex_exponent + 64) << 56 | fraction


def decode(words: list[int]) -> np.ndarray:
    """Decode Python-int IBM words with the reader's vectorised code."""
    return ibm_to_float64(np.array(words, dtype=np.uint64))


in_range = st.floats(min_value=SMALLEST, max_value=LARGEST, exclude_max=True).flatmap(
    lambda m: st.sampled_from([m, -m])
)


def test_textbook_examples() -> None:
    # 1.0 = 41 10 00 00 ...: 0x1/16 * 16**1 (TS-140 definition; from memory).
    # -118.625 = C2 76 A0 00 ...: the worked example of the article "IBM hexadecimal
    # floating-point" (Wikipedia, section "Single-precision 32-bit"; from memory).
    words = [0x4110_0000_0000_0000, 0xC276_A000_0000_0000, 0x4264_0000_0000_0000]
    assert decode(words).tolist() == [1.0, -118.625, 100.0]
    assert [ieee_to_ibm(v) for v in (1.0, -118.625, 100.0)] == words


def test_unnormalised_fractions_follow_the_definition() -> None:
    # Leading hex digits 0: 0x41 with f = 0x00100000000000 is 2**44 / 2**56 * 16 = 2**-8.
    words = [0x4100_1000_0000_0000, 0x4200_0000_0000_0001, 0x4000_0000_0010_0000, 0x3F01 << 48]
    expected = [2.0**-8, 2.0**-56 * 16**2, 2.0**-36, 2.0**-8 * 16.0**-1]
    assert decode(words).tolist() == expected
    assert expected == [ibm_value(w) for w in words]


def test_rounding_to_53_bits_is_half_even() -> None:
    # f = 2**55 + low bits: 3 bits fall off; 0b100 is a tie (keep the even 53-bit value),
    # 0b1100 a tie above an odd value (round up), 0b101 above the tie (round up).
    base = 0x40 << 56 | 1 << 55
    words = [base | 0b100, base | 0b1100, base | 0b101, 0x4FFF_FFFF_FFFF_FFFF]
    got = decode(words).tolist()
    assert got == [0.5, 0.5 + 2.0**-52, 0.5 + 2.0**-53, 16.0**15]
    assert got == [ibm_value(w) for w in words]


def test_zero_and_negative_zero() -> None:
    got = decode([0, 0x8000_0000_0000_0000, 0x4000_0000_0000_0000])
    assert got.tolist() == [0.0, 0.0, 0.0]
    assert np.signbit(got).tolist() == [False, True, False]


@settings(max_examples=300)
@given(st.integers(min_value=0, max_value=2**64 - 1))
def test_any_word_matches_the_exact_definition(word: int) -> None:
    assert decode([word])[0] == ibm_value(word)


@settings(max_examples=300)
@given(in_range)
def test_round_trip_through_ibm_is_exact(x: float) -> None:
    assert decode([ieee_to_ibm(x)])[0] == x


def test_missing_values_and_their_tags() -> None:
    letters = [ord("."), ord("_"), *range(ord("A"), ord("Z") + 1)]
    words = [c << 56 for c in letters] + [ord("A") << 56 | 1, ord(".") << 56 | 1 << 52, 0]
    out = np.empty(len(words))
    tags = decode_ibm(np.array(words, dtype=np.uint64), out)
    assert np.isnan(out[: len(letters)]).all()
    # With a non-zero fraction the same leading bytes are ordinary numbers.
    assert out[len(letters) :].tolist() == [ibm_value(w) for w in words[len(letters) :]]
    assert tags is not None
    assert tags.tolist() == [0, *letters[1:], 0, 0, 0]


def test_plain_missing_has_no_tags() -> None:
    out = np.empty(2)
    assert decode_ibm(np.array([0x2E << 56, 0x4110 << 48], dtype=np.uint64), out) is None
    assert np.isnan(out[0]) and out[1] == 1.0


def test_the_test_encoder_refuses_values_outside_the_range() -> None:
    with pytest.raises(ValueError):
        ieee_to_ibm(LARGEST)
    with pytest.raises(ValueError):
        ieee_to_ibm(SMALLEST / 2)


def test_text_is_utf8_else_latin1_without_trailing_blanks() -> None:
    # UTF-8 where the bytes are UTF-8, latin-1 (every byte a character) where they are not.
    raw = np.array([b"abc  ", b"  x", b"", "é ".encode(), b"caf\xe9", b"a\x00 "], dtype="S6")
    expected = ["abc", "  x", "", "é", "café", "a"]
    assert decode_texts(raw).tolist() == expected
    assert [text_of(bytes(v)) for v in raw] == expected
    assert decode_texts(raw[:3]).tolist() == expected[:3]  # the all-ASCII path
