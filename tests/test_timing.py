"""Critical path and iteration bound against Parhi's examples and brute force over loops."""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from hwfilter.graph import GraphError
from hwfilter.realize import realize
from hwfilter.realize._build import Builder
from hwfilter.timing import (
    NO_PATH,
    DataFlowGraph,
    critical_path,
    dataflow_graph,
    iteration_bound,
    longest_path_matrix_bound,
)

T_M, T_A = 2.0, 1.0  # Parhi's usual unit times: multiply 2 u.t., add 1 u.t. [M]


def _times(graph, mult=T_M, add=T_A, quantize=0.0):
    t = {}
    for n in graph.nodes:
        t[n.name] = {"gain": mult, "add": add, "quantize": quantize}.get(n.kind, 0.0)
    return t


def _brute_force_bound(dfg: DataFlowGraph) -> Fraction:
    """Max over every simple cycle of (sum of node times) / (sum of edge registers).

    An independent enumeration: depth-first search from each node, visiting only nodes
    later in a fixed order than the start (each simple cycle is found once per start).
    """
    names = sorted(dfg.times)
    pos = {n: i for i, n in enumerate(names)}
    succ = {n: [] for n in names}
    for u, v, w in dfg.edges:
        succ[u].append((v, w))
    best = Fraction(0)

    def dfs(start, node, time, regs, on_path):
        nonlocal best
        for v, w in succ[node]:
            if v == start:
                if regs + w > 0:
                    best = max(best, Fraction(time) / (regs + w))
                continue
            if pos[v] > pos[start] and v not in on_path:
                on_path.add(v)
                dfs(start, v, time + Fraction(dfg.times[v]), regs + w, on_path)
                on_path.discard(v)

    for s in names:
        dfs(s, s, Fraction(dfg.times[s]), 0, {s})
    return best


# Parhi, VLSI Digital Signal Processing Systems, section 2.4.1 (longest path matrix
# algorithm), worked example [M: from memory, page not checked]: the first matrix of a
# four-delay graph (-1: no path), and T_inf = max{4/2, 4/2, 5/3, 5/3, 5/3, 8/4, 8/4, 5/4,
# 5/4} = 2. The diagonal entries below are recomputed by hand from L(1).
PARHI_L1 = [
    [-1, 0, -1, -1],
    [4, -1, 0, -1],
    [5, -1, -1, 0],
    [5, -1, -1, -1],
]


def test_parhi_longest_path_matrix_example():
    bound, i, m = longest_path_matrix_bound(PARHI_L1)
    assert bound == 2.0
    assert m in (2, 4)  # 4/2 and 8/4 both attain it


def _maxplus(a, b):
    d = len(a)
    return [
        [
            max((a[i][k] + b[k][j] for k in range(d) if a[i][k] >= 0 and b[k][j] >= 0), default=-1)
            for j in range(d)
        ]
        for i in range(d)
    ]


def test_parhi_example_diagonals():
    # the list of ratios of the worked example: 4/2, 4/2 | 5/3 x3 | 8/4, 8/4, 5/4, 5/4
    l2 = _maxplus(PARHI_L1, PARHI_L1)
    l3 = _maxplus(l2, PARHI_L1)
    l4 = _maxplus(l3, PARHI_L1)
    assert [l2[i][i] for i in range(4)] == [4, 4, -1, -1]
    assert [l3[i][i] for i in range(4)] == [5, 5, 5, -1]
    assert [l4[i][i] for i in range(4)] == [8, 8, 5, 5]


def test_first_order_recursion():
    # y[n] = a y[n-1] + x[n]: one loop of a multiply and an add over one delay, so
    # T_inf = T_M + T_A (Parhi ch. 2 [M])
    b = Builder("first")
    x = b.input()
    d = b.delay("y1", None)
    p = b.gain("a", d, 0.5, "a")
    s = b.add("s", [(1, x), (1, p)])
    b.connect("y1", s)
    b.output(s)
    g = b.graph("direct-form-1")
    ib = iteration_bound(dataflow_graph(g, _times(g)))
    assert ib.bound_ns == T_M + T_A
    assert set(ib.loop) == {"a", "s"} and ib.loop_registers == 1


def test_two_step_look_ahead_halves_the_bound():
    # look-ahead: y[n] = a^2 y[n-2] + a x[n-1] + x[n]: the loop now holds two delays,
    # T_inf = (T_M + T_A) / 2 (Parhi ch. 10 [M]); the feed-forward part does not count
    b = Builder("ahead")
    x = b.input()
    x1 = b.delay("x1", x)
    d1 = b.delay("y1", None)
    d2 = b.delay("y2", d1)
    p = b.gain("a2", d2, 0.25, "a")
    q = b.gain("a", x1, 0.5, "a")
    s = b.add("s", [(1, q), (1, x)])  # the feed-forward part, outside the loop
    t = b.add("t", [(1, s), (1, p)])
    b.connect("y1", t)
    b.output(t)
    g = b.graph("direct-form-1")
    ib = iteration_bound(dataflow_graph(g, _times(g)))
    # the loop is a2 -> t -> y1 -> y2 -> a2: one multiply and one add over two delays
    assert ib.bound_ns == (T_M + T_A) / 2
    assert ib.loop_registers == 2


