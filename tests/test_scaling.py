"""Scaling pass: l1 worst case proven and attained, l2/linf tighter, rewrites, overrides."""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest
from scipy import signal

from hwfilter.errors import FilterFileError
from hwfilter.fixed import Format
from hwfilter.formats import default_quantizer_formats, quantize_coefficients, set_quantizers
from hwfilter.linear import frequency_response, impulse_response, linear_model, linf_norm
from hwfilter.realize import realize
from hwfilter.reference import simulate_float, simulate_integer
from hwfilter.scaling import (
    int_bits_for,
    quantize_products,
    scale_section_gains,
    scaled_formats,
    scaling_pass,
    section_shifts,
)

FI = Format(16, 15)
IIR_FORMS = ["direct-form-1", "direct-form-2", "transposed-direct-form-2", "cascade", "parallel"]


def _probe(graph, node):
    """The graph with the output node reading ``node``: the integer model then shows it."""
    return graph.replace_nodes([graph.output.replace(inputs=(node,))])


def _design(form, products=False, bits=18):
    if form.startswith("fir"):
        g = realize("f", b=signal.firwin(21, 0.3), a=[1.0], form=form)
    else:
        b, a = signal.ellip(4, 0.7, 45, 0.27)
        g = realize("e", b=b, a=a, form=form)
    if products:
        g = quantize_products(g)
    return quantize_coefficients(g, bits)


def _worst_inputs(h, fmt):
    """Sign-aligned inputs ending at the last sample: maximum and minimum of ``sum h x``.

    Common practice (Jackson 1970): x[N - n] = x_max where h[n] > 0, x_min where h[n] < 0
    maximizes y[N]; the two's complement extreme x_min = -2^(B-1) LSB is one LSB larger
    in magnitude than x_max.
    """
    r = h[::-1]
    return (
        np.where(r > 0, fmt.max_int, fmt.min_int).astype(np.int64),
        np.where(r > 0, fmt.min_int, fmt.max_int).astype(np.int64),
    )


