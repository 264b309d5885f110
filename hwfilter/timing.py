"""Timing of a filter's data-flow graph: critical path and iteration bound.

The estimator turns a quantized signal-flow graph into a **data-flow graph** (DFG) in
Parhi's sense: computational nodes with a computation time, and edges ``u -> v`` with the
number of registers ``w`` between them. Two questions are answered on it:

- the **critical path**: the longest path through edges without registers, whose
  computation time (plus register and routing overhead) sets the clock period;
- the **iteration bound** ``T_inf = max over loops of (loop computation time / loop
  registers)``: no retiming or pipelining (without look-ahead) can make one iteration
  (one sample) faster.

The iteration bound comes from Parhi's longest path matrix algorithm
(:func:`longest_path_matrix_bound`): for the ``d`` registers on loops, ``L1[i][j]`` is the
longest computation time from register ``i`` to register ``j`` through no other register;
``L(m+1) = L(m) (x) L1`` in the (max, +) algebra; ``T_inf = max_{i, m} L(m)[i][i] / m``.

References
----------
K. K. Parhi, *VLSI Digital Signal Processing Systems: Design and Implementation*, Wiley,
1999, chapter 2 (iteration bound, longest path matrix algorithm) [M: from memory].
"""

from __future__ import annotations

from dataclasses import dataclass

from .graph import Graph, GraphError, strongly_connected_components

__all__ = [
    "NO_PATH",
    "DataFlowGraph",
    "TimingPath",
    "IterationBound",
    "dataflow_graph",
    "critical_path",
    "iteration_bound",
    "longest_path_matrix_bound",
]

#: the (max, +) algebra's "no path" element
NO_PATH = float("-inf")


@dataclass(frozen=True)
class DataFlowGraph:
    """Computational nodes with times (ns) and edges ``(u, v, registers)``."""

    times: dict
    edges: tuple

    def successors(self) -> dict[str, list[tuple[str, int]]]:
        succ: dict[str, list[tuple[str, int]]] = {n: [] for n in self.times}
        for u, v, w in self.edges:
            succ[u].append((v, w))
        return succ

    def predecessors(self) -> dict[str, list[tuple[str, int]]]:
        pred: dict[str, list[tuple[str, int]]] = {n: [] for n in self.times}
        for u, v, w in self.edges:
            pred[v].append((u, w))
        return pred


@dataclass(frozen=True)
class TimingPath:
    """The longest register-to-register path.

    ``nodes`` are the computational nodes in order; ``compute_ns`` the sum of their
    times; ``delay_ns`` adds the launching register's clock-to-out, the routing hop into
    the capturing register and its setup.
    """

    nodes: tuple
    compute_ns: float
    delay_ns: float

    @property
    def fmax_mhz(self) -> float:
        return 1e3 / self.delay_ns if self.delay_ns > 0 else float("inf")


@dataclass(frozen=True)
class IterationBound:
    """``bound_ns`` = ``loop_ns / loop_registers`` of the critical loop (0: no loop)."""

    bound_ns: float
    loop: tuple
    loop_ns: float
    loop_registers: int

    @property
    def max_sample_rate_hz(self) -> float:
        return 1e9 / self.bound_ns if self.bound_ns > 0 else float("inf")


def dataflow_graph(graph: Graph, times: dict, *, extra_registers: dict | None = None):
    """The DFG of a signal-flow graph: delay nodes become edge registers.

    Parameters
    ----------
    graph : Graph
    times : dict
        Computation time (ns) of every node that is not a delay.
    extra_registers : dict, optional
        ``{(source, reader): k}``: ``k`` more registers on that edge (pipeline
        registers); ``source`` is the node the reader's value comes from after following
        delay chains back.

    Returns
    -------
    DataFlowGraph
    """
    extra = extra_registers or {}
    nodes = {n.name: float(times[n.name]) for n in graph.nodes if n.kind != "delay"}
    edges = []
    for n in graph.nodes:
        if n.kind == "delay":
            continue
        for src in n.inputs:
            w = 0
            s = src
            seen = set()
            while graph[s].kind == "delay":
                if s in seen:  # a ring of delays only: no computation on it
                    raise GraphError(f"delays {sorted(seen)} form a ring without computation")
                seen.add(s)
                w += 1
                s = graph[s].inputs[0]
            edges.append((s, n.name, w + extra.get((s, n.name), 0)))
    return DataFlowGraph(nodes, tuple(edges))


