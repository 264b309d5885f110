"""Canonical signed digit (CSD) recoding and shift-add constant multipliers.

A constant multiply ``x * c`` without a hard multiplier is a sum of shifted copies of
``x``: one term per nonzero digit of ``c``. In canonical signed digit form (digits
-1, 0, +1, no two adjacent digits nonzero) the number of nonzero digits is the fewest of
any signed-digit form, so the shift-add network needs the fewest adders: nonzero digits
minus one (common practice).

References
----------
G. W. Reitwiesner, "Binary arithmetic", Advances in Computers 1, 1960 (uniqueness and
minimality of the form). H. Prodinger, "On binary representations of integers with
digits -1, 0, 1", Integers 0, 2000 (digit i = bit i+1 of 3n minus bit i+1 of n).
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction

__all__ = [
    "csd_digits",
    "csd_string",
    "from_digits",
    "nonzero_digits",
    "shift_add_adders",
    "average_nonzero_digits",
    "ShiftAddPlan",
    "shift_add_plan",
]


def csd_digits(n: int) -> tuple[int, ...]:
    """Canonical signed digits of integer ``n``, least significant first.

    >>> csd_digits(7)        # 7 = 8 - 1
    (-1, 0, 0, 1)
    >>> csd_digits(0)
    ()
    """
    if not isinstance(n, int) or isinstance(n, bool):
        raise TypeError(f"CSD input must be an integer, not {n!r}")
    digits = []
    while n:
        if n & 1:
            d = 2 - (n & 3)  # n = 1 (mod 4) -> +1, n = 3 (mod 4) -> -1
            n -= d
        else:
            d = 0
        digits.append(d)
        n >>= 1
    return tuple(digits)


def from_digits(digits) -> int:
    """The integer of signed digits given least significant first."""
    return sum(d << i for i, d in enumerate(digits))


def csd_string(n: int) -> str:
    """CSD digits most significant first, ``T`` for -1 (``23`` -> ``"10T00T"``)."""
    digits = csd_digits(n)
    if not digits:
        return "0"
    return "".join({1: "1", 0: "0", -1: "T"}[d] for d in reversed(digits))


def nonzero_digits(n: int) -> int:
    """Number of nonzero CSD digits of ``n`` (the terms of a shift-add multiplier)."""
    return sum(1 for d in csd_digits(n) if d)


def shift_add_adders(n: int) -> int:
    """Two-input adders (or subtractors) of a shift-add multiply by ``n``: digits - 1."""
    return max(nonzero_digits(n) - 1, 0)


def average_nonzero_digits(bits: int) -> Fraction:
    """Mean nonzero CSD digits over all signed ``bits``-bit integers, exactly.

    ``bits/3 + 1/9 - (1/9)(-1/2)**bits``: about a third of the digits, against half of
    them in plain binary.
    """
    if bits < 1:
        raise ValueError(f"bits must be at least 1, not {bits!r}")
    return Fraction(bits, 3) + Fraction(1, 9) - Fraction(1, 9) * Fraction(-1, 2) ** bits


@dataclass(frozen=True)
class ShiftAddPlan:
    """A shift-add network for ``x * value`` with ``x`` of ``input_bits`` bits.

    Terms ``digit * (x << shift)`` are summed by a balanced tree of two-input adders;
    ``adder_bits`` lists the width of every adder (the bits a carry chain covers, bits
    below a term's shift pass through), ``levels`` the adder depth of the tree.
    """

    value: int
    input_bits: int
    terms: tuple[tuple[int, int], ...]
    adder_bits: tuple[int, ...]
    levels: int
    negate: bool

    @property
    def adders(self) -> int:
        return len(self.adder_bits)

    @property
    def total_adder_bits(self) -> int:
        return sum(self.adder_bits)


def shift_add_plan(value: int, input_bits: int) -> ShiftAddPlan:
    """The CSD shift-add network for a constant multiply (see :class:`ShiftAddPlan`).

    A single term is a wire (a shift) or, for a negative power of two, a negation
    (``negate``; one adder's worth of logic, often folded into the following sum).
    """
    if input_bits < 1:
        raise ValueError(f"input bits must be at least 1, not {input_bits!r}")
    terms = tuple((d, i) for i, d in enumerate(csd_digits(value)) if d)
    negate = len(terms) == 1 and terms[0][0] < 0
    # balanced tree; each operand is (lsb, msb) of the bits it spans
    level = [(shift, shift + input_bits - 1) for _, shift in terms]
    widths: list[int] = []
    levels = 0
    while len(level) > 1:
        nxt = []
        for j in range(0, len(level) - 1, 2):
            (la, ma), (lb, mb) = level[j], level[j + 1]
            lo, hi = min(la, lb), max(ma, mb) + 1
            # bits below the higher operand's lsb pass through without a carry cell
            widths.append(hi - max(la, lb) + 1)
            nxt.append((lo, hi))
        if len(level) % 2:
            nxt.append(level[-1])
        level = nxt
        levels += 1
    return ShiftAddPlan(value, input_bits, terms, tuple(widths), levels, negate)
