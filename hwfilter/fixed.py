"""Fixed-point formats, rounding and overflow rules on exact integers.

A value in format ``Format(bits, frac)`` is a signed two's complement integer ``v`` of
``bits`` bits standing for ``v * 2**-frac``. Integer bits (sign included) are
``bits - frac``; ``frac`` may be negative (the LSB weighs more than 1) or larger than
``bits`` (every bit is a fraction bit). We never use Q strings: the two Q conventions
disagree on whether the sign bit counts.

All arithmetic here is on Python ints (exact for any width) or numpy int64 arrays (exact
while the widths fit); no float touches a value the hardware sees.
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np

__all__ = [
    "ROUNDING_RULES",
    "OVERFLOW_RULES",
    "Format",
    "round_shift",
    "handle_overflow",
    "requantize",
    "quantize_value",
    "coefficient_format",
    "bits_for_range",
    "is_power_of_two",
]

#: Rounding rules for dropped fraction bits, spelled as in the filter file.
ROUNDING_RULES = ("floor", "half-up", "half-even", "toward-zero", "half-away")
#: Rules for dropped integer bits.
OVERFLOW_RULES = ("wrap", "saturate")


class Format:
    """Signed two's complement format: ``bits`` total bits, ``frac`` fraction bits.

    >>> Format(16, 15)
    Format(bits=16, frac=15)
    >>> Format(16, 15).max_int, Format(16, 15).min_int
    (32767, -32768)
    """

    __slots__ = ("_bits", "_frac")

    def __init__(self, bits: int, frac: int):
        if not isinstance(bits, int) or isinstance(bits, bool):
            raise TypeError(f"Format bits must be an integer, not {bits!r}")
        if not isinstance(frac, int) or isinstance(frac, bool):
            raise TypeError(f"Format frac must be an integer, not {frac!r}")
        if bits < 1:
            raise ValueError(f"Format bits must be at least 1, not {bits!r}")
        self._bits = bits
        self._frac = frac

    @property
    def bits(self) -> int:
        return self._bits

    @property
    def frac(self) -> int:
        return self._frac

    @property
    def int_bits(self) -> int:
        """Integer bits including the sign bit (may be negative or zero)."""
        return self._bits - self._frac

    @property
    def min_int(self) -> int:
        return -(1 << (self._bits - 1))

    @property
    def max_int(self) -> int:
        return (1 << (self._bits - 1)) - 1

    @property
    def lsb(self) -> Fraction:
        return Fraction(2) ** -self._frac

    @property
    def min_value(self) -> Fraction:
        return self.min_int * self.lsb

    @property
    def max_value(self) -> Fraction:
        return self.max_int * self.lsb

    def to_float(self, v):
        """Integer word(s) to real value(s) (float64; for reports and comparisons only)."""
        return np.asarray(v, dtype=np.float64) * 2.0**-self._frac

    def as_dict(self) -> dict:
        return {"bits": self._bits, "frac": self._frac}

    def __eq__(self, other):
        return isinstance(other, Format) and self._bits == other._bits and self._frac == other._frac

    def __hash__(self):
        return hash((Format, self._bits, self._frac))

    def __repr__(self):
        return f"Format(bits={self._bits}, frac={self._frac})"

    def __str__(self):
        return f"{self._bits}b/{self._frac}f"


def bits_for_range(lo: int, hi: int) -> int:
    """Fewest two's complement bits that hold every integer in ``[lo, hi]``.

    Exact: ``bits_for_range(-32768, 32767) == 16``, ``bits_for_range(0, 32768) == 17``.
    """
    assert lo <= hi
    bits = 1
    while not (-(1 << (bits - 1)) <= lo and hi <= (1 << (bits - 1)) - 1):
        bits += 1
    return bits


def is_power_of_two(v: int) -> bool:
    """True for ``+-2**m`` (m >= 0)."""
    a = abs(int(v))
    return a > 0 and a & (a - 1) == 0


def _check_rule(rounding: str | None = None, overflow: str | None = None):
    if rounding is not None and rounding not in ROUNDING_RULES:
        raise ValueError(f"rounding must be one of {', '.join(ROUNDING_RULES)}, not {rounding!r}")
    if overflow is not None and overflow not in OVERFLOW_RULES:
        raise ValueError(f"overflow must be one of {', '.join(OVERFLOW_RULES)}, not {overflow!r}")


def round_shift(v, k: int, rounding: str):
    """Divide integer(s) ``v`` by ``2**k`` (k >= 0) and round by ``rounding``.

    Works on Python ints and on numpy integer arrays (floor division semantics of ``>>``).
    """
    _check_rule(rounding=rounding)
    if k <= 0:
        return v << -k if k < 0 else v
    half = 1 << (k - 1)
    if rounding == "floor":
        return v >> k
    if rounding == "half-up":
        return (v + half) >> k
    if isinstance(v, np.ndarray):
        neg = v < 0
        a = np.where(neg, -v, v)
        if rounding == "toward-zero":
            m = a >> k
        elif rounding == "half-away":
            m = (a + half) >> k
        else:  # half-even, done on the signed value
            q = v >> k
            rem = v - (q << k)
            up = (rem > half) | ((rem == half) & ((q & 1) == 1))
            return q + up.astype(v.dtype)
        return np.where(neg, -m, m)
    v = int(v)
    if rounding == "toward-zero":
        return v >> k if v >= 0 else -((-v) >> k)
    if rounding == "half-away":
        return (v + half) >> k if v >= 0 else -((-v + half) >> k)
    q = v >> k
    rem = v - (q << k)
    if rem > half or (rem == half and q & 1):
        q += 1
    return q


def handle_overflow(v, fmt: Format, overflow: str):
    """Bring integer(s) ``v`` into ``fmt``'s range by ``overflow`` (wrap or saturate)."""
    _check_rule(overflow=overflow)
    lo, hi = fmt.min_int, fmt.max_int
    if overflow == "saturate":
        if isinstance(v, np.ndarray):
            return np.clip(v, lo, hi)
        return min(max(int(v), lo), hi)
    mask = (1 << fmt.bits) - 1
    return ((v - lo) & mask) + lo


