"""FIR forms: the tapped delay line, the transposed form and the folded symmetric form.

For taps ``h[0..N-1]``: ``y[n] = sum_k h[k] x[n-k]``.
"""

from __future__ import annotations

import numpy as np

from ._build import Builder

__all__ = ["FIR_FORMS", "add_fir", "folding", "symmetry"]

FIR_FORMS = ("fir-direct", "fir-transposed", "fir-symmetric")


def symmetry(taps) -> tuple[int, float, int]:
    """Return ``(sign, largest asymmetry, index)``: sign +1 symmetric, -1 antisymmetric.

    The asymmetry is ``max_k |h[k] - sign * h[N-1-k]|`` for the better of the two signs.
    """
    h = np.asarray(taps, dtype=float)
    best = None
    for sign in (1, -1):
        d = np.abs(h - sign * h[::-1])
        if sign == -1 and len(h) % 2 == 1:
            d[len(h) // 2] = abs(h[len(h) // 2])  # the middle tap of an odd antisymmetric
        k = int(np.argmax(d))
        cand = (sign, float(d[k]), k)
        if best is None or cand[1] < best[1]:
            best = cand
    return best


def folding(taps) -> tuple[int, int, str | None]:
    """How ``taps`` fold for ``fir-symmetric``: ``(lead, sign, problem)``.

    Leading zeros are a pure delay of ``lead`` taps and trailing zeros are dropped; the
    taps between fold when symmetric (``sign`` +1) or antisymmetric (-1) within 1e-12 of
    the largest tap. ``problem`` says why they do not fold (``None`` when they do).
    """
    h = np.asarray(taps, dtype=float)
    lead = len(h) - len(np.trim_zeros(h, "f"))
    core = np.trim_zeros(h)
    if len(core) == 0:
        return lead, 1, None
    sign, asym, k = symmetry(core)
    if asym > 1e-12 * max(float(np.max(np.abs(core))), 1e-300):
        return (
            lead,
            sign,
            (
                f"fir-symmetric needs symmetric or antisymmetric taps; largest asymmetry "
                f"{asym:.6g} at tap {lead + k}"
            ),
        )
    return lead, sign, None


def add_fir(bld: Builder, form: str, taps, src: str) -> str:
    """Add the FIR ``form`` reading ``src``; return the (unquantized) sum's name."""
    h = [float(v) for v in taps]
    n = len(h)
    if form == "fir-direct":
        line = [src]
        for k in range(1, n):
            line.append(bld.delay(f"x{k}", line[-1]))
        acc = bld.weighted_sum(
            "acc", [(c, t, f"h{k}") for k, (c, t) in enumerate(zip(h, line))], "h"
        )
        if acc is None:
            raise ValueError("FIR taps are all zero")
        return acc
    if form == "fir-transposed":
        # y = h0 x + s1;  s_k <- h_k x + s_{k+1};  s_{N-1} <- h_{N-1} x
        sdel = [bld.delay(f"s{k}", None) for k in range(1, n)]

        def term(k):
            return [(1, bld.gain(f"h{k}", src, h[k], "h"))] if h[k] != 0.0 else []

        t0 = term(0) + ([(1, sdel[0])] if n > 1 else [])
        if not t0:
            raise ValueError("FIR taps are all zero")
        y = bld.add("acc", t0) if len(t0) > 1 else t0[0][1]
        for k in range(1, n):
            terms = term(k) + ([(1, sdel[k])] if k < n - 1 else [])
            if not terms:  # h[N-1] == 0 is trimmed by the caller; a middle zero passes on
                raise ValueError("FIR taps must not end in zero")
            nxt = bld.add(f"s{k}_sum", terms) if len(terms) > 1 else terms[0][1]
            bld.connect(sdel[k - 1], nxt)
        return y
    if form == "fir-symmetric":
        lead, sign, problem = folding(h)  # the caller has dropped trailing zeros
        if problem:
            raise ValueError(problem)
        core = h[lead:]
        m = len(core)
        line = [src]
        for k in range(1, n):
            line.append(bld.delay(f"x{k}", line[-1]))
        products = []
        for k in range(m // 2):
            if core[k] == 0.0:
                continue
            i, j = lead + k, lead + m - 1 - k
            pre = bld.add(f"p{i}", [(1, line[i]), (sign, line[j])])
            products.append((1, bld.gain(f"h{i}", pre, core[k], "h")))
        c = lead + m // 2
        if m % 2 == 1 and sign == 1 and h[c] != 0.0:
            products.append((1, bld.gain(f"h{c}", line[c], h[c], "h")))
        if not products:
            raise ValueError("FIR taps are all zero")
        return bld.add("acc", products) if len(products) > 1 else products[0][1]
    raise ValueError(f"FIR form must be one of {', '.join(FIR_FORMS)}, not {form!r}")
