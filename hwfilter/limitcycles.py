"""Zero-input limit cycles and overflow oscillations, searched with the bit-exact rules.

Each section (``graph.sections``; the whole graph when there are none) is simulated on
its own nodes with the integer semantics of :mod:`hwfilter.reference` (products exact,
sums aligned, quantizers rounding and wrapping or saturating by their own rules), its
input and every value it reads from outside held at zero. Only the delays on a recursive
loop ("recurrent states") can carry a limit cycle: the others flush to zero or merely
follow.

Granular limit cycles (no overflow). With ``e_j`` the rounding error of quantizer ``j``
(bounded by its interval, :func:`hwfilter.noise.rounding_error_interval`), a periodic
trajectory of a stable section is the steady-state response to a periodic ``e``, so
every state on it satisfies ``|s_i| <= sum_j l1(e_j -> s_i) max|e_j|``. Every granular
cycle therefore lies in that box; when the box has at most ``max_points`` states the
search is *exhaustive*: the successor of every box state is computed in one vectorized
step, the map is iterated by pointer doubling (``f^(2^m)`` for ``2^m`` above the number
of states), and the image is exactly the set of states on cycles. When the whole state
space of the recurrent states is that small, it is searched instead (which also finds
overflow cycles). Otherwise the search is *bounded*: random and central initial states,
run until they settle, and the cycles they reach; the result is then a lower bound.

Overflow oscillations. With wrap-around a large initial state can oscillate forever
(Ebert, Mazo & Taylor, Bell Syst. Tech. J. 48(9), 1969: a direct-form second-order
section with ``|a1| + |a2| < 1`` has none; saturation suppresses them in a second-order
direct-form section). Saturation of several narrower internal words (a transposed form
scaled per state) can still leave a section stuck at full scale; the search reports
that too. The search starts from large random and corner states and runs until the
linear part must have decayed below one LSB (``||A^T|| * max|s| < 1``); a state still
outside the granular box then is an overflow oscillation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .fixed import round_shift
from .formats import node_ranges
from .graph import Graph
from .linear import l1_parts, linear_model
from .noise import rounding_error_interval
from .stability import block_polynomials, loop_blocks

__all__ = [
    "SectionCycles",
    "SectionOverflow",
    "section_members",
    "SectionSimulator",
    "limit_cycles",
    "overflow_oscillations",
    "emt_condition",
]


def section_members(graph: Graph) -> dict[str, list[str]]:
    """Node names of every section (``""``: the whole graph when it has no sections).

    Nodes outside every section form one more group ``""`` when they hold a loop.
    """
    if not graph.sections:
        return {"": [n.name for n in graph.nodes]}
    out = {s: [n.name for n in graph.nodes if n.section == s] for s in graph.sections}
    rest = [n.name for n in graph.nodes if not n.section]
    if loop_blocks(linear_model(graph, nodes=rest)):
        out[""] = rest
    return out


class SectionSimulator:
    """Bit-exact zero-input simulation of a set of nodes, many initial states at once.

    ``step(state)`` takes a dict delay name -> integer array (one lane per initial state)
    and returns ``(next_state, values, overflowed)``; ``overflowed`` is a boolean array,
    True in lanes where some quantizer (or narrowed sum) wrapped or saturated.
    """

    def __init__(self, graph: Graph, members):
        if not graph.is_quantized:
            raise ValueError(f"graph {graph.name!r} must be quantized to search limit cycles")
        members = set(members)
        self.graph = graph
        self.order = [n for n in graph.topological_order() if n.name in members]
        self.delays = [n.name for n in self.order if n.kind == "delay"]
        full = node_ranges(graph)
        self.ranges = full
        self.narrow = set()
        for n in self.order:
            if n.kind == "add":
                lo, hi, _ = full[n.name]
                if lo < n.format.min_int or hi > n.format.max_int:
                    self.narrow.add(n.name)
        widest = max(
            max(abs(full[n.name][0]), abs(full[n.name][1])).bit_length() + 1 for n in self.order
        )
        self.dtype = np.int64 if widest <= 62 else object
        self.output = self._output_node(members)

    def _output_node(self, members) -> str:
        outside = [n for n in self.graph.nodes if n.name not in members]
        read = [s for n in outside for s in n.inputs if s in members]
        if read:
            return read[-1]
        return self.order[-1].name

    def zeros(self, lanes: int) -> np.ndarray:
        return np.zeros(lanes, dtype=self.dtype)

    def step(self, state: dict):
        g = self.graph
        lanes = len(next(iter(state.values()))) if state else 1
        zero = self.zeros(lanes)
        v: dict[str, np.ndarray] = {}
        over = np.zeros(lanes, dtype=bool)

        def get(name):
            return v.get(name, zero)

        for n in self.order:
            k = n.kind
            if k == "delay":
                v[n.name] = state[n.name]
            elif k == "input":
                v[n.name] = zero
            elif k == "gain":
                v[n.name] = get(n.inputs[0]) * n.value
            elif k == "add":
                acc = zero
                for sign, s in zip(n.signs, n.inputs, strict=True):
                    t = get(s) << (n.format.frac - g[s].format.frac)
                    acc = acc + t if sign > 0 else acc - t
                if n.name in self.narrow:
                    lo, hi = n.format.min_int, n.format.max_int
                    over |= (acc < lo) | (acc > hi)
                    acc = ((acc - lo) & ((1 << n.format.bits) - 1)) + lo
                v[n.name] = acc
            elif k == "quantize":
                src = g[n.inputs[0]]
                r = round_shift(get(src.name), src.format.frac - n.format.frac, n.rounding)
                lo, hi = n.format.min_int, n.format.max_int
                bad = (r < lo) | (r > hi)
                over |= bad
                if np.any(bad):
                    if n.overflow == "saturate":
                        r = np.where(r < lo, lo, np.where(r > hi, hi, r)).astype(self.dtype)
                    else:
                        r = ((r - lo) & ((1 << n.format.bits) - 1)) + lo
                v[n.name] = r
            elif k == "output":
                v[n.name] = get(n.inputs[0])
            else:  # pragma: no cover - Graph.check rejects unknown kinds
                raise ValueError(f"limit-cycle search does not know node kind {k!r}")
        nxt = {d: get(g[d].inputs[0]) for d in self.delays}
        return nxt, v, over


# -- results ------------------------------------------------------------------------


@dataclass
class SectionCycles:
    """Largest zero-input limit cycle found in one section.

    ``search`` is ``"exhaustive-box"`` (every state of the granular box),
    ``"exhaustive-space"`` (every state of the recurrent words) or ``"bounded"`` (a
    sample: the amplitude is a lower bound). Amplitudes are in LSBs of each state's own
    word (``amplitude_lsb``) and of the section output (``output_amplitude_lsb``);
    ``period`` and ``cycle`` describe one largest cycle (states in ``states`` order).
    """

    section: str
    states: list[str]
    search: str
    points: int
    box: dict = field(default_factory=dict)
    cycles_found: int = 0
    amplitude_lsb: int = 0
    output_amplitude_lsb: int = 0
    period: int = 0
    cycle: list = field(default_factory=list)
    overflow_cycle: bool = False

    def as_dict(self) -> dict:
        return dict(self.__dict__)


@dataclass
class SectionOverflow:
    """Overflow-oscillation search of one section.

    ``condition`` is the Ebert-Mazo-Taylor test ``|a1| + |a2| < 1`` on the section's exact
    characteristic polynomial (None when the section is not of order 1 or 2); ``found``
    says whether a persistent large oscillation was seen, with its amplitude (LSB of the
    state words), period and an initial state that starts it.
    """

    section: str
    overflow_rules: list[str]
    condition: bool | None
    found: bool
    lanes: int
    steps: int
    amplitude_lsb: int = 0
    period: int = 0
    start: list = field(default_factory=list)

    def as_dict(self) -> dict:
        return dict(self.__dict__)


# -- helpers ------------------------------------------------------------------------


def emt_condition(graph: Graph, section: str) -> bool | None:
    """``|a1| + |a2| < 1`` for a section whose loops form one polynomial of order <= 2."""
    members = section_members(graph)[section]
    model = linear_model(graph, coefficients="quantized", nodes=members)
    polys = block_polynomials(model)
    if len(polys) != 1 or len(polys[0][1]) > 3:
        return None
    p = list(polys[0][1]) + [0] * (3 - len(polys[0][1]))
    return abs(p[1]) + abs(p[2]) < 1


def _recurrent(graph: Graph, members):
    """The section's model and the states that carry memory under zero input.

    States on a loop, plus states both reachable from a loop and reaching one (a delay
    between two loops); the others flush to zero or only follow the recurrent ones.
    """
    model = linear_model(graph, coefficients="quantized", nodes=members)
    n = model.n_states
    loops = {i for b in loop_blocks(model) for i in b}

    def closure(start, forward):
        seen = set(start)
        stack = list(start)
        while stack:
            i = stack.pop()
            for r in range(n):
                edge = model.A[r, i] if forward else model.A[i, r]
                if r not in seen and edge != 0.0:
                    seen.add(r)
                    stack.append(r)
        return seen

    rec = loops | (closure(loops, True) & closure(loops, False))
    return model, [model.states[i] for i in sorted(rec)]


def _box(graph: Graph, model, states: list[str], members) -> dict[str, int] | None:
    """Granular bound (LSB of each state's word) per recurrent state, or None if unbounded."""
    qs = [n for n in graph.of_kind("quantize") if n.name in set(members)]
    box = {s: 0.0 for s in states}
    for q in qs:
        src = graph[q.inputs[0]]
        lo, hi = rounding_error_interval(q.rounding, src.format.frac - q.format.frac)
        emax = float(max(abs(lo), abs(hi)))
        if emax == 0:
            continue
        parts = l1_parts(model, q.name, states)
        for s, l1 in zip(states, parts.l1, strict=True):
            if not np.isfinite(l1):
                return None
            scale = 2.0 ** (graph[s].format.frac - q.format.frac)
            box[s] += l1 * emax * scale
    return {s: int(math.floor(b * (1 + 1e-9) + 1e-9)) for s, b in box.items()}


def _decode(idx: np.ndarray, lows: list[int], sizes: list[int]) -> list[np.ndarray]:
    out = []
    for lo, size in zip(lows, sizes, strict=True):
        out.append(idx % size + lo)
        idx = idx // size
    return out


def _encode(vals: list[np.ndarray], lows: list[int], sizes: list[int]) -> np.ndarray:
    idx = np.zeros(len(vals[0]), dtype=np.int64)
    mult = 1
    inside = np.ones(len(vals[0]), dtype=bool)
    for v, lo, size in zip(vals, lows, sizes, strict=True):
        off = np.asarray(v - lo, dtype=np.int64)
        inside &= (off >= 0) & (off < size)
        idx += np.where(inside, off, 0) * mult
        mult *= size
    return np.where(inside, idx, -1)


def _full_state(sim: SectionSimulator, states, vals, lanes):
    st = {d: sim.zeros(lanes) for d in sim.delays}
    for s, v in zip(states, vals, strict=True):
        st[s] = np.asarray(v).astype(sim.dtype)
    return st


def _amp(sim, states, vals) -> np.ndarray:
    return np.max(np.abs(np.stack([np.asarray(v, dtype=np.float64) for v in vals])), axis=0)


def _exhaustive(sim, states, lows, sizes):
    """Cycle states of the map restricted to the box ``lows + [0, sizes)``."""
    total = int(np.prod(sizes))
    idx = np.arange(total, dtype=np.int64)
    vals = _decode(idx, lows, sizes)
    nxt, _, _ = sim.step(_full_state(sim, states, vals, total))
    succ = _encode([nxt[s] for s in states], lows, sizes)
    # non-recurrent delays must flush: a box state is a true state only with them at zero,
    # which is what the encoding assumes; follow the map with them at zero as well
    sink = total
    succ = np.where(succ < 0, sink, succ)
    succ = np.append(succ, sink)
    power = succ.copy()
    for _ in range(max(1, math.ceil(math.log2(total + 1)))):
        power = power[power]
    on_cycle = np.unique(power)
    on_cycle = on_cycle[on_cycle != sink]
    return on_cycle, succ


def _follow(succ: np.ndarray, start: int, limit: int) -> list[int]:
    cyc = [int(start)]
    cur = int(succ[start])
    while cur != start and len(cyc) < limit:
        cyc.append(cur)
        cur = int(succ[cur])
    return cyc


def limit_cycles(
    graph: Graph, *, max_points: int = 1 << 21, bounded_lanes: int = 1 << 14, seed: int = 0
) -> list[SectionCycles]:
    """Search every section for zero-input limit cycles (see the module docstring)."""
    out = []
    rng = np.random.default_rng(seed)
    for sec, members in section_members(graph).items():
        sim = SectionSimulator(graph, members)
        model, states = _recurrent(graph, members)
        if not states:
            out.append(SectionCycles(sec, [], "exhaustive-space", 0))
            continue
        full_lows = [sim.ranges[s][0] for s in states]
        full_sizes = [sim.ranges[s][1] - sim.ranges[s][0] + 1 for s in states]
        box = _box(graph, model, states, members)
        space = math.prod(full_sizes)
        if space <= max_points:
            lows, sizes, search = full_lows, full_sizes, "exhaustive-space"
        elif box is not None and math.prod(2 * b + 1 for b in box.values()) <= max_points:
            lows = [-box[s] for s in states]
            sizes = [2 * box[s] + 1 for s in states]
            search = "exhaustive-box"
        else:
            out.append(_bounded(sim, sec, states, box, full_lows, full_sizes, bounded_lanes, rng))
            continue
        on_cycle, succ = _exhaustive(sim, states, lows, sizes)
        res = SectionCycles(sec, states, search, int(np.prod(sizes)), box or {})
        vals = _decode(on_cycle, lows, sizes)
        amp = _amp(sim, states, vals) if len(on_cycle) else np.zeros(0)
        nonzero = amp > 0
        if np.any(nonzero):
            best = int(on_cycle[np.argmax(amp)])
            cyc = _follow(succ, best, len(on_cycle) + 1)
            cyc_vals = _decode(np.array(cyc, dtype=np.int64), lows, sizes)
            _, v, _ = sim.step(_full_state(sim, states, cyc_vals, len(cyc)))
            res.amplitude_lsb = int(np.max(amp))
            res.output_amplitude_lsb = int(np.max(np.abs(np.asarray(v[sim.output], dtype=float))))
            res.period = len(cyc)
            res.cycle = [[int(x[i]) for x in cyc_vals] for i in range(len(cyc))]
            res.cycles_found = _count_cycles(on_cycle[nonzero], succ)
            if box is not None:
                res.overflow_cycle = any(
                    abs(int(x[i])) > box[s]
                    for s, x in zip(states, cyc_vals, strict=True)
                    for i in range(len(cyc))
                )
        out.append(res)
    return out


def _count_cycles(nodes: np.ndarray, succ: np.ndarray) -> int:
    """Number of distinct cycles among cycle nodes (each cycle counted once)."""
    left = set(int(n) for n in nodes)
    count = 0
    while left:
        start = left.pop()
        cur = int(succ[start])
        while cur != start:
            left.discard(cur)
            cur = int(succ[cur])
        count += 1
    return count


def _settle(sim, state, steps):
    over = None
    for _ in range(steps):
        state, _, o = sim.step(state)
        over = o if over is None else over | o
    return state


def _bounded(sim, sec, states, box, lows, sizes, lanes, rng) -> SectionCycles:
    """Sampled search: central and random initial states, settled, cycles measured."""
    if box is not None:
        b_lows = [-box[s] for s in states]
        b_sizes = [2 * box[s] + 1 for s in states]
    else:
        b_lows, b_sizes = lows, sizes
    vals = [rng.integers(lo, lo + size, lanes) for lo, size in zip(b_lows, b_sizes, strict=True)]
    # central states: a small exhaustive core around zero
    core = max(1, int((lanes // 4) ** (1.0 / len(states))) // 2)
    grid = np.meshgrid(*[np.arange(-core, core + 1)] * len(states), indexing="ij")
    for i, gv in enumerate(grid):
        flat = gv.ravel()[: lanes // 4]
        vals[i][: len(flat)] = flat
    state = _full_state(sim, states, vals, lanes)
    settle_steps = _settle_steps(sim, states)
    state = _settle(sim, state, settle_steps)
    ref = [state[s].copy() for s in states]
    period = np.zeros(lanes, dtype=np.int64)
    amp = _amp(sim, states, ref)
    limit = 4096
    cur = state
    for t in range(1, limit + 1):
        cur, _, _ = sim.step(cur)
        a = _amp(sim, states, [cur[s] for s in states])
        amp = np.where(period == 0, np.maximum(amp, a), amp)
        back = np.all(np.stack([cur[s] == r for s, r in zip(states, ref, strict=True)]), axis=0)
        period = np.where((period == 0) & back, t, period)
        if np.all(period > 0):
            break
    done = period > 0
    res = SectionCycles(sec, states, "bounded", lanes, box or {})
    amp = np.where(done, amp, 0)
    if np.any(amp > 0):
        best = int(np.argmax(amp))
        res.amplitude_lsb = int(amp[best])
        res.period = int(period[best])
        cyc = []
        st = {d: state[d][best : best + 1] for d in sim.delays}
        outs = []
        for _ in range(res.period):
            cyc.append([int(st[s][0]) for s in states])
            st, v, _ = sim.step(st)
            outs.append(abs(int(v[sim.output][0])))
        res.cycle = cyc
        res.output_amplitude_lsb = max(outs)
        res.cycles_found = len({tuple(sorted(map(tuple, cyc)))})
    return res


def _settle_steps(sim, states, cap: int = 20000) -> int:
    """Steps after which the linear part from any start is below one LSB (``||A^T|| ...``)."""
    graph = sim.graph
    model = linear_model(graph, coefficients="quantized", nodes=[n.name for n in sim.order])
    idx = [model.states.index(s) for s in states]
    A = model.A[np.ix_(idx, idx)]
    # weight states by their LSBs so the norm is in LSB units
    w = np.array([2.0 ** graph[s].format.frac for s in states])
    A = (A * w[:, None]) / w[None, :]
    big = max(max(abs(sim.ranges[s][0]), abs(sim.ranges[s][1])) for s in states)
    if np.max(np.abs(np.linalg.eigvals(A))) >= 1.0:
        return min(cap, 512)  # unstable: nothing decays; a short run shows what persists
    P = np.eye(len(A))
    for t in range(1, cap + 1):
        P = A @ P
        if np.max(np.sum(np.abs(P), axis=1)) * big < 0.5:
            return t + 16
    return cap


def overflow_oscillations(
    graph: Graph, *, lanes: int = 4096, seed: int = 0, max_steps: int = 20000
) -> list[SectionOverflow]:
    """Search every section for persistent oscillations started by large states."""
    rng = np.random.default_rng(seed)
    out = []
    for sec, members in section_members(graph).items():
        sim = SectionSimulator(graph, members)
        model, states = _recurrent(graph, members)
        rules = sorted({graph[n].overflow for n in members if graph[n].kind == "quantize"} - {None})
        if not states:
            out.append(SectionOverflow(sec, rules, None, False, 0, 0))
            continue
        cond = emt_condition(graph, sec)
        box = _box(graph, model, states, members)
        lows = [sim.ranges[s][0] for s in states]
        his = [sim.ranges[s][1] for s in states]
        vals = [rng.integers(lo, hi + 1, lanes) for lo, hi in zip(lows, his, strict=True)]
        corners = np.array(np.meshgrid(*[[lo, hi] for lo, hi in zip(lows, his, strict=True)]))
        corners = corners.reshape(len(states), -1)
        for i in range(len(states)):
            vals[i][: corners.shape[1]] = corners[i][:lanes]
        start = [v.copy() for v in vals]
        steps = min(_settle_steps(sim, states, cap=max_steps), max_steps)
        state = _full_state(sim, states, vals, lanes)
        state = _settle(sim, state, steps)
        amp = np.zeros(lanes)
        over = np.zeros(lanes, dtype=bool)
        cur = state
        for _ in range(256):  # a final window: still large, still overflowing?
            cur, _, o = sim.step(cur)
            over |= o
            big = np.zeros(lanes)
            for s in states:
                lim = (box or {}).get(s, 0)
                big = np.maximum(big, np.abs(cur[s].astype(np.float64)) - lim)
            amp = np.maximum(amp, big)
        persistent = (amp > 1) & over if box is not None else over
        res = SectionOverflow(sec, rules, cond, bool(np.any(persistent)), lanes, steps)
        if res.found:
            k = int(np.argmax(np.where(persistent, amp, -1)))
            res.start = [int(v[k]) for v in start]
            st = {d: cur[d][k : k + 1] for d in sim.delays}
            first = tuple(int(st[s][0]) for s in states)
            seen_amp = max(abs(x) for x in first)
            for t in range(1, 1 << 16):
                st, _, _ = sim.step(st)
                now = tuple(int(st[s][0]) for s in states)
                seen_amp = max(seen_amp, max(abs(x) for x in now))
                if now == first:
                    res.period = t
                    break
            res.amplitude_lsb = seen_amp
        out.append(res)
    return out
