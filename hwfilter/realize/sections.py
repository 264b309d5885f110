"""Cascade and parallel realizations built from second-order sections.

Cascade: ``H = prod_i H_i`` with sections from scipy's ``zpk2sos`` (its ``pairing``
options). scipy orders sections with the poles nearest the unit circle last; the option
``order = "nearest-first"`` reverses that. The overall gain ``k`` sits in the first
section's numerator (``gain = "first"``, scipy's choice), is split evenly over the
sections (``"even"``: ``|k|**(1/n)`` each, sign in the first), or is spread so that the
peak magnitude from the input to each section's output is one, the last section taking
what is left (``"normalized"``).

Parallel: partial fractions of ``B/A`` by ``scipy.signal.residuez``; complex-conjugate
pole pairs become second-order sections with first-order numerators, real poles are
paired in order of magnitude, an odd one left becomes a first-order section, and the
polynomial part (when ``len(b) >= len(a)``) is a direct FIR path.
"""

from __future__ import annotations

import numpy as np
from scipy import signal

__all__ = ["GAIN_SPREADS", "ORDERS", "cascade_sections", "parallel_sections"]

GAIN_SPREADS = ("first", "even", "normalized")
ORDERS = ("nearest-last", "nearest-first")


def _peak(b, a, n=4096):
    _, h = signal.freqz(b, a, worN=n)
    return float(np.max(np.abs(h)))


def cascade_sections(sos, *, order: str = "nearest-last", gain: str = "first") -> np.ndarray:
    """Reorder and rescale a scipy ``sos`` array (shape ``(n, 6)``) for a cascade."""
    sos = np.array(sos, dtype=float, copy=True)
    if order == "nearest-first":
        sos = sos[::-1].copy()
    n = len(sos)
    if gain not in GAIN_SPREADS:
        raise ValueError(f"gain must be one of {', '.join(GAIN_SPREADS)}, not {gain!r}")
    # gather the overall gain: make each numerator monic in its first nonzero coefficient
    total = 1.0
    for s in sos:
        lead = next(v for v in s[:3] if v != 0.0)
        s[:3] /= lead
        total *= lead
    if n == 1 or gain == "first":
        sos[0, :3] *= total
        return sos
    if gain == "even":
        each = abs(total) ** (1.0 / n)
        sos[:, :3] *= each
        if total < 0:
            sos[0, :3] *= -1
        return sos
    # normalized: cumulative peak magnitude one after every section but the last
    remaining = total
    cum_b, cum_a = np.array([1.0]), np.array([1.0])
    for i, s in enumerate(sos):
        cum_b2 = np.polymul(cum_b, s[:3])
        cum_a2 = np.polymul(cum_a, s[3:])
        if i < n - 1:
            g = 1.0 / _peak(cum_b2, cum_a2)
            s[:3] *= g
            remaining /= g
            cum_b, cum_a = np.polymul(cum_b, s[:3]), cum_a2
        else:
            s[:3] *= remaining
    return sos


def parallel_sections(b, a) -> tuple[np.ndarray, np.ndarray]:
    """Return ``(sos, direct)``: sections whose outputs add, and the FIR direct term.

    Raises ValueError for repeated poles (partial fractions then have higher-order
    terms that this form does not realize).
    """
    b = np.atleast_1d(np.asarray(b, dtype=float))
    a = np.atleast_1d(np.asarray(a, dtype=float))
    r, p, k = signal.residuez(b, a)
    if len(p) > 1:
        gaps = np.abs(p[:, None] - p[None, :]) + np.eye(len(p))
        if np.min(gaps) < 1e-6:
            raise ValueError("parallel form needs distinct poles; this filter has repeated poles")
    used = np.zeros(len(p), bool)
    rows = []
    reals = []
    for i in range(len(p)):
        if used[i]:
            continue
        used[i] = True
        if abs(p[i].imag) <= 1e-12 * max(1.0, abs(p[i])):
            reals.append((float(p[i].real), float(r[i].real)))
            continue
        # find the conjugate partner
        cand = [j for j in range(len(p)) if not used[j]]
        j = min(cand, key=lambda j: abs(p[j] - np.conj(p[i])))
        used[j] = True
        pi, ri = p[i], r[i]
        rows.append(
            [2 * ri.real, -2 * (ri * np.conj(pi)).real, 0.0, 1.0, -2 * pi.real, abs(pi) ** 2]
        )
    reals.sort(key=lambda t: -abs(t[0]))
    for m in range(0, len(reals) - 1, 2):
        (p1, r1), (p2, r2) = reals[m], reals[m + 1]
        # r1/(1-p1 z^-1) + r2/(1-p2 z^-1)
        rows.append([r1 + r2, -(r1 * p2 + r2 * p1), 0.0, 1.0, -(p1 + p2), p1 * p2])
    if len(reals) % 2 == 1:
        p1, r1 = reals[-1]
        rows.append([r1, 0.0, 0.0, 1.0, -p1, 0.0])
    # order: poles nearest the unit circle last, as the cascade does
    rows.sort(key=lambda s: np.max(np.abs(np.roots(s[3:]))) if s[5] or s[4] else 0.0)
    direct = np.real_if_close(np.atleast_1d(k)).astype(float) if len(k) else np.zeros(0)
    return np.array(rows, dtype=float).reshape(-1, 6), direct
