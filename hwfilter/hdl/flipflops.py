"""Which of the plan's register bits survive synthesis, and why the others go.

:class:`~hwfilter.hdl.plan.HardwarePlan` counts every bit of every register word. A
synthesizer (Yosys ``opt_dff``/``opt_merge``/``opt_clean``, and any other) removes three
kinds of flip-flops, and this module finds each of them from the graph alone, by
building the design's bit-level structure the way :class:`~hwfilter.hdl.FilterCore`
writes it:

- **constant**: bits that are zero for every input (an even coefficient, an alignment
  shift, an exact requantization: :func:`~hwfilter.hdl.plan.constant_low_bits`);
- **unused**: bits no output depends on (a wrapping quantizer keeps only the low bits of
  its input, so the top bits of the products behind it feed nothing);
- **duplicate**: bits that hold the same data with the same enable as another flip-flop
  (two delays of one signal latched in the same stage, the equal products of a symmetric
  numerator, sign-extension copies, the equal low bits of a saturating left shift, an
  output word that is a shifted copy of a state).

The structure is hashed bit by bit (equal operation on equal input bits = equal bit) and
registers are merged as a synthesizer merges them: only when their data inputs are
already the same bits, repeated until nothing changes (delays in loops start distinct).
"""

from __future__ import annotations

from dataclasses import dataclass, field

from ..fixed import bits_for_range, is_power_of_two
from ..formats import node_ranges
from ..graph import Graph
from .plan import (
    HardwarePlan,
    balance_length,
    can_overflow,
    constant_low_bits,
    read_stage,
    rounded_range,
)

__all__ = ["FlipFlopCount", "flip_flop_count"]

_ZERO = 0  # the id of a constant-zero bit


@dataclass(frozen=True)
class FlipFlopCount:
    """Register bits of a plan, split by what synthesis does with them.

    ``words`` = ``constant + unused + duplicate + kept``; ``by_register`` maps each
    register name to its ``{"bits", "constant", "unused", "duplicate", "kept"}`` counts
    and ``"kept_bits"``, the indices of its kept bits (bit 0 the lowest).
    """

    words: int
    constant: int
    unused: int
    duplicate: int
    kept: int
    by_register: dict = field(repr=False, default_factory=dict)

    def as_dict(self) -> dict:
        return {
            "words": self.words,
            "constant": self.constant,
            "unused": self.unused,
            "duplicate": self.duplicate,
            "kept": self.kept,
        }


class _Netlist:
    """Bit ids (ints) interned from structural keys, and each id's input bits."""

    def __init__(self):
        self._ids: dict = {}
        self.deps: dict[int, tuple[int, ...]] = {}

    def bit(self, key, deps=()) -> int:
        i = self._ids.get(key)
        if i is None:
            i = self._ids[key] = len(self._ids) + 1
            self.deps[i] = tuple(d for d in deps if d != _ZERO)
        return i


def _ext(word: list[int], j: int) -> int:
    """Bit ``j`` of a signed word, sign-extended."""
    return word[j] if j < len(word) else word[-1]