def test_direct_form_2_biquad_by_hand():
    # loops: w -> w1 -> a1 -> w_sum -> w (one delay) and w -> w1 -> w2 -> a2 -> w_sum -> w
    # (two delays); with the quantizer's time T_Q in both: max(T_M + T_A + T_Q,
    # (T_M + T_A + T_Q) / 2)
    g = realize("bq", b=[0.2, 0.3, 0.2], a=[1.0, -0.9, 0.4], form="direct-form-2")
    times = _times(g, quantize=0.5)
    ib = iteration_bound(dataflow_graph(g, times))
    assert ib.bound_ns == pytest.approx(T_M + T_A + 0.5)
    assert ib.bound_ns == pytest.approx(float(_brute_force_bound(dataflow_graph(g, times))))


@pytest.mark.parametrize(
    "form, section",
    [
        ("direct-form-1", None),
        ("direct-form-2", None),
        ("transposed-direct-form-2", None),
        ("cascade", "direct-form-1"),
        ("cascade", "transposed-direct-form-2"),
        ("parallel", "direct-form-2"),
    ],
)
def test_realizations_against_brute_force(form, section):
    from scipy import signal

    b, a = signal.cheby1(4, 1.0, 0.3)
    g = realize("f", b=b, a=a, form=form, section=section or "direct-form-2")
    rng = np.random.default_rng(7)
    times = {n.name: float(rng.integers(0, 5)) for n in g.nodes}
    dfg = dataflow_graph(g, times)
    ib = iteration_bound(dfg)
    assert ib.bound_ns == pytest.approx(float(_brute_force_bound(dfg)))
    # the reported loop attains the bound, and is a simple loop (not one walked twice)
    assert ib.loop_ns / ib.loop_registers == pytest.approx(ib.bound_ns)
    assert len(set(ib.loop)) == len(ib.loop)


@st.composite
def _random_dfgs(draw):
    n = draw(st.integers(2, 7))
    names = [f"n{i}" for i in range(n)]
    times = {m: draw(st.integers(0, 6)) for m in names}
    edges = []
    # zero-register edges only forward (no delay-free loop); register edges anywhere
    for i in range(n):
        for j in range(n):
            if draw(st.integers(0, 3)) == 0:
                w = draw(st.integers(0, 3)) if j > i else draw(st.integers(1, 3))
                edges.append((names[i], names[j], w))
    return DataFlowGraph({k: float(v) for k, v in times.items()}, tuple(edges))


@settings(max_examples=150, deadline=None)
@given(_random_dfgs())
def test_iteration_bound_equals_brute_force_over_cycles(dfg):
    ib = iteration_bound(dfg)
    assert ib.bound_ns == pytest.approx(float(_brute_force_bound(dfg)))
    if ib.loop:
        assert ib.loop_ns / ib.loop_registers == pytest.approx(ib.bound_ns)


def test_no_loop_no_bound():
    g = realize("fir", b=[0.25, 0.5, 0.25], a=[1.0], form="fir-direct")
    ib = iteration_bound(dataflow_graph(g, _times(g)))
    assert ib.bound_ns == 0.0 and ib.loop == () and ib.max_sample_rate_hz == float("inf")


def _fir_chain(n, transposed):
    """An n-tap FIR with two-input adders in a chain (Parhi's figures) or transposed."""
    h = [0.1 * (k + 1) for k in range(n)]
    if transposed:
        return realize("t", b=h, a=[1.0], form="fir-transposed")
    b = Builder("d")
    line = [b.input()]
    for k in range(1, n):
        line.append(b.delay(f"x{k}", line[-1]))
    acc = b.gain("h0", line[0], h[0], "h")
    for k in range(1, n):
        p = b.gain(f"h{k}", line[k], h[k], "h")
        acc = b.add(f"s{k}", [(1, acc), (1, p)])
    b.output(acc)
    return b.graph("fir-direct")


@pytest.mark.parametrize("n", [2, 4, 7])
def test_fir_critical_paths(n):
    # Parhi ch. 2-3 [M]: direct FIR T_M + (N-1) T_A, transposed FIR T_M + T_A
    g = _fir_chain(n, transposed=False)
    cp = critical_path(dataflow_graph(g, _times(g)))
    assert cp.compute_ns == T_M + (n - 1) * T_A
    g = _fir_chain(n, transposed=True)
    cp = critical_path(dataflow_graph(g, _times(g)), launch=0.5, capture=0.25)
    assert cp.compute_ns == T_M + T_A
    assert cp.delay_ns == T_M + T_A + 0.75
    assert cp.fmax_mhz == pytest.approx(1e3 / (T_M + T_A + 0.75))


def test_critical_path_names_its_nodes():
    g = _fir_chain(3, transposed=False)
    cp = critical_path(dataflow_graph(g, _times(g)))
    assert cp.nodes[-2:] == ("s2", "out")
    assert cp.nodes[0] in ("x", "h0", "h1")


def test_delay_free_loop_is_rejected():
    dfg = DataFlowGraph({"a": 1.0, "b": 1.0}, (("a", "b", 0), ("b", "a", 0)))
    with pytest.raises(GraphError, match="loop without registers"):
        critical_path(dfg)


def test_matrix_without_loops():
    assert longest_path_matrix_bound([[NO_PATH, 3.0], [NO_PATH, NO_PATH]]) == (0.0, -1, 0)
