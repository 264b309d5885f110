"""Formats, rounding and overflow rules, checked by enumeration against exact arithmetic."""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest

from hwfilter.fixed import (
    ROUNDING_RULES,
    Format,
    bits_for_range,
    coefficient_format,
    handle_overflow,
    quantize_value,
    requantize,
    round_shift,
)


def exact_round(v: int, k: int, rule: str) -> int:
    """Independent definitions of the five rules on the exact rational v / 2**k."""
    x = Fraction(v, 2**k)
    fl = math.floor(x)
    frac = x - fl
    if rule == "floor":
        return fl
    if rule == "toward-zero":
        return math.trunc(x)
    if rule == "half-up":  # ties toward +infinity (common practice: add half, then floor)
        return math.floor(x + Fraction(1, 2))
    if rule == "half-away":  # ties away from zero
        m = math.floor(abs(x) + Fraction(1, 2))
        return m if x >= 0 else -m
    if rule == "half-even":  # ties to the even neighbour (IEEE 754 roundTiesToEven)
        if frac == Fraction(1, 2):
            return fl if fl % 2 == 0 else fl + 1
        return math.floor(x + Fraction(1, 2))
    raise AssertionError(rule)


@pytest.mark.parametrize("rule", ROUNDING_RULES)
@pytest.mark.parametrize("k", [1, 2, 3, 4])
def test_rounding_by_enumeration(rule, k):
    # every 8-bit input word, k fraction bits dropped: python-int and numpy paths
    values = list(range(-128, 128))
    want = [exact_round(v, k, rule) for v in values]
    assert [round_shift(v, k, rule) for v in values] == want
    assert round_shift(np.array(values, dtype=np.int64), k, rule).tolist() == want


def test_half_even_and_half_away_differ_on_ties():
    # worked ties: 2.5 -> 2 (even) / 3 (away); -2.5 -> -2 / -3; -2.5 floor -> -3 (common practice)
    assert round_shift(5, 1, "half-even") == 2
    assert round_shift(5, 1, "half-away") == 3
    assert round_shift(-5, 1, "half-even") == -2
    assert round_shift(-5, 1, "half-away") == -3
    assert round_shift(-5, 1, "half-up") == -2
    assert round_shift(-5, 1, "floor") == -3
    assert round_shift(-5, 1, "toward-zero") == -2


def test_wrap_and_saturate_at_extremes():
    # two's complement wrap: 32768 -> -32768, -32769 -> 32767 (common practice)
    f = Format(16, 15)
    assert handle_overflow(32768, f, "wrap") == -32768
    assert handle_overflow(-32769, f, "wrap") == 32767
    assert handle_overflow(32768, f, "saturate") == 32767
    assert handle_overflow(-40000, f, "saturate") == -32768
    assert handle_overflow(np.array([70000, -70000]), f, "wrap").tolist() == [
        70000 - 65536 * 1,
        -70000 + 65536 * 1,
    ]
    # exhaustive over 6-bit values into 4 bits: wrap == value mod 16 in [-8, 8)
    f4 = Format(4, 0)
    for v in range(-32, 32):
        w = handle_overflow(v, f4, "wrap")
        assert -8 <= w < 8 and (w - v) % 16 == 0
        assert handle_overflow(v, f4, "saturate") == min(max(v, -8), 7)


def test_minus_one_times_minus_one_corner():
    # shared/references.md, word growth: in Q1.15 (16 bits, 15 fraction bits),
    # (-1) x (-1) = +1 is not representable; the product needs the full 32 bits.
    f = Format(16, 15)
    assert quantize_value(1.0, f) == 32767  # saturates
    assert quantize_value(-1.0, f) == -32768
    prod = (-32768) * (-32768)  # 2**30 with 30 fraction bits == +1.0
    assert bits_for_range(prod, prod) == 32
    assert bits_for_range(-32768 * 32767, 32767 * 32767) == 31  # every other product
    assert requantize(prod, 30, f, "floor", "saturate") == 32767
    assert requantize(prod, 30, f, "floor", "wrap") == -32768


def test_quantize_value_is_exact():
    # 0.1 is not dyadic: rounding to 15 fraction bits, 0.1 * 32768 = 3276.8 -> 3277
    assert quantize_value(0.1, Format(16, 15)) == 3277
    assert quantize_value(-0.1, Format(16, 15)) == -3277
    # a tie in exact binary: 3/65536 at 15 fraction bits is 1.5 LSB
    assert quantize_value(Fraction(3, 65536), Format(16, 15), "half-even") == 2
    assert quantize_value(Fraction(3, 65536), Format(16, 15), "floor") == 1


@pytest.mark.parametrize(
    "values,bits,frac",
    [
        ([-0.94, 0.33], 16, 15),  # |c| < 1: one integer (sign) bit
        ([1.99, 1.0], 16, 14),  # up to 2: two integer bits
        ([-1.0], 8, 7),  # -1 fits two's complement with one integer bit
        ([0.999999], 8, 6),  # rounds to 1.0 at 7 fraction bits, so one more integer bit
        ([0.01], 8, 13),  # small group: the binary point moves right
    ],
)
def test_coefficient_format_holds_largest(values, bits, frac):
    fmt = coefficient_format(values, bits)
    assert fmt == Format(bits, frac)
    for v in values:  # every value rounds into range (no wrap)
        q = quantize_value(v, fmt, "half-away", "wrap")
        assert abs(q * 2.0**-fmt.frac - v) <= 2.0 ** -(fmt.frac + 1)


def test_format_validation_messages():
    with pytest.raises(ValueError, match="bits must be at least 1, not 0"):
        Format(0, 0)
    with pytest.raises(TypeError, match="frac must be an integer"):
        Format(8, 1.5)
    with pytest.raises(ValueError, match="rounding must be one of"):
        round_shift(3, 1, "nearest")


@pytest.mark.parametrize("rule", ROUNDING_RULES)
def test_rounding_on_object_arrays_of_wide_words(rule):
    # words beyond int64 (object arrays of Python ints) round like single Python ints
    values = [v * 2**70 + d for v in (-3, -1, 0, 2) for d in range(-9, 10)]
    arr = round_shift(np.array(values, dtype=object), 4, rule)
    assert [int(t) for t in arr] == [exact_round(v, 4, rule) for v in values]
