"""The hardware plan: stages, latency, rate, registers, loops, names, bad options."""

from __future__ import annotations

import pytest
from scipy import signal

from hwfilter.fixed import Format
from hwfilter.formats import default_quantizer_formats, quantize_coefficients, set_quantizers
from hwfilter.hdl import PIPELININGS, plan
from hwfilter.hdl.flipflops import flip_flop_count
from hwfilter.hdl.plan import constant_low_bits, is_multiplier, loop_nodes, signal_names
from hwfilter.realize import realize


def quantized(form, section="direct-form-2", order=4, taps=None, name="f"):
    if taps is not None:
        b, a = taps, [1.0]
    else:
        b, a = signal.butter(order, 0.2)
    g = realize(name, b=b, a=a, form=form, section=section)
    g = quantize_coefficients(g, 16)
    f = Format(16, 15)
    fmts = default_quantizer_formats(g, input_format=f, output_format=f, state_bits=20)
    return set_quantizers(g, fmts, input_format=f, rounding="half-even", overflow="saturate")


def test_none_is_one_sample_per_clock_with_an_output_register():
    g = quantized("cascade")
    p = plan(g)
    assert (p.latency_cycles, p.cycles_per_sample) == (1, 1)
    assert set(p.stages.values()) == {0}
    assert p.register_bits["state"] == sum(d.format.bits for d in g.delays)
    assert p.register_bits["pipeline"] == g.output.format.bits  # the output register only
    assert p.register_bits["control"] == 1  # o.valid


def test_fir_products_are_registered_and_the_tree_follows():
    # direct FIR: every tap multiplier is feed-forward, one register stage after it
    taps = signal.firwin(11, 0.3)
    g = quantized("fir-direct", taps=taps)
    p = plan(g, pipelining="registered-products")
    multipliers = {n.name for n in g.of_kind("gain") if is_multiplier(n)}
    assert multipliers and p.registered == frozenset(multipliers)
    assert (p.latency_cycles, p.cycles_per_sample) == (2, 1)
    # every product register holds its full product word; nothing needs balancing
    assert all(r.kind in ("product", "output") for r in p.pipeline_registers)
    assert p.register_bits["pipeline"] == sum(g[m].format.bits for m in multipliers) + 16


def test_loop_products_stay_combinational_at_one_sample_per_clock():
    # direct form II: a1, a2 feed back into w (a loop through the delays), b0..b2 do not
    g = quantized("direct-form-2", order=2)
    loops = loop_nodes(g)
    assert {"a1", "a2", "w_sum", "w", "w1", "w2"} <= loops
    assert not {"b0", "b1", "b2", "y_sum", "x"} & loops
    p = plan(g, pipelining="registered-products")
    assert p.registered == {"b0", "b1", "b2"} & {n.name for n in g.nodes if is_multiplier(n)}
    assert p.cycles_per_sample == 1


@pytest.mark.parametrize("form", ["direct-form-1", "direct-form-2", "transposed-direct-form-2"])
def test_registered_loops_need_two_clocks_per_sample(form):
    # one register in a loop of one delay: the bound R <= (cps - 1) * D gives cps = 2
    g = quantized(form, order=2)
    p = plan(g, pipelining="registered-all-products")
    assert p.cycles_per_sample == 2
    assert p.registered == {n.name for n in g.nodes if is_multiplier(n)}


def test_every_option_on_every_form_schedules():
    for form in ("cascade", "parallel", "fir-transposed", "fir-symmetric"):
        kw = {"taps": signal.firwin(8, 0.4)} if form.startswith("fir") else {}
        g = quantized(form, **kw)
        for pipelining in PIPELININGS:
            p = plan(g, pipelining=pipelining)
            assert p.latency_cycles >= 1 and p.cycles_per_sample >= 1
            assert p.total_register_bits == sum(p.register_bits.values())
            c = flip_flop_count(g, p)
            assert c.constant + c.unused + c.duplicate + c.kept == p.total_register_bits


def test_signal_names_are_unique_identifiers():
    g = quantized("cascade")
    names = signal_names(g)
    assert names["s1.w"] == "s1_w" and names["s2.b1"] == "s2_b1"
    assert len(set(names.values())) == len(names)
    assert all(v.isidentifier() for v in names.values())


def test_constant_low_bits_follow_coefficients():
    g = quantized("cascade")
    zeros = constant_low_bits(g)
    for n in g.of_kind("gain"):
        v = abs(n.value)
        # a product by c = c' 2**t (c' odd) of a word without known zeros has t zero bits
        if v and zeros[n.inputs[0]] == 0:
            assert zeros[n.name] == (v & -v).bit_length() - 1


def test_bad_options():
    g = quantized("cascade")
    with pytest.raises(ValueError, match="pipelining must be one of none, registered-products"):
        plan(g, pipelining="fast")
    unquantized = realize("f", b=[1.0, 0.5], a=[1.0], form="fir-direct")
    with pytest.raises(ValueError, match="must be quantized"):
        plan(unquantized)
