"""The Amaranth filter core against the bit-exact reference model, in Amaranth's simulator.

Every realization x both overflow rules x two rounding rules x every pipelining option,
with formats narrow enough that the vectors overflow (so the wrap and saturation logic is
exercised: each case asserts the reference saw overflows), idle cycles between samples
(state must hold while ``i.valid`` is low), and the handshake timing the plan promises.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from amaranth.hdl import Fragment
from scipy import signal

from hwfilter.fixed import Format
from hwfilter.formats import default_quantizer_formats, quantize_coefficients, set_quantizers
from hwfilter.graph import Graph, Node
from hwfilter.hdl import PIPELININGS, FilterCore, plan
from hwfilter.hdl.simulate import first_mismatch, idle_pattern, run_amaranth
from hwfilter.hdl.vectors import vector_set
from hwfilter.realize import FORMS, SECTION_FORMS, realize
from hwfilter.reference import simulate_integer

SAMPLES = 120

REALIZATIONS = [
    (f, s) for f in FORMS for s in (SECTION_FORMS if f in ("cascade", "parallel") else ("",))
]


def quantized(form, section="", *, rounding="half-even", overflow="saturate", name="f"):
    """A filter with narrow states and output, so that full-scale vectors overflow."""
    if form.startswith("fir"):
        b, a = 1.6 * signal.firwin(9, 0.3), [1.0]  # l1 norm > 1: the output must overflow
    else:
        b, a = signal.butter(4, 0.2)
    g = realize(name, b=b, a=a, form=form, section=section or "direct-form-2")
    g = quantize_coefficients(g, 12)
    fi, fo = Format(12, 11), Format(10, 9)
    fmts = default_quantizer_formats(g, input_format=fi, output_format=fo, state_bits=11)
    return set_quantizers(g, fmts, input_format=fi, rounding=rounding, overflow=overflow)


def check(graph, pipelining, x, idle=None):
    ref = simulate_integer(graph, x)
    r = run_amaranth(graph, x, pipelining=pipelining, idle=idle)
    mm = first_mismatch(x, ref.output, r.output)
    assert mm is None, mm.describe()
    return ref, r


@pytest.mark.parametrize("pipelining", PIPELININGS)
@pytest.mark.parametrize("rounding", ["half-even", "floor"])
@pytest.mark.parametrize("overflow", ["wrap", "saturate"])
@pytest.mark.parametrize("form,section", REALIZATIONS, ids=[f"{f}-{s}" for f, s in REALIZATIONS])
def test_bit_exact_every_realization(form, section, overflow, rounding, pipelining):
    g = quantized(form, section, rounding=rounding, overflow=overflow)
    x = vector_set(g, SAMPLES, seed=7).words
    p = plan(g, pipelining=pipelining)
    ref, r = check(g, pipelining, x, idle=idle_pattern(3 * SAMPLES, seed=11))
    # the vectors really overflow this design, so the overflow logic was exercised
    assert ref.total_overflows > 0
    # every output appears exactly latency_cycles after its input was taken
    assert len(r.output_cycles) == len(x)
    assert np.all(r.output_cycles - r.accept_cycles == p.latency_cycles)
    # the design never takes inputs faster than its rate
    assert np.all(np.diff(r.accept_cycles) >= p.cycles_per_sample)


@pytest.mark.parametrize("rounding", ["floor", "half-up", "half-even", "toward-zero", "half-away"])
@pytest.mark.parametrize("form", ["direct-form-1", "fir-transposed"])
def test_every_rounding_rule(form, rounding):
    g = quantized(form, rounding=rounding, overflow="saturate")
    x = vector_set(g, SAMPLES, seed=3).words
    check(g, "registered-products", x)


def _quantizer_graph(in_fmt, out_fmt, rounding, overflow):
    nodes = (
        Node("x", "input", format=in_fmt),
        Node("q", "quantize", ("x",), format=out_fmt, rounding=rounding, overflow=overflow),
        Node("out", "output", ("q",), format=out_fmt),
    )
    return Graph("q", nodes).check()


def _textbook(v: int, k: int, rule: str) -> int:
    """Rounding of v / 2**k by its textbook definition, on exact fractions."""
    x = Fraction(v, 2**k)
    if rule == "floor":
        return math.floor(x)
    if rule == "half-up":
        return math.floor(x + Fraction(1, 2))
    if rule == "toward-zero":
        return math.trunc(x)
    if rule == "half-away":
        return int(math.copysign(math.floor(abs(x) + Fraction(1, 2)), x))
    return round(x)  # Python rounds a Fraction half to even (documented for round())


@pytest.mark.parametrize("rounding", ["floor", "half-up", "half-even", "toward-zero", "half-away"])
@pytest.mark.parametrize("overflow", ["wrap", "saturate"])
def test_quantizer_exhaustive(rounding, overflow):
    # every 8-bit word through one quantizer dropping 3 fraction bits into 4 bits: each
    # result checked against the textbook rounding (Fraction arithmetic) and then two's
    # complement wrap or clamping (common practice), not against our own reference model
    g = _quantizer_graph(Format(8, 6), Format(4, 3), rounding, overflow)
    x = np.arange(-128, 128)
    r = run_amaranth(g, x, pipelining="none")
    want = []
    for v in x:
        q = _textbook(int(v), 3, rounding)
        if overflow == "saturate":
            q = min(max(q, -8), 7)
        else:
            q = ((q + 8) % 16) - 8
        want.append(q)
    assert [int(v) for v in r.output] == want


@pytest.mark.parametrize("rounding", ["floor", "half-up", "half-even", "toward-zero", "half-away"])
def test_quantizer_shift_past_the_word(rounding):
    # dropping more fraction bits (11) than the word has (8): only the sign and the
    # rounding of values below one LSB are left
    g = _quantizer_graph(Format(8, 12), Format(4, 1), rounding, "saturate")
    x = np.arange(-128, 128)
    r = run_amaranth(g, x, pipelining="none")
    assert [int(v) for v in r.output] == [
        min(max(_textbook(int(v), 11, rounding), -8), 7) for v in x
    ]


def test_full_rate_and_busy_ready():
    # at full rate the input is taken every cycles_per_sample clocks, never faster
    g = quantized("cascade", "direct-form-2")
    x = vector_set(g, 40).words
    for pipelining in PIPELININGS:
        p = plan(g, pipelining=pipelining)
        _, r = check(g, pipelining, x)
        assert set(np.diff(r.accept_cycles).tolist()) == {p.cycles_per_sample}
    # a loop holding product registers needs more than one clock per sample
    assert plan(g, pipelining="registered-all-products").cycles_per_sample > 1
    assert plan(g, pipelining="registered-products").cycles_per_sample == 1


def test_reset_clears_all_state():
    # after a synchronous reset mid-stream, the outputs are those of a fresh filter
    g = quantized("direct-form-1", rounding="half-up")
    x = vector_set(g, 60, seed=5).words
    for pipelining in ("none", "registered-all-products"):
        r = run_amaranth(g, np.concatenate([x[:30], x[30:]]), pipelining=pipelining, reset_at=30)
        first = simulate_integer(g, x[:30]).output
        second = simulate_integer(g, x[30:]).output
        assert [int(v) for v in r.output] == [int(v) for v in np.concatenate([first, second])]


def test_a_wrong_design_is_caught():
    # the comparison can fail: hardware built from a graph with one coefficient one LSB
    # off must disagree with the reference of the true graph
    g = quantized("direct-form-2")
    gain = next(n for n in g.of_kind("gain") if abs(n.value) > 4)
    bad = g.replace_nodes([gain.replace(value=gain.value + 1)])
    x = vector_set(g, SAMPLES).words
    r = run_amaranth(bad, x)
    mm = first_mismatch(x, simulate_integer(g, x).output, r.output)
    assert mm is not None and mm.expected != mm.got
    assert f"sample {mm.index}" in mm.describe()


def test_ports_follow_stream_conventions():
    g = quantized("cascade", "direct-form-1")
    core = FilterCore(g)
    assert core.i.payload.shape().signed and len(core.i.payload) == g.input.format.bits
    assert core.o.payload.shape().signed and len(core.o.payload) == g.output.format.bits
    assert core.o.signature.always_ready  # the filter does not take back-pressure
    Fragment.get(core, None)  # elaborates


def test_bit_exact_symmetric_fir_after_leading_zeros():
    # a symmetric FIR behind a pure delay: folded after the leading zeros, bit-exact
    # against the integer reference model
    b = np.concatenate([[0.0, 0.0], 1.6 * signal.firwin(7, 0.3)])
    g = realize("z", b=b, a=[1.0], form="fir-symmetric")
    g = quantize_coefficients(g, 12)
    fi, fo = Format(12, 11), Format(10, 9)
    fmts = default_quantizer_formats(g, input_format=fi, output_format=fo, state_bits=11)
    g = set_quantizers(g, fmts, input_format=fi, rounding="half-even", overflow="saturate")
    x = np.random.default_rng(5).integers(-2048, 2048, 300)
    check(g, "none", x)