def flip_flop_count(graph: Graph, p: HardwarePlan) -> FlipFlopCount:
    """Split the plan's register bits into constant, unused, duplicate and kept.

    Parameters
    ----------
    graph : Graph
        The quantized graph the plan was made for.
    p : HardwarePlan
        Its plan (:func:`hwfilter.hdl.plan`).

    Notes
    -----
    Constant multipliers are taken as multiplier blocks whose product bits are opaque
    (ECP5 ``MULT18X18D``, iCE40 ``SB_MAC16``), as synthesis treats them. When a
    synthesizer builds them from LUTs instead, its logic optimization may also prove
    some product bits equal (the low bits of ``x * c`` depend only on the low bits of
    ``c``; bit ``t`` of ``x * c'2**t`` is bit 0 of ``x``) and merge a few more registers
    holding them: the count here is then an upper bound.
    """
    ranges = node_ranges(graph)
    zeros = constant_low_bits(graph)
    order = graph.topological_order()
    cps = p.cycles_per_sample
    delays = graph.delays
    out = graph.output
    delay_ids = {
        d.name: [-(k + 1) - 1000 * i for k in range(d.format.bits)] for i, d in enumerate(delays)
    }

    def evaluate(net: _Netlist):
        words: dict[str, list[int]] = {}
        chains: dict[tuple[str, int], list[int]] = {}

        def chain(src: str, k: int) -> list[int]:
            if k == 0:
                return words[src]
            key = (src, k)
            if key not in chains:
                prev = chain(src, k - 1)
                chains[key] = [b if b == _ZERO else net.bit(("free", b), (b,)) for b in prev]
            return chains[key]

        def read(src: str, at: int) -> list[int]:
            return chain(src, balance_length(graph, src, at, p.stages, cps))

        for n in order:
            bits = n.format.bits
            if n.kind == "input":
                words[n.name] = [net.bit(("x", j)) for j in range(bits)]
            elif n.kind == "delay":
                words[n.name] = list(delay_ids[n.name])
            elif n.kind == "output":
                words[n.name] = read(n.inputs[0], p.stages[n.name])
            else:
                at = read_stage(graph, n.name, p.stages, p.registered)
                args = [read(s, at) for s in n.inputs]
                if n.kind == "gain":
                    w = _gain(net, n, args[0], zeros[n.inputs[0]])
                elif n.kind == "add":
                    w = _add(net, graph, n, args, zeros)
                else:
                    w = _quantize(net, graph, n, args[0], ranges, zeros)
                if n.name in p.registered:
                    w = [b if b == _ZERO else net.bit(("free", b), (b,)) for b in w]
                words[n.name] = w
        return words, chains, read

    # delays (and the output register, loaded like one) merge when their data inputs are
    # the same bits with the same enable: repeat until the partition is stable
    while True:
        net = _Netlist()
        words, chains, read = evaluate(net)
        groups: dict = {}
        for d in delays:
            data = read(d.inputs[0], p.stages[d.name])
            for j, b in enumerate(data):
                groups.setdefault((p.stages[d.name], b), []).append((d.name, j))
        changed = False
        for (_, b), members in groups.items():
            new = _ZERO if b == _ZERO else max(delay_ids[name][j] for name, j in members)
            for name, j in members:
                if delay_ids[name][j] != new:
                    delay_ids[name][j] = new
                    changed = True
        if not changed:
            break

    # the register bits of the design, as (register name, kind, bit ids, data ids)
    registers = []
    for d in delays:
        data = read(d.inputs[0], p.stages[d.name])
        registers.append((d.name, "state", delay_ids[d.name], data, p.stages[d.name]))
    for r in p.pipeline_registers:
        if r.kind == "product":
            ids = words[r.source]
        elif r.kind == "balance":
            ids = chains[(r.source, r.stage - p.stages[r.source])]
        else:
            ids = None  # the output register: below
        if ids is not None:
            registers.append((r.name, "pipeline", ids, None, None))
    out_data = read(out.inputs[0], p.stages[out.name])
    # an output bit with the same data and enable as a delay bit is that delay bit
    delay_key = {}
    for _, _, ids, data, stage in registers:
        if data is not None:
            for b, dbit in zip(ids, data):
                delay_key.setdefault((stage, dbit), b)
    out_ids = []
    for b in out_data:
        if b == _ZERO:
            out_ids.append(_ZERO)
        else:
            out_ids.append(delay_key.get((p.stages[out.name], b)) or net.bit(("out", b), (b,)))
    registers.append(("o__payload", "pipeline", out_ids, out_data, p.stages[out.name]))

    # used bits: everything the output word depends on, through registers' data inputs
    data_of: dict[int, int] = {}
    for _, _, ids, data, _ in registers:
        if data is not None:
            for b, dbit in zip(ids, data):
                if b != _ZERO:
                    data_of.setdefault(b, dbit)
    used: set[int] = set()
    work = [b for b in out_ids if b != _ZERO]
    while work:
        b = work.pop()
        if b in used:
            continue
        used.add(b)
        if b in data_of:
            work.append(data_of[b])
        work.extend(net.deps.get(b, ()))

    seen: set[int] = set()
    by_register = {}
    totals = {"constant": 0, "unused": 0, "duplicate": 0, "kept": 0}
    for name, _, ids, _, _ in registers:
        c = {"bits": len(ids), "constant": 0, "unused": 0, "duplicate": 0, "kept": 0}
        kept_bits = []
        for j, b in enumerate(ids):
            if b == _ZERO:
                c["constant"] += 1
            elif b not in used:
                c["unused"] += 1
            elif b in seen:
                c["duplicate"] += 1
            else:
                c["kept"] += 1
                kept_bits.append(j)
                seen.add(b)
        by_register[name] = {**c, "kept_bits": tuple(kept_bits)}
        for k in totals:
            totals[k] += c[k]
    control = p.register_bits["control"]
    by_register["valid"] = {
        "bits": control,
        "constant": 0,
        "unused": 0,
        "duplicate": 0,
        "kept": control,
        "kept_bits": tuple(range(control)),
    }
    totals["kept"] += control
    words_total = sum(c["bits"] for c in by_register.values())
    assert words_total == p.total_register_bits, (words_total, p.total_register_bits)
    return FlipFlopCount(words=words_total, by_register=by_register, **totals)


