"""Direct forms I and II and the transposed direct form II, of any order.

Each builder takes numerator ``b`` and denominator ``a`` (powers of z^-1, ``a[0] == 1``,
the scipy ``lfilter`` convention)::

    a[0] y[n] = b[0] x[n] + ... + b[M] x[n-M] - a[1] y[n-1] - ... - a[N] y[n-N]

and adds the nodes of one section to a :class:`Builder`, reading signal ``src``. The
returned name is the section's output signal. Quantize nodes sit where a word must be
stored: every state that feeds back (role ``state``) and, when ``quantize_output`` is
set, the section output (role ``section-output``). Exactly-zero coefficients make no
gain (a first-order section has no b2/a2 multipliers).
"""

from __future__ import annotations

import numpy as np

from ._build import Builder

__all__ = ["SECTION_FORMS", "add_section", "trim"]

SECTION_FORMS = ("direct-form-1", "direct-form-2", "transposed-direct-form-2")


def trim(b, a):
    """Drop trailing zeros of b and a (keeping b[0] and a[0]); return float lists."""
    b = [float(v) for v in np.atleast_1d(b)]
    a = [float(v) for v in np.atleast_1d(a)]
    assert a[0] == 1.0, "normalize a[0] to 1 first"
    while len(b) > 1 and b[-1] == 0.0:
        b.pop()
    while len(a) > 1 and a[-1] == 0.0:
        a.pop()
    return b, a


def _p(prefix: str) -> str:
    return f"{prefix}." if prefix else ""


def add_section(
    bld: Builder, form: str, b, a, src: str, prefix: str = "", quantize_output: bool = True
) -> str:
    """Add one section of ``form`` (see :data:`SECTION_FORMS`); return its output name."""
    b, a = trim(b, a)
    if form == "direct-form-1":
        return _direct_form_1(bld, b, a, src, prefix)
    if form == "direct-form-2":
        return _direct_form_2(bld, b, a, src, prefix, quantize_output)
    if form == "transposed-direct-form-2":
        return _transposed_direct_form_2(bld, b, a, src, prefix, quantize_output)
    raise ValueError(f"section form must be one of {', '.join(SECTION_FORMS)}, not {form!r}")


def _direct_form_1(bld, b, a, src, prefix):
    p, sec = _p(prefix), prefix
    taps = [src]
    for k in range(1, len(b)):
        taps.append(bld.delay(f"{p}x{k}", taps[-1], sec))
    if len(a) == 1:  # no feedback: a plain FIR section
        acc = bld.weighted_sum(
            f"{p}acc", [(c, t, f"{p}b{k}") for k, (c, t) in enumerate(zip(b, taps))], f"{p}b", sec
        )
        return bld.quantize(f"{p}y", acc, "section-output", sec)
    # the output y is stored (it feeds back), so it is quantized to a state word
    ydel = [bld.delay(f"{p}y{k}", None, sec) for k in range(1, len(a))]
    terms = [(c, t, f"{p}b{k}") for k, (c, t) in enumerate(zip(b, taps))]
    terms += [(-c, t, f"{p}a{k}") for k, (c, t) in enumerate(zip(a[1:], ydel), start=1)]
    acc = _mixed_sum(bld, f"{p}acc", terms, p, sec)
    y = bld.quantize(f"{p}y", acc, "state", sec)
    prev = y
    for name in ydel:
        bld.connect(name, prev)
        prev = name
    return y


def _mixed_sum(bld, name, terms, p, sec):
    """Sum of b (numerator) and a (denominator) products, each in its own group.

    Denominator terms are entered with the negated coefficient's sign carried by the add
    (the gain holds +a_k, the add subtracts), so coefficient values match the file.
    """
    products = []
    for c, sig, gname in terms:
        if c == 0.0:
            continue
        if gname.startswith(f"{p}a"):
            products.append((-1, bld.gain(gname, sig, -c, f"{p}a", sec)))
        else:
            products.append((1, bld.gain(gname, sig, c, f"{p}b", sec)))
    if len(products) == 1 and products[0][0] == 1:
        return products[0][1]
    return bld.add(name, products, sec)


def _direct_form_2(bld, b, a, src, prefix, quantize_output):
    p, sec = _p(prefix), prefix
    order = max(len(a), len(b)) - 1
    wdel = [bld.delay(f"{p}w{k}", None, sec) for k in range(1, order + 1)]
    if len(a) > 1:
        fb = [(1, src)] + [
            (-1, bld.gain(f"{p}a{k}", wdel[k - 1], a[k], f"{p}a", sec))
            for k in range(1, len(a))
            if a[k] != 0.0
        ]
        wsum = bld.add(f"{p}w_sum", fb, sec) if len(fb) > 1 else src
        w = bld.quantize(f"{p}w", wsum, "state", sec)
    else:
        w = src
    prev = w
    for name in wdel:
        bld.connect(name, prev)
        prev = name
    taps = [w] + wdel
    acc = bld.weighted_sum(
        f"{p}y_sum", [(c, t, f"{p}b{k}") for k, (c, t) in enumerate(zip(b, taps))], f"{p}b", sec
    )
    return bld.quantize(f"{p}y", acc, "section-output", sec) if quantize_output else acc


def _transposed_direct_form_2(bld, b, a, src, prefix, quantize_output):
    p, sec = _p(prefix), prefix
    order = max(len(a), len(b)) - 1
    b = b + [0.0] * (order + 1 - len(b))
    a = a + [0.0] * (order + 1 - len(a))
    sdel = [bld.delay(f"{p}s{k}", None, sec) for k in range(1, order + 1)]
    b0 = [(1, bld.gain(f"{p}b0", src, b[0], f"{p}b", sec))] if b[0] != 0.0 else []
    ysum_terms = b0 + ([(1, sdel[0])] if order else [])
    if not ysum_terms:
        raise ValueError(f"section {prefix or 'filter'} has an identically zero output")
    ysum = bld.add(f"{p}y_sum", ysum_terms, sec) if len(ysum_terms) > 1 else ysum_terms[0][1]
    feedback = order > 0 and any(c != 0.0 for c in a[1:])
    if feedback:
        y = bld.quantize(f"{p}y", ysum, "state", sec)
    else:
        y = bld.quantize(f"{p}y", ysum, "section-output", sec) if quantize_output else ysum
    for k in range(1, order + 1):
        terms = []
        if b[k] != 0.0:
            terms.append((1, bld.gain(f"{p}b{k}", src, b[k], f"{p}b", sec)))
        if a[k] != 0.0:
            terms.append((-1, bld.gain(f"{p}a{k}", y, a[k], f"{p}a", sec)))
        if k < order:
            terms.append((1, sdel[k]))
        single = len(terms) == 1 and terms[0][0] == 1
        nxt = terms[0][1] if single else bld.add(f"{p}s{k}_sum", terms, sec)
        if feedback:
            nxt = bld.quantize(f"{p}s{k}_next", nxt, "state", sec)
        bld.connect(sdel[k - 1], nxt)
    return y
