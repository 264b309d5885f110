"""Canonical signed digit recoding against published values and an independent construction."""

from __future__ import annotations

import itertools
from fractions import Fraction

import pytest
from hypothesis import given
from hypothesis import strategies as st

from hwfilter.csd import (
    average_nonzero_digits,
    csd_digits,
    csd_string,
    from_digits,
    nonzero_digits,
    shift_add_adders,
    shift_add_plan,
)


# Worked encodings, T = -1 (Reitwiesner, "Binary arithmetic", 1960; as listed in
# shared/references.md)
@pytest.mark.parametrize(
    "n, text", [(7, "100T"), (23, "10T00T"), (45, "10T0T01"), (-7, "T001"), (0, "0"), (1, "1")]
)
def test_worked_encodings(n, text):
    assert csd_string(n) == text


def _prodinger_digits(n: int, length: int) -> list[int]:
    """Digit i = bit i+1 of 3n minus bit i+1 of n (Prodinger, Integers 0, 2000)."""
    return [((3 * n) >> (i + 1) & 1) - (n >> (i + 1) & 1) for i in range(length)]


def test_independent_construction_for_every_13_bit_value():
    # Python's >> is arithmetic, so the bits of negative n are those of infinite two's
    # complement, and the construction holds for them too
    for n in range(-4096, 4096):
        d = list(csd_digits(n))
        length = max(len(d), 16)
        assert d + [0] * (length - len(d)) == _prodinger_digits(n, length), n


@given(st.integers(min_value=-(2**80), max_value=2**80))
def test_value_and_no_adjacent_nonzeros(n):
    d = csd_digits(n)
    assert from_digits(d) == n
    assert all(x in (-1, 0, 1) for x in d)
    assert all(not (a and b) for a, b in zip(d, d[1:]))
    assert not d or d[-1] != 0  # no leading zero digit


def test_minimal_weight_against_exhaustive_search():
    # Reitwiesner: CSD has the fewest nonzero digits of any signed-digit form. Check by
    # trying every digit string of {-1, 0, 1} of length 8 (enough for |n| < 128).
    best: dict[int, int] = {}
    for digits in itertools.product((-1, 0, 1), repeat=8):
        v = from_digits(digits)
        w = sum(1 for x in digits if x)
        if v not in best or w < best[v]:
            best[v] = w
    for n in range(-127, 128):
        assert nonzero_digits(n) == best[n], n


@pytest.mark.parametrize("bits", range(1, 13))
def test_average_nonzeros_formula_by_enumeration(bits):
    # formula n/3 + 1/9 - (1/9)(-1/2)^n (shared/references.md), over all signed n-bit words
    values = range(-(1 << (bits - 1)), 1 << (bits - 1))
    mean = Fraction(sum(nonzero_digits(v) for v in values), 1 << bits)
    assert average_nonzero_digits(bits) == mean
    assert mean == Fraction(bits, 3) + Fraction(1, 9) - Fraction(1, 9) * Fraction(-1, 2) ** bits


def test_average_nonzeros_rejects_bad_bits():
    with pytest.raises(ValueError, match="bits must be at least 1, not 0"):
        average_nonzero_digits(0)


@pytest.mark.parametrize("n, adders", [(7, 1), (23, 2), (45, 3), (1, 0), (0, 0), (-7, 1)])
def test_adders_per_constant(n, adders):
    # common practice: a shift-add multiply needs nonzero digits - 1 adders
    assert shift_add_adders(n) == adders == max(nonzero_digits(n) - 1, 0)


@given(
    st.integers(min_value=-(2**20), max_value=2**20).filter(lambda v: v != 0),
    st.integers(min_value=-(2**15), max_value=2**15 - 1),
)
def test_shift_add_plan_computes_the_product(value, x):
    plan = shift_add_plan(value, 16)
    assert sum(d * (x << s) for d, s in plan.terms) == value * x
    assert plan.adders == shift_add_adders(value)
    assert plan.levels == (0 if plan.adders == 0 else (len(plan.terms) - 1).bit_length())
    assert all(w >= 1 for w in plan.adder_bits)


def test_shift_add_plan_of_a_power_of_two_is_a_wire_or_negation():
    assert shift_add_plan(8, 16).adders == 0 and not shift_add_plan(8, 16).negate
    assert shift_add_plan(-8, 16).negate


def test_csd_rejects_non_integers():
    with pytest.raises(TypeError, match="CSD input must be an integer, not 1.5"):
        csd_digits(1.5)
