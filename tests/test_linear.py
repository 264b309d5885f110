"""State-space extraction and norms, checked against scipy.signal and published values."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import signal

from hwfilter.formats import quantize_coefficients
from hwfilter.graph import Graph, Node
from hwfilter.linear import (
    frequency_response,
    impulse_response,
    l1_norm,
    l1_parts,
    l2_norm,
    linear_model,
    linf_norm,
    noise_gains,
    poles,
    state_space,
    transfer_function,
)
from hwfilter.realize import realize
from hwfilter.reference import simulate_float

IIR_FORMS = ["direct-form-1", "direct-form-2", "transposed-direct-form-2", "cascade", "parallel"]
FIR_FORMS = ["fir-direct", "fir-transposed", "fir-symmetric"]


def _impulse(n):
    x = np.zeros(n)
    x[0] = 1.0
    return x


def _probe(graph, node):
    """The same graph with the output node reading ``node`` (for float simulation)."""
    return graph.replace_nodes([graph.output.replace(inputs=(node,))])


def _inject(graph, qname):
    """A graph whose input drives only an error injection at quantize node ``qname``.

    The quantize node becomes ``q.input + x``; every original reader of ``x`` reads
    ``0 * x`` instead, so the impulse response is the one from the injection point.
    """
    xname = graph.input.name
    changed = []
    for n in graph.nodes:
        if xname in n.inputs:
            changed.append(n.replace(inputs=tuple("zero" if s == xname else s for s in n.inputs)))
    q = graph[qname]
    changed.append(Node(qname, "add", (q.inputs[0], xname), signs=(1, 1), section=q.section))
    g = graph.replace_nodes(changed)
    zero = Node("zero", "gain", (xname,), coefficient=0.0, group="zero")
    return Graph(g.name, g.nodes + (zero,), g.form).check()


@pytest.mark.parametrize("form", IIR_FORMS)
def test_state_space_matches_scipy_design(form):
    # scipy.signal.lfilter / freqz are the reference for the transfer function B/A
    b, a = signal.cheby1(4, 1.0, 0.3)
    g = realize("c4", b=b, a=a, form=form)
    A, B, C, D = state_space(g, coefficients="design")
    h = signal.dlti(A, B, C, D, dt=1).impulse(n=200)[1][0][:, 0]
    np.testing.assert_allclose(h, signal.lfilter(b, a, _impulse(200)), atol=1e-12)
    model = linear_model(g, coefficients="design")
    w = np.linspace(0, np.pi, 257)
    np.testing.assert_allclose(
        frequency_response(model, "x", "out", w), signal.freqz(b, a, worN=w)[1], atol=1e-10
    )


@pytest.mark.parametrize("form", FIR_FORMS)
def test_fir_state_space_matches_taps(form):
    taps = signal.firwin(15, 0.3)
    g = realize("fir", b=taps, a=[1.0], form=form)
    model = linear_model(g, coefficients="design")
    np.testing.assert_allclose(impulse_response(model, "x", "out", 20)[:15], taps, atol=1e-15)
    w = np.linspace(0, np.pi, 101)
    np.testing.assert_allclose(
        frequency_response(model, "x", "out", w), signal.freqz(taps, 1, worN=w)[1], atol=1e-12
    )


@pytest.mark.parametrize("form", IIR_FORMS + FIR_FORMS)
def test_every_node_and_injection_matches_float_simulation(form):
    # independent check: the generated float simulator (hwfilter.reference), probing
    # every node and injecting an impulse at every quantize node
    if form in FIR_FORMS:
        b, a = signal.firwin(9, 0.25), [1.0]
    else:
        b, a = signal.butter(3, 0.2)
    g = quantize_coefficients(realize("p", b=b, a=a, form=form), 12)
    model = linear_model(g)
    n = 60
    for node in g.nodes:
        if node.kind == "output":
            continue
        want = simulate_float(_probe(g, node.name), _impulse(n), coefficients="quantized")
        got = impulse_response(model, "x", node.name, n)
        np.testing.assert_allclose(got, want, atol=1e-12, err_msg=node.name)
    for q in g.of_kind("quantize"):
        want = simulate_float(_inject(g, q.name), _impulse(n), coefficients="quantized")
        got = impulse_response(model, q.name, "out", n)
        np.testing.assert_allclose(got, want, atol=1e-12, err_msg=q.name)


def test_norm_check_values_first_order():
    # Jackson (1970) via shared/references.md: 1/(1 - 0.9 z^-1) has l1 = 10,
    # L2 = 1/sqrt(0.19) = 2.294157..., L-infinity = 10 (at w = 0); closed forms
    # sum 0.9^n = 10 and sum 0.81^n = 1/0.19
    g = realize("f1", b=[1.0], a=[1.0, -0.9], form="direct-form-2")
    m = linear_model(g)
    assert l1_norm(m, "x", "out") == pytest.approx(10.0, rel=1e-9)
    assert l2_norm(m, "x", "out") == pytest.approx(1 / np.sqrt(0.19), rel=1e-12)
    peak, w = linf_norm(m, "x", "out")
    assert peak == pytest.approx(10.0, rel=1e-12)
    assert w == pytest.approx(0.0, abs=1e-9)


def test_norm_check_values_butter2():
    # shared/references.md (Jackson 1970 [M]): butter(2, 0.25) has l1 = 1.118055,
    # L2 = 0.514099, Linf = 1.0; the direct form II internal node 1/A(z) has L2 = 1.5
    # exactly and Linf = 3*sqrt(3)/2. Reproduced here: scipy butter gives
    # a = [1, -2*sqrt(2)/3, 1/3]; sum h^2 of 1/A by the closed form
    # (1 + a2) / ((1 - a2) ((1 + a2)^2 - a1^2)) = (4/3) / ((2/3)(16/9 - 8/9)) = 2.25.
    b, a = signal.butter(2, 0.25)
    g = realize("b2", b=b, a=a, form="direct-form-2")
    m = linear_model(g, coefficients="design")
    assert l1_norm(m, "x", "out") == pytest.approx(1.118055, abs=5e-7)
    assert l2_norm(m, "x", "out") == pytest.approx(0.514099, abs=5e-7)
    assert linf_norm(m, "x", "out")[0] == pytest.approx(1.0, abs=1e-12)
    assert l2_norm(m, "x", "w") == pytest.approx(1.5, abs=1e-12)
    assert linf_norm(m, "x", "w")[0] == pytest.approx(3 * np.sqrt(3) / 2, rel=1e-12)
    # cross-check l1 against a long direct sum (scipy.signal.lfilter)
    h = signal.lfilter(b, a, _impulse(4000))
    assert l1_norm(m, "x", "out") == pytest.approx(np.abs(h).sum(), rel=1e-9)


def test_l1_tail_bound_is_an_upper_bound():
    # the tail bound is rigorous: the reported l1 is >= the true sum, and close to it
    b, a = signal.cheby1(2, 0.5, 0.02)  # poles near the unit circle: a long tail
    g = realize("slow", b=b, a=a, form="direct-form-2")
    m = linear_model(g, coefficients="design")
    parts = l1_parts(m, "x", ["out", "w"], rtol=1e-6)
    h = impulse_response(m, "x", ["out", "w"], 200000)
    true = np.abs(h).sum(axis=1)
    assert np.all(parts.l1 >= true * (1 - 1e-12))
    assert np.all(parts.l1 <= true * (1 + 2e-6))
    assert not parts.exact and max(parts.tail) > 0


def test_fir_l1_is_exact():
    # four taps of -1 (the word-growth corner case of shared/references.md): the exact
    # positive and negative sums come back as Fractions, with no tail
    g = quantize_coefficients(realize("m", b=[-1.0] * 4, a=[1.0], form="fir-direct"), 16)
    parts = l1_parts(linear_model(g), "x", ["acc"])
    assert parts.exact and parts.tail == [0.0]
    assert parts.positive[0] == 0 and parts.negative[0] == -4


def test_poles_are_eig_of_quantized_structure():
    # eig(A) of the design structure equals numpy's roots of the denominator
    b, a = signal.butter(3, 0.3)
    for form in IIR_FORMS:
        g = realize("p3", b=b, a=a, form=form)
        p = np.sort_complex(poles(g, coefficients="design"))
        p = p[np.abs(p) > 1e-9]  # direct form I also has zero poles from the x delays
        np.testing.assert_allclose(p, np.sort_complex(np.roots(a)), atol=1e-7)


def test_noise_gain_first_order():
    # O&S [M] via shared/references.md: y[n] = Q(a y[n-1]) + x[n] has noise gain
    # 1 / (1 - a^2) for the product quantizer; a direct form II state quantizer sees
    # the same loop
    a1 = 0.8731
    g = realize("f1", b=[1.0], a=[1.0, -a1], form="direct-form-2")
    gains = noise_gains(linear_model(g, coefficients="design"))
    assert gains["w"] == pytest.approx(1 / (1 - a1**2), rel=1e-12)
    assert gains["y_out"] == 1.0


def test_noise_gain_second_order_all_pole():
    # O&S [M] via shared/references.md: poles r e^{+-j theta}:
    # sum h^2 = ((1 + r^2)/(1 - r^2)) / (1 + r^4 - 2 r^2 cos 2 theta)
    r, th = 0.9317, 0.6133
    a = [1.0, -2 * r * np.cos(th), r * r]
    want = ((1 + r**2) / (1 - r**2)) / (1 + r**4 - 2 * r**2 * np.cos(2 * th))
    for form in ["direct-form-1", "direct-form-2"]:
        g = realize("ap", b=[1.0], a=a, form=form)
        gains = noise_gains(linear_model(g, coefficients="design"))
        state = "y" if form == "direct-form-1" else "w"
        assert gains[state] == pytest.approx(want, rel=1e-10)


@st.composite
def _stable_filters(draw):
    order = draw(st.integers(1, 6))
    radii = draw(st.lists(st.floats(0.0, 0.97), min_size=order, max_size=order))
    angles = draw(st.lists(st.floats(0.0, np.pi), min_size=order, max_size=order))
    zeros = draw(st.lists(st.floats(-1.5, 1.5), min_size=order, max_size=order))
    p = [r * np.exp(1j * t) for r, t in zip(radii, angles, strict=True)]
    p = p + [np.conj(v) for v in p if abs(v.imag) > 1e-9]
    a = np.real(np.poly(p))
    b = np.real(np.poly(zeros))
    return b, a


@settings(max_examples=40, deadline=None)
@given(_stable_filters())
def test_norm_ordering_on_random_stable_filters(ba):
    # Jackson (1970) via shared/references.md: L2 <= L-infinity <= l1 for every stable filter
    b, a = ba
    g = realize("r", b=b, a=a, form="direct-form-2")
    m = linear_model(g, coefficients="design")
    l1 = l1_norm(m, "x", "out")
    l2 = l2_norm(m, "x", "out")
    li = linf_norm(m, "x", "out")[0]
    assert l2 <= li * (1 + 1e-9) + 1e-12
    assert li <= l1 * (1 + 1e-9) + 1e-12


def test_bad_names_raise():
    g = realize("f1", b=[1.0], a=[1.0, -0.5], form="direct-form-2")
    m = linear_model(g)
    with pytest.raises(ValueError, match="source must be the input or a quantize node"):
        l2_norm(m, "w1", "out")
    with pytest.raises(ValueError, match="node must be in graph 'f1', not 'nope'"):
        l2_norm(m, "x", "nope")
    with pytest.raises(ValueError, match="coefficients must be one of"):
        linear_model(g, coefficients="exact")


def test_transfer_function_to_output_and_internal_node():
    # scipy.signal.ss2tf on the extracted model gives back B/A (and 1/A at the direct
    # form II internal node w)
    b, a = signal.cheby1(3, 1.0, 0.35)
    g = realize("c3", b=b, a=a, form="direct-form-2")
    m = linear_model(g, coefficients="design")
    num, den = transfer_function(m, "x", "out")
    np.testing.assert_allclose(den, a, atol=1e-12)
    np.testing.assert_allclose(num, b, atol=1e-12)
    num, den = transfer_function(m, "x", "w")
    np.testing.assert_allclose(den, a, atol=1e-12)
    np.testing.assert_allclose(num, [1.0, 0, 0, 0], atol=1e-12)
    assert transfer_function(m, "y_out", "out")[0].tolist() == [1.0]