def critical_path(dfg: DataFlowGraph, *, launch: float = 0.0, capture: float = 0.0) -> TimingPath:
    """Longest path over register-free edges.

    ``launch`` (clock-to-out) and ``capture`` (routing into the register plus setup) are
    added once. Every path ends in a register: a node whose value is stored (a register
    edge leaves it) or that has no successor.

    Raises
    ------
    GraphError
        When the register-free edges contain a loop (a delay-free loop).
    """
    pred = {n: [] for n in dfg.times}
    succ0: dict[str, list[str]] = {n: [] for n in dfg.times}
    for u, v, w in dfg.edges:
        if w == 0:
            pred[v].append(u)
            succ0[u].append(v)
    order = _zero_order(dfg, succ0)
    if len(order) != len(dfg.times):
        done = set(order)
        stuck = sorted(n for n in dfg.times if n not in done)
        raise GraphError(f"data-flow graph has a loop without registers through {stuck[:6]}")
    arrive: dict[str, float] = {}
    back: dict[str, str | None] = {}
    for n in order:
        best, arg = 0.0, None
        for u in sorted(pred[n]):
            if arg is None or arrive[u] > best:
                best, arg = arrive[u], u
        arrive[n] = best + dfg.times[n]
        back[n] = arg
    rank = {n: i for i, n in enumerate(order)}
    end = max(order, key=lambda n: (arrive[n], rank[n]))  # ties: the later node
    path = [end]
    while back[path[-1]] is not None:
        path.append(back[path[-1]])
    path.reverse()
    compute = arrive[end]
    return TimingPath(tuple(path), compute, launch + compute + capture)


def _loop_registers(dfg: DataFlowGraph):
    """Expand register edges into register elements; return what the LPM needs.

    Returns ``(regs, zero_succ, reg_succ)``: register names, register-free successors of
    each node, and for each register element what it feeds (a node or another register).
    Only edges inside strongly connected parts can be on a loop, so only their registers
    are kept.
    """
    comp = _components(dfg)
    regs: list[str] = []
    feeds: dict[str, tuple[str, str]] = {}  # register -> ("node"|"reg", name)
    enters: dict[str, list[str]] = {n: [] for n in dfg.times}  # node -> first registers
    zero_succ: dict[str, list[str]] = {n: [] for n in dfg.times}
    for k, (u, v, w) in enumerate(dfg.edges):
        if comp[u] != comp[v]:
            continue
        if w == 0:
            zero_succ[u].append(v)
            continue
        chain = [f"r{k}.{j}" for j in range(w)]
        regs.extend(chain)
        enters[u].append(chain[0])
        for a, b in zip(chain, chain[1:]):
            feeds[a] = ("reg", b)
        feeds[chain[-1]] = ("node", v)
    return regs, zero_succ, enters, feeds


def _components(dfg: DataFlowGraph) -> dict[str, int]:
    """Strongly connected component index of every node (Tarjan, iterative)."""
    succ = {n: [v for v, _ in vs] for n, vs in dfg.successors().items()}
    return {w: k for k, comp in enumerate(strongly_connected_components(succ)) for w in comp}


def longest_path_matrix_bound(l1) -> tuple[float, int, int]:
    """Parhi's longest path matrix algorithm on a given first matrix.

    Parameters
    ----------
    l1 : sequence of sequences of float
        ``l1[i][j]``: longest computation time from register ``i`` to register ``j``
        through no other register; :data:`NO_PATH` (or any negative number, Parhi's
        ``-1``) where there is none.

    Returns
    -------
    (bound, i, m)
        ``max_{i, m} L(m)[i][i] / m`` and the register and power attaining it
        (``(0.0, -1, 0)`` when no loop exists).
    """
    d = len(l1)
    one = [[(v if v >= 0 else NO_PATH) for v in row] for row in l1]
    cur = [row[:] for row in one]
    best, arg_i, arg_m = 0.0, -1, 0
    for m in range(1, d + 1):
        for i in range(d):
            # a strictly larger ratio only (a loop walked twice ties with itself)
            if cur[i][i] != NO_PATH and cur[i][i] / m > best * (1 + 1e-12) + 1e-15:
                best, arg_i, arg_m = cur[i][i] / m, i, m
        if m == d:
            break
        nxt = [[NO_PATH] * d for _ in range(d)]
        for i in range(d):
            row = cur[i]
            for k in range(d):
                a = row[k]
                if a == NO_PATH:
                    continue
                ok = one[k]
                out = nxt[i]
                for j in range(d):
                    b = ok[j]
                    if b != NO_PATH and a + b > out[j]:
                        out[j] = a + b
        cur = nxt
    return best, arg_i, arg_m


