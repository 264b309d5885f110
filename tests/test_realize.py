"""Every realization's float graph against scipy.signal (the outside reference)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal

from hwfilter.graph import Graph, GraphError, Node
from hwfilter.realize import FIR_FORMS, SECTION_FORMS, realize
from hwfilter.reference import simulate_float

IIR_CASES = [
    ("butter4", lambda out: signal.butter(4, 0.2, output=out)),
    ("cheby1_5", lambda out: signal.cheby1(5, 1.0, [0.2, 0.4], "bandpass", output=out)),
    ("ellip8", lambda out: signal.ellip(8, 0.5, 60, 0.3, output=out)),
    ("cheby2_3hp", lambda out: signal.cheby2(3, 40, 0.6, "highpass", output=out)),
]
REALIZATIONS = [(f, None) for f in SECTION_FORMS] + [
    (f, s) for f in ("cascade", "parallel") for s in SECTION_FORMS
]


@pytest.mark.parametrize("case", IIR_CASES, ids=[c[0] for c in IIR_CASES])
@pytest.mark.parametrize("form,section", REALIZATIONS)
def test_float_graph_matches_scipy(case, form, section, rng):
    _, design = case
    b, a = design("ba")
    z, p, k = design("zpk")
    sos = signal.zpk2sos(z, p, k)
    if form in SECTION_FORMS and len(a) > 6:
        # the high-order direct forms lose accuracy in float64 too; compare with lfilter
        ref_fn = lambda x: signal.lfilter(b, a, x)  # noqa: E731
    else:
        ref_fn = lambda x: signal.sosfilt(sos, x)  # noqa: E731
    g = realize("t", b=b, a=a, zpk=(z, p, k), form=form, section=section or "direct-form-2")
    x = rng.standard_normal(2000)
    want = ref_fn(x)
    got = simulate_float(g, x)
    # scipy.signal.lfilter / sosfilt as the outside reference; 1e-9 relative
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-9 * np.max(np.abs(want)))


@pytest.mark.parametrize("form", FIR_FORMS)
@pytest.mark.parametrize("numtaps", [7, 8, 31])
def test_fir_forms_match_lfilter(form, numtaps, rng):
    h = signal.firwin(numtaps, 0.3)  # symmetric by construction (linear phase)
    g = realize("f", b=h, a=[1.0], form=form)
    x = rng.standard_normal(1000)
    np.testing.assert_allclose(simulate_float(g, x), signal.lfilter(h, 1.0, x), atol=1e-12)


def test_antisymmetric_fir_folds(rng):
    # a type III differentiator-like antisymmetric filter (odd length, zero middle tap)
    h = np.array([0.1, -0.3, 0.0, 0.3, -0.1])
    g = realize("d", b=h, a=[1.0], form="fir-symmetric")
    assert g.counts()["gain"] == 2  # ceil(N/2) minus the zero middle tap
    x = rng.standard_normal(500)
    np.testing.assert_allclose(simulate_float(g, x), signal.lfilter(h, 1.0, x), atol=1e-12)


@pytest.mark.parametrize(
    "h",
    [
        [0.0, 0.3, 0.5, 0.3, 0.0],  # symmetric with a zero at each end
        [0.0, 0.0, 0.2, -0.4, 0.4, -0.2],  # leading zeros (a pure delay), antisymmetric
        [0.0, 0.1, 0.0, -0.1],
    ],
)
def test_symmetric_fir_after_leading_zeros(h, rng):
    # leading zeros are a pure delay; the taps after them fold (scipy.signal.lfilter as
    # the outside reference)
    g = realize("z", b=h, a=[1.0], form="fir-symmetric")
    x = rng.standard_normal(300)
    np.testing.assert_allclose(simulate_float(g, x), signal.lfilter(h, 1.0, x), atol=1e-12)


def test_symmetric_fir_rejects_asymmetric_taps():
    with pytest.raises(ValueError, match="largest asymmetry 0.1 at tap 1"):
        realize("z", b=[0.0, 0.2, 0.1, 0.3], a=[1.0], form="fir-symmetric")


def test_delay_counts():
    # common practice: the direct form and the cascade of the same order use the same
    # number of delays (the order); direct form I of a biquad has 4, direct form II 2
    # (shared/references.md, Parhi ch. 2-3 counts per biquad)
    b, a = signal.butter(6, 0.25)
    z, p, k = signal.butter(6, 0.25, output="zpk")
    for sec in ("direct-form-2", "transposed-direct-form-2"):
        casc = realize("c", b=b, a=a, zpk=(z, p, k), form="cascade", section=sec)
        assert len(casc.delays) == 6
    assert len(realize("d", b=b, a=a, form="direct-form-2").delays) == 6
    assert len(realize("t", b=b, a=a, form="transposed-direct-form-2").delays) == 6
    bq_b, bq_a = signal.butter(2, 0.25)
    df1 = realize("d1", b=bq_b, a=bq_a, form="direct-form-1")
    df2 = realize("d2", b=bq_b, a=bq_a, form="direct-form-2")
    assert len(df1.delays) == 4 and len(df2.delays) == 2
    for g in (df1, df2):
        c = g.counts()
        assert (c["gain"], c["adders"]) == (5, 4)


def test_cascade_ordering_and_gain_spread(rng):
    z, p, k = signal.ellip(6, 1, 50, 0.2, output="zpk")
    b, a = signal.zpk2tf(z, p, k)
    x = rng.standard_normal(1000)
    want = signal.lfilter(b, a, x)
    radii = {}
    for order in ("nearest-last", "nearest-first"):
        for gain in ("first", "even", "normalized"):
            g = realize("c", b=b, a=a, zpk=(z, p, k), form="cascade", order=order, gain=gain)
            np.testing.assert_allclose(simulate_float(g, x), want, atol=1e-9)
            a2 = [g[f"{s}.a2"].coefficient for s in g.sections]
            radii[order] = np.sqrt(a2)  # |p|^2 = a2 for a complex pair
    # scipy zpk2sos puts the poles nearest the unit circle last (its documentation)
    assert np.all(np.diff(radii["nearest-last"]) > 0)
    assert np.all(np.diff(radii["nearest-first"]) < 0)


def test_parallel_rejects_repeated_poles():
    b, a = [1.0], np.poly([0.5, 0.5])
    with pytest.raises(ValueError, match="distinct poles"):
        realize("p", b=b, a=a, form="parallel")


def test_graph_check_messages():
    x = Node("x", "input")
    with pytest.raises(GraphError, match="delay-free loop: a -> b -> a"):
        Graph(
            "g",
            (
                x,
                Node("a", "add", ("x", "b"), (1, 1)),
                Node("b", "add", ("a",), (1,)),
                Node("out", "output", ("a",)),
            ),
        ).check()
    with pytest.raises(GraphError, match="reads 'nope'"):
        Graph("g", (x, Node("out", "output", ("nope",)))).check()
    with pytest.raises(GraphError, match="kind must be one of"):
        Graph("g", (x, Node("m", "mul", ("x",)), Node("out", "output", ("m",)))).check()
    with pytest.raises(GraphError, match="must have 1 input"):
        Graph("g", (x, Node("d", "delay", ()), Node("out", "output", ("x",)))).check()
    with pytest.raises(GraphError, match="used twice"):
        Graph("g", (x, Node("x", "delay", ("x",)), Node("out", "output", ("x",)))).check()


def test_strongly_connected_components_against_brute_force(rng):
    # reachability both ways (transitive closure by repeated squaring, numpy) defines the
    # components independently of Tarjan's algorithm
    from hwfilter.graph import strongly_connected_components

    for _trial in range(20):
        n = int(rng.integers(1, 12))
        adj = rng.random((n, n)) < 0.2
        succ = {i: [j for j in range(n) if adj[i, j]] for i in range(n)}
        reach = adj | np.eye(n, dtype=bool)
        for _ in range(n):
            reach = reach | ((reach.astype(int) @ reach.astype(int)) > 0)
        want = {frozenset(j for j in range(n) if reach[i, j] and reach[j, i]) for i in range(n)}
        got = strongly_connected_components(succ)
        assert {frozenset(c) for c in got} == want
        assert sum(len(c) for c in got) == n