def _gain(net: _Netlist, n, x: list[int], zx: int) -> list[int]:
    bits = n.format.bits
    v = n.value
    if v == 0:
        return [_ZERO] * bits
    xr = x[zx:]
    if is_power_of_two(v) and v > 0:
        shift = v.bit_length() - 1 + zx
        return [_ZERO if j < shift else _ext(xr, j - shift) for j in range(bits)]
    t = (abs(v) & -abs(v)).bit_length() - 1
    if v < 0 and is_power_of_two(v):
        key = ("neg", tuple(xr))
        prod = [net.bit((key, i), xr[: i + 1]) for i in range(len(xr) + 1)]
    else:
        # a multiplier block: its product bits are opaque (the t low zeros aside)
        key = ("mul", v, n.coefficient_format.bits, tuple(xr))
        width = len(xr) + n.coefficient_format.bits
        prod = [net.bit((key, i), xr[: i + 1]) for i in range(width)]
    return [_ZERO if j < zx + t else _ext(prod, j - zx - t) for j in range(bits)]


def _adder(net: _Netlist, key, a: list[int], b: list[int], op: str) -> list[int]:
    """One two-input adder (``op``: ``"+"``, or ``"-"`` for a - b), one bit wider.

    Bit j depends on bits 0..j of both words (the carry chain).
    """
    width = max(len(a), len(b)) + 1
    out = []
    for j in range(width):
        deps = [_ext(a, q) for q in range(j + 1)] + [_ext(b, q) for q in range(j + 1)]
        out.append(net.bit((key, op, j), deps))
    return out


def _low(a: list[int], d: int) -> list[int]:
    return [_ext(a, j) for j in range(d)]


def _high(a: list[int], d: int) -> list[int]:
    return a[d:] if d < len(a) else [a[-1]]


def _add2(net: _Netlist, key, a, oa: int, b, ob: int, op: str):
    """:func:`hwfilter.hdl.core._add2`, bit by bit."""
    if oa < ob:
        d = ob - oa
        return _low(a, d) + _adder(net, key, _high(a, d), b, op), oa
    if ob < oa:
        d = oa - ob
        if op == "+":
            return _low(b, d) + _adder(net, key, a, _high(b, d), op), ob
        return _adder(net, key, [_ZERO] * d + a, b, op), ob
    return _adder(net, key, a, b, op), oa


def _add(net: _Netlist, graph: Graph, n, args, zeros) -> list[int]:
    """The adder tree of :func:`hwfilter.hdl.core._sum`, bit by bit."""
    terms = []
    for sign, src, a in zip(n.signs, n.inputs, args):
        z = zeros[src]
        offset = n.format.frac - graph[src].format.frac + z
        terms.append((sign, a[z:] if z < len(a) else [_ZERO], offset))
    key = ("add", tuple((sg, tuple(w), o) for sg, w, o in terms))
    level = 0
    while len(terms) > 1:
        nxt = []
        for j in range(0, len(terms) - 1, 2):
            (sa, a, oa), (sb, b, ob) = terms[j], terms[j + 1]
            node = (key, level, j)
            if sa == sb:
                nxt.append((sa, *_add2(net, node, a, oa, b, ob, "+")))
            elif sa > 0:
                nxt.append((1, *_add2(net, node, a, oa, b, ob, "-")))
            else:
                nxt.append((1, *_add2(net, node, b, ob, a, oa, "-")))
        if len(terms) % 2:
            nxt.append(terms[-1])
        terms = nxt
        level += 1
    sign, total, offset = terms[0]
    if sign < 0:
        total = _adder(net, (key, "negate"), [_ZERO], total, "-")
    word = [_ZERO] * offset + total
    return [_ext(word, j) for j in range(n.format.bits)]


def _quantize(net: _Netlist, graph: Graph, n, v: list[int], ranges, zeros) -> list[int]:
    src = graph[n.inputs[0]]
    k = src.format.frac - n.format.frac
    bits = n.format.bits
    if k > 0:
        exact = min(zeros[src.name], k)
        vr = v[exact:]
        kk = k - exact
        if kk > 0:
            rlo, rhi = rounded_range(graph, n, ranges)
            width = bits_for_range(rlo, rhi)
            if n.rounding == "floor":
                r = [_ext(vr, j + kk) for j in range(width)]
            elif n.rounding == "half-up":
                one = [net.bit(("one",)), _ZERO]
                total = _adder(net, ("round", tuple(vr), kk), _high(vr, kk - 1), one, "+")
                r = [_ext(total, j + 1) for j in range(width)]
            else:
                key = ("round", n.rounding, kk, tuple(vr))
                sign = [vr[-1]] if n.rounding in ("toward-zero", "half-away") else []
                r = [
                    net.bit((key, j), [_ext(vr, q) for q in range(j + kk + 1)] + sign)
                    for j in range(width)
                ]
        else:
            r = vr
    elif k < 0:
        r = [_ZERO] * (-k) + v
    else:
        r = v
    if n.overflow == "wrap" or not can_overflow(graph, n, ranges):
        return [_ext(r, j) for j in range(bits)]
    # bit j is (r > max) ? max[j] : (r < min) ? min[j] : r[j]; below the top bit max[j]
    # is 1 and min[j] is 0, so bits that take equal r bits are one and the same signal
    key = ("saturate", bits, tuple(r))
    return [net.bit((key, "low" if j < bits - 1 else "top", _ext(r, j)), r) for j in range(bits)]
