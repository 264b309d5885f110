"""Exact stability verdicts: Schur-Cohn in Fractions, Kaiser's direct-form sensitivity."""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import signal

from hwfilter.fixed import Format
from hwfilter.formats import quantize_coefficients
from hwfilter.linear import linear_model
from hwfilter.realize import realize
from hwfilter.stability import (
    block_polynomials,
    characteristic_polynomial,
    radius_bracket,
    schur_cohn_stable,
    stability,
)

DIRECT = ["direct-form-1", "direct-form-2", "transposed-direct-form-2"]


@pytest.mark.parametrize("form", DIRECT)
def test_kaiser_direct_form_unstable_at_16_bits(form):
    # Kaiser (1966) [M] via shared/references.md: butter(8, 0.05) as one direct-form
    # denominator needs 6 integer bits (plus sign: max |a_k| = 46.24, scipy 1.17), so
    # 16-bit words keep 9 fraction bits; the quantized polynomial has a pole at
    # |z| ~ 1.38 (reproduced here: 1.3800385...)
    b, a = signal.butter(8, 0.05)
    g = realize("k8", b=b, a=a, form=form)
    q = quantize_coefficients(g, 16)
    assert {n.coefficient_format for n in q.of_kind("gain") if n.group == "a"} == {Format(16, 9)}
    s = stability(q, g)
    assert s.stable is False
    assert s.max_pole_radius == pytest.approx(1.38, abs=0.005)
    assert s.design_max_pole_radius == pytest.approx(0.969933, abs=1e-6)


@pytest.mark.parametrize("form", ["cascade", "parallel"])
def test_kaiser_sections_stable_at_16_bits(form):
    # same source: second-order sections with 16-bit coefficients stay stable,
    # max |pole| ~ 0.96995 against 0.96993 designed (reproduced: 0.9699463 and 0.9699330)
    b, a = signal.butter(8, 0.05)
    g = realize("k8", b=b, a=a, form=form)
    s = stability(quantize_coefficients(g, 16), g)
    assert s.stable is True
    assert s.max_pole_radius == pytest.approx(0.96995, abs=1e-5)
    assert s.design_max_pole_radius == pytest.approx(0.96993, abs=1e-5)
    assert 0 < s.pole_displacement < 1e-3
    assert len(s.blocks) == 4  # one loop block per second-order section


def test_clustered_roots_decided_exactly():
    # (z - r)^8 with r = 1 - 2^-20 is stable; numpy's roots (eigenvalues of the companion
    # matrix) scatter clustered roots by ~eps^(1/8) and put some outside the unit circle
    # (the caveat of shared/references.md)
    r = Fraction(1) - Fraction(1, 2**20)
    poly = [math.comb(8, k) * (-r) ** k for k in range(9)]
    assert np.max(np.abs(np.roots([float(c) for c in poly]))) > 1.0
    assert schur_cohn_stable(poly) is True
    lo, hi = radius_bracket(poly, 1.0)
    assert lo <= float(r) <= hi and hi - lo < 1e-8
    # a root exactly on the unit circle is not stable
    assert schur_cohn_stable([1, 0, -1]) is False
    assert schur_cohn_stable([1, Fraction(-1, 2), Fraction(1, 2) - 1]) is False  # (z-1)(z+1/2)


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.tuples(st.floats(0.0, 1.6), st.floats(0.0, np.pi)), min_size=1, max_size=6).filter(
        lambda ps: all(abs(r - 1.0) > 1e-3 for r, _ in ps)
    )
)
def test_schur_cohn_agrees_with_numpy_on_separated_roots(polar):
    # away from the unit circle numpy's roots are accurate enough to serve as reference
    roots = [r * np.exp(1j * t) for r, t in polar]
    roots += [np.conj(z) for z in roots if abs(z.imag) > 1e-9]
    poly = np.real(np.poly(roots))
    want = bool(max(abs(z) for z in roots) < 1.0)
    assert schur_cohn_stable([Fraction(float(c)) for c in poly]) is want


def test_characteristic_polynomial_is_the_denominator():
    # for the direct form II the state matrix is a companion matrix: det(zI - A) has
    # exactly the coefficients a_k (design values as exact binary fractions)
    b, a = signal.cheby2(5, 40, 0.3)
    g = realize("c5", b=b, a=a, form="direct-form-2")
    p = characteristic_polynomial(g, coefficients="design")
    assert p == [Fraction(float(v)) for v in a]


@settings(max_examples=25, deadline=None)
@given(st.integers(1, 6), st.integers(0, 2**32 - 1))
def test_faddeev_leverrier_matches_numpy_poly(n, seed):
    # numpy.poly(A) (from eigenvalues) as the reference on random dense rational blocks
    from hwfilter.graph import Graph, Node

    rng = np.random.default_rng(seed)
    M = rng.integers(-8, 9, size=(n, n)) / 8.0
    # a graph whose delays d_i latch sum_j M[i, j] d_j (+ x for d_0)
    nodes = [Node("x", "input")]
    for i in range(n):
        nodes.append(Node(f"d{i}", "delay", (f"s{i}",)))
    for i in range(n):
        terms = []
        for j in range(n):
            nodes.append(Node(f"g{i}_{j}", "gain", (f"d{j}",), coefficient=float(M[i, j])))
            terms.append(f"g{i}_{j}")
        if i == 0:
            terms.append("x")
        nodes.append(Node(f"s{i}", "add", tuple(terms), signs=(1,) * len(terms)))
    nodes += [Node("y", "quantize", ("d0",), role="output"), Node("out", "output", ("y",))]
    g = Graph("rand", tuple(nodes)).check()
    model = linear_model(g)
    np.testing.assert_allclose(model.A, M)
    p = characteristic_polynomial(model)
    np.testing.assert_allclose([float(c) for c in p], np.real(np.poly(M)), atol=1e-9)


def test_loop_free_graph_is_stable_with_zero_radius():
    g = quantize_coefficients(
        realize("f", b=signal.firwin(11, 0.3), a=[1.0], form="fir-direct"), 16
    )
    s = stability(g)
    assert s.stable is True and s.max_pole_radius == 0.0 and s.blocks == []
    assert block_polynomials(linear_model(g)) == []


def test_schur_cohn_rejects_zero_leading_coefficient():
    with pytest.raises(ValueError, match="polynomial must have a nonzero leading coefficient"):
        schur_cohn_stable([0, 1])