def test_int_bits_for_matches_brute_force():
    # exhaustive reference: the fewest integer bits such that every multiple of the LSB in
    # [lo, hi] lies in [min_int, max_int] * LSB
    rng = np.random.default_rng(7)
    for _ in range(300):
        bits = int(rng.integers(2, 7))
        lo = Fraction(int(rng.integers(-80, 1)), 8)
        hi = Fraction(int(rng.integers(0, 81)), 8)
        want = None
        for ib in range(-8, 12):
            q = Fraction(2) ** (ib - bits)
            fmt_lo, fmt_hi = -(2 ** (bits - 1)), 2 ** (bits - 1) - 1
            vals_lo = -((-lo) // q)  # ceil(lo / q)
            vals_hi = hi // q
            if vals_lo >= fmt_lo and vals_hi <= fmt_hi:
                want = ib
                break
        if lo == 0 and hi == 0:
            continue
        assert int_bits_for(lo, hi, bits) == want, (lo, hi, bits)
    # the one-bit subtlety: [-1, 1 - q] fits one integer bit, [-1, 1] needs two
    assert int_bits_for(-1, 1 - Fraction(1, 2**15), 16) == 1
    assert int_bits_for(-1, 1, 16) == 2


def test_first_order_l1_scaling():
    # 1/(1 - 0.9 z^-1): l1 = 10 (shared/references.md); |w| <= 10 needs 5 integer bits
    # (2^4 = 16 > 10 > 8)
    g = quantize_coefficients(realize("f1", b=[1.0], a=[1.0, -0.9], form="direct-form-2"), 16)
    r = scaling_pass(g, input_format=FI, output_format=Format(16, 11), state_bits=20, scaling="l1")
    assert r.formats["w"] == Format(20, 15)
    assert r.norms["w"] == pytest.approx(10.0, rel=1e-3)  # quantized a1 is not exactly 0.9
    assert not r.overflow_possible


@pytest.mark.parametrize("products", [False, True])
@pytest.mark.parametrize("form", IIR_FORMS + ["fir-direct", "fir-transposed"])
def test_l1_scaling_never_overflows_on_worst_case_input(form, products):
    g = _design(form, products)
    fo = Format(18, 15)  # l1 of these responses < 4, so the output cannot overflow either
    r = scaling_pass(
        g, input_format=FI, output_format=fo, state_bits=20, scaling="l1", rounding="half-even"
    )
    assert r.overflow_nodes == []
    gq = set_quantizers(g, r.formats, input_format=FI, rounding="half-even", overflow="wrap")
    model = linear_model(gq)
    for q in gq.of_kind("quantize"):
        h = impulse_response(model, "x", q.name, 1500)
        if not np.any(h):
            continue
        lo, hi = r.ranges[q.name]
        for x, bound in zip(_worst_inputs(h, FI), (hi, lo), strict=True):
            res = simulate_integer(_probe(gq, q.name), x)
            assert res.total_overflows == 0, (q.name, res.overflows)
            v = int(res.output[-1]) * 2.0**-q.format.frac
            # the proven bound is attained (it is the exact worst case, not a loose one)
            assert v / bound == pytest.approx(1.0, abs=2e-3), q.name
    # the same worst-case inputs still match the float model (quantized coefficients)
    h = impulse_response(model, "x", "out", 1500)
    x = _worst_inputs(h, FI)[0]
    y = simulate_integer(gq, x).output * 2.0**-fo.frac
    yf = simulate_float(gq, x * 2.0**-FI.frac, coefficients="quantized")
    assert np.max(np.abs(y - yf)) < 2.0**-10


def test_fir_extreme_value_needs_the_extra_bit():
    # shared/references.md: four taps of -32768 at 16-bit input need 34 bits; per product,
    # (-1) x (-1) = +1 is not representable with one integer bit
    g = quantize_products(realize("m", b=[-1.0] * 4, a=[1.0], form="fir-direct"))
    g = quantize_coefficients(g, 16)
    assert all(n.value == -32768 for n in g.of_kind("gain"))
    r = scaling_pass(g, input_format=FI, output_format=Format(20, 15), state_bits=17, scaling="l1")
    assert {r.formats[f"h{k}_q"] for k in range(4)} == {Format(17, 15)}  # 2 integer bits
    assert r.formats["y_out"] == Format(20, 15) and not r.overflow_possible
    gq = set_quantizers(g, r.formats, input_format=FI, rounding="floor", overflow="wrap")
    assert gq["acc"].format == Format(19, 15)  # four 17-bit products: exact sum range
    x = np.full(8, FI.min_int)
    res = simulate_integer(gq, x)
    assert res.total_overflows == 0 and res.output[-1] == 4 * 2**15
    # one integer bit less (override) overflows on exactly that input
    tight = scaling_pass(
        g,
        input_format=FI,
        output_format=Format(20, 15),
        state_bits=17,
        scaling="l1",
        overrides={"h0_q": Format(16, 15)},
    )
    assert tight.overridden == ["h0_q"] and tight.overflow_nodes == ["h0_q"]
    gt = set_quantizers(g, tight.formats, input_format=FI, rounding="floor", overflow="wrap")
    assert simulate_integer(gt, x).overflows["h0_q"] > 0


@pytest.mark.parametrize("form", ["direct-form-2", "cascade", "transposed-direct-form-2"])
def test_l2_and_linf_are_tighter_and_can_overflow(form):
    g = _design(form)
    fo = Format(18, 15)
    res = {
        s: scaling_pass(g, input_format=FI, output_format=fo, state_bits=20, scaling=s)
        for s in ("l1", "l2", "linf")
    }
    for name, f1 in res["l1"].formats.items():
        assert res["l2"].formats[name].int_bits <= f1.int_bits
        assert res["linf"].formats[name].int_bits <= f1.int_bits
    l2 = res["l2"]
    assert l2.overflow_possible
    # and it does overflow on the worst-case input of one of the flagged nodes
    gq = set_quantizers(g, l2.formats, input_format=FI, rounding="half-even", overflow="wrap")
    model = linear_model(gq)
    name = l2.overflow_nodes[0]
    x = _worst_inputs(impulse_response(model, "x", name, 1500), FI)[0]
    assert simulate_integer(gq, x).overflows[name] > 0


def test_none_keeps_default_formats_and_output_format():
    g = _design("cascade")
    fo = Format(12, 11)
    got = scaled_formats(g, input_format=FI, output_format=fo, state_bits=24, scaling="none")
    assert got == default_quantizer_formats(g, input_format=FI, output_format=fo, state_bits=24)
    for s in ("l1", "l2", "linf"):
        f = scaled_formats(g, input_format=FI, output_format=fo, state_bits=24, scaling=s)
        assert f["y_out"] == fo


def test_overrides_win_and_are_reported():
    g = _design("cascade")
    r = scaling_pass(
        g,
        input_format=FI,
        output_format=FI,
        state_bits=20,
        scaling="l1",
        overrides={"s1.w": Format(22, 12), "y_out": Format(18, 15)},
    )
    assert r.formats["s1.w"] == Format(22, 12) and r.formats["y_out"] == Format(18, 15)
    assert sorted(r.overridden) == ["s1.w", "y_out"]
    with pytest.raises(FilterFileError, match="override node must be a quantize node of graph"):
        scaling_pass(
            g,
            input_format=FI,
            output_format=FI,
            state_bits=20,
            scaling="l1",
            overrides={"s1.b0": Format(16, 15)},
        )
    with pytest.raises(FilterFileError, match="scaling must be one of l1, l2, linf, none"):
        scaling_pass(g, input_format=FI, output_format=FI, state_bits=20, scaling="peak")


def test_l1_on_unstable_structure_is_refused():
    # Kaiser's example (shared/references.md): the 16-bit direct form is unstable
    b, a = signal.butter(8, 0.05)
    g = quantize_coefficients(realize("k", b=b, a=a, form="direct-form-2"), 16)
    with pytest.raises(FilterFileError, match="needs a stable structure"):
        scaling_pass(g, input_format=FI, output_format=FI, state_bits=24, scaling="l1")


def test_quantize_products_rewrite():
    b, a = signal.butter(3, 0.3)
    g = realize("p", b=b, a=a, form="cascade")
    gp = quantize_products(g)
    gains = g.of_kind("gain")
    assert len(gp.of_kind("quantize")) == len(g.of_kind("quantize")) + len(gains)
    for n in gains:
        q = gp[f"{n.name}_q"]
        assert q.role == "product" and q.inputs == (n.name,) and q.section == n.section
        assert [u.name for u in gp.users(n.name)] == [q.name]
    # the float response is unchanged (scipy.signal.lfilter as reference)
    x = np.random.default_rng(1).standard_normal(300)
    np.testing.assert_allclose(simulate_float(gp, x), signal.lfilter(b, a, x), atol=1e-12)


def test_scale_section_gains_keeps_response_and_fills_words():
    sos = signal.ellip(6, 0.5, 60, 0.1, output="sos")
    g = realize("e6", b=[1.0], a=[1.0], form="cascade", sos=sos)
    shifts = section_shifts(g)
    scaled = scale_section_gains(g)
    assert sum(shifts.values()) == 0
    w = np.linspace(0, np.pi, 512)
    model = linear_model(scaled, coefficients="design")
    # the overall response is unchanged (scipy.signal.sosfreqz as the reference)
    np.testing.assert_allclose(
        frequency_response(model, "x", "out", w), signal.sosfreqz(sos, worN=w)[1], atol=1e-9
    )
    # every section but the last: peak gain from the input to its output in (1/2, 1]
    for s in scaled.sections[:-1]:
        peak = linf_norm(model, "x", f"{s}.y")[0]
        assert 0.5 < peak <= 1.0 + 1e-12, (s, peak)
    # powers of two keep the quantized mantissas; only binary points move
    q0, q1 = quantize_coefficients(g, 16), quantize_coefficients(scaled, 16)
    for n0 in q0.of_kind("gain"):
        n1 = q1[n0.name]
        assert n1.value == n0.value
        if n0.group.endswith(".b"):
            assert n1.coefficient_format.frac == n0.coefficient_format.frac - shifts[n0.section]


def test_scale_section_gains_needs_a_cascade():
    b, a = signal.butter(4, 0.3)
    with pytest.raises(ValueError, match="sections must form a chain"):
        scale_section_gains(realize("p", b=b, a=a, form="parallel"))
    with pytest.raises(ValueError, match="must have sections"):
        scale_section_gains(realize("d", b=b, a=a, form="direct-form-2"))