def iteration_bound(dfg: DataFlowGraph) -> IterationBound:
    """The iteration bound of ``dfg`` and one loop attaining it.

    The value comes from :func:`longest_path_matrix_bound`; the loop is then found as a
    cycle of maximum ratio (the loop whose computation time over registers equals the
    bound) and reported with its nodes.
    """
    regs, zero_succ, enters, feeds = _loop_registers(dfg)
    if not regs:
        return IterationBound(0.0, (), 0.0, 0)
    ridx = {r: i for i, r in enumerate(regs)}
    d = len(regs)
    l1 = [[NO_PATH] * d for _ in range(d)]
    # paths (as node lists) that realize each l1 entry, for the loop report
    via: dict[tuple[int, int], tuple[str, ...]] = {}
    order = _zero_order(dfg, zero_succ)
    for r in regs:
        kind, target = feeds[r]
        i = ridx[r]
        if kind == "reg":
            j = ridx[target]
            if l1[i][j] < 0.0:
                l1[i][j], via[(i, j)] = 0.0, ()
            continue
        # longest register-free paths from node ``target`` to every node
        dist = {target: dfg.times[target]}
        back: dict[str, str | None] = {target: None}
        for n in order:
            if n not in dist:
                continue
            for v in zero_succ[n]:
                cand = dist[n] + dfg.times[v]
                if v not in dist or cand > dist[v]:
                    dist[v], back[v] = cand, n
        for n, t in dist.items():
            for r2 in enters[n]:
                j = ridx[r2]
                if t > l1[i][j]:
                    l1[i][j] = t
                    path = [n]
                    while back[path[-1]] is not None:
                        path.append(back[path[-1]])
                    via[(i, j)] = tuple(reversed(path))
    bound, i, m = longest_path_matrix_bound(l1)
    if i < 0:
        return IterationBound(0.0, (), 0.0, 0)
    loop = _critical_loop(l1, via, i, m)
    names: list[str] = []
    for part in loop:
        for n in part:
            if not names or names[-1] != n:
                names.append(n)
    return IterationBound(bound, tuple(names), bound * m, m)


def _zero_order(dfg: DataFlowGraph, zero_succ) -> list[str]:
    """Kahn's topological order over the register-free edges (nodes on a loop left out)."""
    indeg = {n: 0 for n in dfg.times}
    for u in zero_succ:
        for v in zero_succ[u]:
            indeg[v] += 1
    order = [n for n in dfg.times if indeg[n] == 0]
    k = 0
    while k < len(order):
        for v in zero_succ[order[k]]:
            indeg[v] -= 1
            if indeg[v] == 0:
                order.append(v)
        k += 1
    return order


def _critical_loop(l1, via, i: int, m: int) -> list[tuple[str, ...]]:
    """A closed walk of ``m`` steps from register ``i`` back to ``i`` of maximum weight."""
    d = len(l1)
    # best[k][j]: heaviest walk of k steps from i to j; par for the reconstruction
    best = [[NO_PATH] * d for _ in range(m + 1)]
    par = [[-1] * d for _ in range(m + 1)]
    best[0][i] = 0.0
    for k in range(1, m + 1):
        for a in range(d):
            if best[k - 1][a] == NO_PATH:
                continue
            for b in range(d):
                if l1[a][b] == NO_PATH:
                    continue
                cand = best[k - 1][a] + l1[a][b]
                if cand > best[k][b]:
                    best[k][b], par[k][b] = cand, a
    steps = []
    j = i
    for k in range(m, 0, -1):
        a = par[k][j]
        steps.append(via[(a, j)])
        j = a
    return list(reversed(steps))
