"""Realizations: each turns coefficients into one signal-flow graph.

Direct forms realize the whole transfer function ``B(z)/A(z)`` as one section; the
cascade and parallel forms use second-order sections of a chosen section form; the FIR
forms take taps. Every graph ends in one quantize node ``y_out`` (role ``output``)
feeding the output node ``out``.
"""

from __future__ import annotations

import numpy as np
from scipy import signal

from ..graph import Graph
from ._build import Builder
from .direct import SECTION_FORMS, add_section
from .fir import FIR_FORMS, add_fir, folding, symmetry
from .sections import GAIN_SPREADS, ORDERS, cascade_sections, parallel_sections

__all__ = [
    "FORMS",
    "SECTION_FORMS",
    "FIR_FORMS",
    "PAIRINGS",
    "ORDERS",
    "GAIN_SPREADS",
    "realize",
    "folding",
    "symmetry",
    "cascade_sections",
    "parallel_sections",
]

FORMS = SECTION_FORMS + ("cascade", "parallel") + FIR_FORMS
#: pole-zero pairing for cascades, as in scipy.signal.zpk2sos (spelled with a hyphen)
PAIRINGS = ("nearest", "keep-odd")


def realize(
    name: str,
    *,
    b,
    a,
    form: str,
    sos=None,
    zpk=None,
    section: str = "direct-form-2",
    pairing: str = "nearest",
    order: str = "nearest-last",
    gain: str = "first",
) -> Graph:
    """Build the float signal-flow graph of one realization.

    Parameters
    ----------
    name : str
        Graph (and later Verilog module) name.
    b, a : array_like
        Transfer function in powers of z^-1 (``a[0] == 1``).
    form : str
        One of :data:`FORMS`.
    sos : array_like, optional
        Second-order sections, shape ``(n, 6)``, used as given by ``cascade``.
    zpk : tuple, optional
        Zeros, poles, gain; the cascade pairs them (more accurate than from ``b, a``).
    section, pairing, order, gain : str
        Section form for cascade and parallel; cascade pairing, section order and
        gain spread (see :mod:`hwfilter.realize.sections`).
    """
    if form not in FORMS:
        raise ValueError(f"form must be one of {', '.join(FORMS)}, not {form!r}")
    b = np.atleast_1d(np.asarray(b, dtype=float))
    a = np.atleast_1d(np.asarray(a, dtype=float))
    bld = Builder(name)
    x = bld.input()
    if form in SECTION_FORMS:
        last = add_section(bld, form, b, a, x, "", quantize_output=False)
    elif form == "cascade":
        if section not in SECTION_FORMS:
            raise ValueError(f"section must be one of {', '.join(SECTION_FORMS)}, not {section!r}")
        if sos is None:
            if pairing not in PAIRINGS:
                raise ValueError(f"pairing must be one of {', '.join(PAIRINGS)}, not {pairing!r}")
            z, p, k = zpk if zpk is not None else signal.tf2zpk(b, a)
            sos = signal.zpk2sos(z, p, k, pairing=pairing.replace("-", "_"))
        sos = cascade_sections(sos, order=order, gain=gain)
        last = x
        for i, s in enumerate(sos, start=1):
            sec = f"s{i}"
            bld.sections.append(sec)
            last = add_section(bld, section, s[:3], s[3:], last, sec, quantize_output=i < len(sos))
    elif form == "parallel":
        if section not in SECTION_FORMS:
            raise ValueError(f"section must be one of {', '.join(SECTION_FORMS)}, not {section!r}")
        rows, direct = parallel_sections(b, a)
        outs = []
        for i, s in enumerate(rows, start=1):
            sec = f"s{i}"
            bld.sections.append(sec)
            outs.append((1, add_section(bld, section, s[:3], s[3:], x, sec, False)))
        line = [x]
        for k in range(1, len(direct)):
            line.append(bld.delay(f"x{k}", line[-1]))
        for k, c in enumerate(direct):
            if c != 0.0:
                outs.append((1, bld.gain(f"d{k}", line[k], c, "d")))
        last = bld.add("acc", outs) if len(outs) > 1 else outs[0][1]
    else:
        if len(np.trim_zeros(a, "b")) != 1:
            raise ValueError(f"form {form!r} needs an FIR filter (a == [1]), not a = {list(a)!r}")
        taps = np.trim_zeros(b / a[0], "b")
        if len(taps) == 0:
            raise ValueError("FIR taps are all zero")
        last = add_fir(bld, form, taps, x)
    y = bld.quantize("y_out", last, "output")
    bld.output(y)
    return bld.graph(form, section if form in ("cascade", "parallel") else "")
