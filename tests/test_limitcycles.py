"""Limit cycles and overflow oscillations against brute force and textbook results."""

from __future__ import annotations

import math

import pytest
from scipy import signal

from hwfilter.fixed import Format, requantize
from hwfilter.formats import quantize_coefficients, set_quantizers
from hwfilter.limitcycles import emt_condition, limit_cycles, overflow_oscillations
from hwfilter.realize import realize

FI = Format(16, 15)


def _section(a, form, state_fmt, rounding, overflow, b=(0.25,)):
    g = realize("s", b=list(b), a=list(a), form=form)
    g = quantize_coefficients(g, 12)
    fm = {q.name: state_fmt for q in g.of_kind("quantize")}
    fm["y_out"] = FI
    return set_quantizers(g, fm, input_format=FI, rounding=rounding, overflow=overflow)


def _brute_force(a_words, coef_frac, fmt, rounding, overflow):
    """Every cycle of y[n] = Q(-(a1 y[n-1] + a2 y[n-2])) over the whole state space.

    Independent of the graph code: integer coefficients ``a_words`` with ``coef_frac``
    fraction bits, hwfilter.fixed.requantize for the rounding and overflow rules.
    Returns (largest |y| on a nonzero cycle, number of distinct nonzero cycles).
    """
    lo, hi = fmt.min_int, fmt.max_int
    size = hi - lo + 1
    a1, a2 = a_words

    def succ(i):
        y1, y2 = i % size + lo, i // size + lo
        y = requantize(-(a1 * y1 + a2 * y2), fmt.frac + coef_frac, fmt, rounding, overflow)
        return (y - lo) + size * (y1 - lo)

    n = size * size
    nxt = [succ(i) for i in range(n)]
    color = [0] * n  # 0 new, 1 on the current path, 2 done
    best, count = 0, 0
    for s in range(n):
        path = []
        i = s
        while color[i] == 0:
            color[i] = 1
            path.append(i)
            i = nxt[i]
        if color[i] == 1:  # a new cycle starting at i
            cyc = path[path.index(i) :]
            amp = max(max(abs(c % size + lo), abs(c // size + lo)) for c in cyc)
            if amp > 0:
                best = max(best, amp)
                count += 1
        for p in path:
            color[p] = 2
    return best, count


@pytest.mark.parametrize(
    "a,rounding,overflow",
    [
        ((1.0, -1.5341, 0.8127), "half-even", "saturate"),
        ((1.0, -1.5341, 0.8127), "floor", "wrap"),
        ((1.0, 1.1173, 0.7071), "half-up", "wrap"),
        ((1.0, -0.3127, -0.4419), "half-away", "saturate"),
        ((1.0, -1.8313, 0.9377), "toward-zero", "wrap"),
    ],
)
@pytest.mark.parametrize("form", ["direct-form-1", "direct-form-2"])
def test_search_matches_brute_force_on_small_words(form, a, rounding, overflow):
    # Munson, Strickland & Walker (1984) via shared/references.md: check the search
    # against an exhaustive search of the state space (here an independent one)
    fmt = Format(7, 4)
    g = _section(a, form, fmt, rounding, overflow)
    gains = {n.name: n for n in g.of_kind("gain") if n.group.endswith("a")}
    coef_frac = gains["a1"].coefficient_format.frac
    # both forms keep a_k in the gain and subtract the product
    words = (gains["a1"].value, gains["a2"].value)
    want_amp, want_count = _brute_force(words, coef_frac, fmt, rounding, overflow)
    (res,) = limit_cycles(g)
    assert res.search == "exhaustive-space"
    assert (res.amplitude_lsb, res.cycles_found) == (want_amp, want_count)


@pytest.mark.parametrize("a1", [0.8731, -0.8731, 0.9613, -0.9613, 0.6247])
@pytest.mark.parametrize("rounding", ["half-even", "half-away", "half-up"])
def test_first_order_deadband(a1, rounding):
    # shared/references.md: first-order deadband with rounding reaches
    # floor(1 / (2 (1 - |a|))) LSB (no ties with these coefficients)
    g = _section((1.0, -a1), "direct-form-1", Format(16, 13), rounding, "saturate", b=(1.0,))
    aq = g["a1"].value * 2.0 ** -g["a1"].coefficient_format.frac
    (res,) = limit_cycles(g)
    assert res.amplitude_lsb == math.floor(1 / (2 * (1 - abs(aq))))
    assert res.period == (1 if a1 > 0 else 2)


def test_magnitude_truncation_has_no_limit_cycles():
    # common practice: rounding toward zero shrinks every state, so no zero-input cycle
    for a in [(1.0, -0.9613), (1.0, -1.5341, 0.8127)]:
        g = _section(a, "direct-form-2", Format(16, 13), "toward-zero", "saturate")
        assert limit_cycles(g)[0].amplitude_lsb == 0


@pytest.mark.parametrize("form", ["direct-form-1", "direct-form-2", "transposed-direct-form-2"])
def test_granular_box_holds_every_cycle(form):
    # wide words: the search covers only the granular box; an independent brute force
    # over a three times larger box finds nothing bigger (saturation: no overflow cycles)
    a = (1.0, -1.7127, 0.8851)
    g = _section(a, form, Format(18, 14), "half-even", "saturate")
    (res,) = limit_cycles(g)
    assert res.search == "exhaustive-box"
    assert res.amplitude_lsb > 0
    assert all(
        abs(v) <= res.box[s] for row in res.cycle for s, v in zip(res.states, row, strict=True)
    )
    if form == "transposed-direct-form-2":
        return
    gains = {n.name: n for n in g.of_kind("gain") if n.group.endswith("a")}
    a1w, a2w = gains["a1"].value, gains["a2"].value
    frac = gains["a1"].coefficient_format.frac
    fmt = g[res.states[0]].format
    r = 3 * max(res.box.values())
    best = 0
    for y1 in range(-r, r + 1):
        for y2 in range(-r, r + 1):
            s = (y1, y2)
            seen = {}
            for t in range(400):
                if s in seen:
                    cyc = list(seen)[seen[s] :]
                    best = max(best, max(max(abs(u), abs(v)) for u, v in cyc))
                    break
                seen[s] = t
                y = requantize(
                    -(a1w * s[0] + a2w * s[1]), fmt.frac + frac, fmt, "half-even", "saturate"
                )
                s = (y, s[0])
    assert best == res.amplitude_lsb


def test_bounded_search_is_a_lower_bound():
    a = (1.0, -1.7127, 0.8851)
    g = _section(a, "direct-form-2", Format(18, 14), "half-even", "saturate")
    (full,) = limit_cycles(g)
    (part,) = limit_cycles(g, max_points=64, bounded_lanes=2048)
    assert part.search == "bounded"
    assert 0 < part.amplitude_lsb <= full.amplitude_lsb


@pytest.mark.parametrize("form", ["direct-form-1", "direct-form-2", "transposed-direct-form-2"])
def test_overflow_oscillation_with_wrap_not_with_saturation(form):
    # Ebert, Mazo & Taylor (1969) via shared/references.md: with wrap-around a
    # second-order section with |a1| + |a2| >= 1 can oscillate at full scale;
    # saturation suppresses it; |a1| + |a2| < 1 rules it out
    a = (1.0, -1.5341, 0.8127)
    wrap = _section(a, form, Format(20, 17), "half-even", "wrap")
    (res,) = overflow_oscillations(wrap)
    assert res.condition is False and res.found
    assert res.amplitude_lsb > 2**17 and res.period > 0
    (sat,) = overflow_oscillations(_section(a, form, Format(20, 17), "half-even", "saturate"))
    assert sat.found is False
    safe = _section((1.0, -0.4127, 0.3813), form, Format(20, 17), "half-even", "wrap")
    (ok,) = overflow_oscillations(safe)
    assert ok.condition is True and ok.found is False


def test_sections_of_a_cascade_are_searched_separately():
    b, a = signal.ellip(4, 0.5, 40, 0.2)
    g = realize("c", b=b, a=a, form="cascade")
    g = quantize_coefficients(g, 16)
    fm = {q.name: Format(18, 15) for q in g.of_kind("quantize")}
    fm["y_out"] = FI
    g = set_quantizers(g, fm, input_format=FI, rounding="half-even", overflow="wrap")
    res = limit_cycles(g)
    assert [r.section for r in res] == list(g.sections)
    assert all(set(r.states) == {f"{r.section}.w1", f"{r.section}.w2"} for r in res)
    assert [emt_condition(g, s) for s in g.sections] == [
        r.condition for r in overflow_oscillations(g)
    ]


def test_loops_outside_sections_are_searched_too():
    import dataclasses

    b, a = signal.ellip(4, 0.5, 40, 0.2)
    g = quantize_coefficients(realize("c", b=b, a=a, form="cascade"), 16)
    fm = {q.name: Format(18, 15) for q in g.of_kind("quantize")}
    fm["y_out"] = FI
    g = set_quantizers(g, fm, input_format=FI, rounding="half-even", overflow="wrap")
    # forget that s2 is a section: its loop must still be searched, as group ""
    loose = g.replace_nodes([n.replace(section="") for n in g.nodes if n.section == "s2"])
    loose = dataclasses.replace(loose, sections=("s1",))
    res = {r.section: r for r in limit_cycles(loose)}
    assert set(res) == {"s1", ""}
    assert set(res[""].states) == {"s2.w1", "s2.w2"}
    assert res[""].amplitude_lsb == limit_cycles(g)[1].amplitude_lsb


@pytest.mark.parametrize("rounding,overflow", [("half-even", "saturate"), ("floor", "wrap")])
def test_transposed_form_matches_brute_force(rounding, overflow):
    # an independent model of the transposed direct form II with zero input, in exact
    # rationals: y = Q(s1), s1' = Q(-a1 y + s2), s2' = Q(-a2 y) (hwfilter.fixed.requantize)
    from fractions import Fraction

    fmt = Format(7, 4)
    g = _section((1.0, -1.5341, 0.8127), "transposed-direct-form-2", fmt, rounding, overflow)
    a1 = Fraction(g["a1"].value, 2 ** g["a1"].coefficient_format.frac)
    a2 = Fraction(g["a2"].value, 2 ** g["a2"].coefficient_format.frac)
    big = 60  # fraction bits enough to hold every exact sum as an integer

    def q(v):
        return requantize(int(v * 2**big), big, fmt, rounding, overflow)

    lo, size = fmt.min_int, 2**fmt.bits
    lsb = Fraction(1, 2**fmt.frac)

    def step(s):
        s1, s2 = s
        y = q(s1 * lsb)
        return (q(-a1 * y * lsb + s2 * lsb), q(-a2 * y * lsb))

    best, cycles, done = 0, set(), {}
    for s1 in range(lo, lo + size):
        for s2 in range(lo, lo + size):
            path, s = [], (s1, s2)
            while s not in done and s not in path:
                path.append(s)
                s = step(s)
            if s in path:  # a new cycle
                cyc = path[path.index(s) :]
                amp = max(max(abs(u), abs(v)) for u, v in cyc)
                if amp:
                    best = max(best, amp)
                    cycles.add(frozenset(cyc))
            for p in path:
                done[p] = True
    (res,) = limit_cycles(g)
    assert res.search == "exhaustive-space"
    assert (res.amplitude_lsb, res.cycles_found) == (best, len(cycles))