def requantize(v, from_frac: int, fmt: Format, rounding: str, overflow: str):
    """Move integer(s) ``v`` with ``from_frac`` fraction bits into ``fmt``.

    Fraction bits are dropped with ``rounding`` (or zeros appended), then integer bits
    with ``overflow``. This is the one lossy operation of the whole tool.
    """
    return handle_overflow(round_shift(v, from_frac - fmt.frac, rounding), fmt, overflow)


def quantize_value(x, fmt: Format, rounding: str = "half-away", overflow: str = "saturate"):
    """Quantize a real number (float or Fraction) to an integer word of ``fmt``, exactly.

    The float is converted to its exact rational value first, so no float rounding
    decides a bit.
    """
    fx = Fraction(x)
    num, den = fx.numerator, fx.denominator
    k = den.bit_length() - 1
    assert den == 1 << k  # a float (or dyadic Fraction) scaled by a power of two
    return requantize(num, k, fmt, rounding, overflow)


def coefficient_format(values, bits: int) -> Format:
    """Format of ``bits`` bits whose integer bits just hold the largest magnitude.

    A group of coefficients shares one format (one binary point), chosen so that the
    largest ``|c|`` is representable after rounding to nearest; power-of-two magnitudes
    such as -1.0 or 2.0 take no extra bit when negative (two's complement holds -2**m).
    """
    if bits < 2:
        raise ValueError(f"coefficient bits must be at least 2, not {bits!r}")
    vals = [Fraction(float(v)) for v in values]
    nonzero = [v for v in vals if v != 0]
    if not nonzero:
        return Format(bits, bits - 1)
    # start from the frac that would put the largest magnitude just below 2**(int_bits-1)
    big = max(abs(v) for v in nonzero)
    int_bits = 1
    while Fraction(2) ** (int_bits - 1) < big:
        int_bits += 1
    while Fraction(2) ** (int_bits - 2) >= big and int_bits > -64:
        int_bits -= 1
    # grow until every value rounds into range (rounding can push 0.99999 up to 1.0)
    while True:
        fmt = Format(bits, bits - int_bits)
        ok = True
        for v in nonzero:
            q = quantize_value(v, fmt, "half-away", "wrap")
            exact = v * Fraction(2) ** fmt.frac
            if abs(q - exact) > Fraction(1, 2):  # wrapped
                ok = False
                break
        if ok:
            return fmt
        int_bits += 1
