"""The Amaranth component elaborated from a quantized graph.

Nodes map one to one onto hardware, computing exactly what :mod:`hwfilter.reference`
computes:

- ``delay``: a register, loaded when its latch stage holds an accepted sample
  (see :mod:`hwfilter.hdl.plan`); cleared by the synchronous reset, like every register;
- ``gain``: a multiplication by ``Const(value, signed(coefficient bits))``; a power-of-two
  value is a shift (and a negation when negative), a zero value a constant zero; the
  result is the node's full-precision word;
- ``add``: fractions aligned by left shifts, a balanced tree of two-input adders and
  subtractors; a sum narrowed below full precision wraps to its word;
- ``quantize``: the rounding rule as one addition and an arithmetic right shift, then
  saturation (two comparisons) or wrap (dropping the top bits) when the rounded range can
  leave the word;
- ``output``: the output register, loaded when the output stage holds a sample.

Ports follow :mod:`amaranth.lib.stream`: an input stream ``i`` (signed payload of the
input format, ``valid``, ``ready``) and an output stream ``o`` (signed payload of the
output format, ``valid``) without back-pressure (``always_ready``): the filter delivers one
output per accepted input, ``latency_cycles`` clocks later, and the consumer must take it.
"""

from __future__ import annotations

from amaranth.hdl import Cat, Const, Module, Mux, Signal, signed
from amaranth.lib import stream, wiring
from amaranth.lib.wiring import In, Out

from ..fixed import bits_for_range, is_power_of_two
from ..formats import node_ranges
from ..graph import Graph
from .plan import (
    HardwarePlan,
    balance_length,
    can_overflow,
    constant_low_bits,
    plan,
    read_stage,
    rounded_range,
    signal_names,
)

__all__ = ["FilterCore"]


class FilterCore(wiring.Component):
    """A filter datapath elaborated from a quantized graph.

    Parameters
    ----------
    graph : Graph
        A quantized graph.
    pipelining : str
        One of :data:`hwfilter.hdl.plan.PIPELININGS`.

    Attributes
    ----------
    i : stream.Interface
        Input samples, ``signed(input bits)``; a sample is taken in each cycle where
        ``i.valid`` and ``i.ready`` are high.
    o : stream.Interface
        Output samples, ``signed(output bits)``; ``o.valid`` is high for one cycle per
        accepted input, ``plan.latency_cycles`` after it.
    plan : HardwarePlan
    """

    def __init__(self, graph: Graph, *, pipelining: str = "none"):
        self._graph = graph
        self._plan = plan(graph, pipelining=pipelining)
        super().__init__(
            {
                "i": In(stream.Signature(signed(graph.input.format.bits))),
                "o": Out(stream.Signature(signed(graph.output.format.bits), always_ready=True)),
            }
        )

    @property
    def graph(self) -> Graph:
        return self._graph

    @property
    def plan(self) -> HardwarePlan:
        return self._plan

    def elaborate(self, platform):
        m = Module()
        g, p = self._graph, self._plan
        names = signal_names(g)
        ranges = node_ranges(g)
        zeros = constant_low_bits(g)
        cps = p.cycles_per_sample

        accept = Signal(name="accept")
        valid = [accept] + [Signal(name=f"valid_{k}") for k in range(1, p.valid_bits + 1)]
        m.d.comb += accept.eq(self.i.valid & self.i.ready)
        for k in range(1, len(valid)):
            m.d.sync += valid[k].eq(valid[k - 1])
        if cps > 1:
            m.d.comb += self.i.ready.eq(~Cat(*valid[1:cps]).any())
        else:
            m.d.comb += self.i.ready.eq(1)
        m.d.comb += self.o.valid.eq(valid[p.latency_cycles])

        sig = {
            n.name: Signal(signed(n.format.bits), name=names[n.name])
            for n in g.nodes
            if n.kind != "output"
        }
        chains: dict[str, list[Signal]] = {name: [s] for name, s in sig.items()}
        for r in p.pipeline_registers:
            if r.kind == "balance":
                reg = Signal(signed(r.bits), name=r.name)
                m.d.sync += reg.eq(chains[r.source][-1])
                chains[r.source].append(reg)

        def read(src: str, at: int):
            return chains[src][balance_length(g, src, at, p.stages, cps)]

        for n in g.nodes:
            stage = p.stages[n.name]
            if n.kind == "input":
                m.d.comb += sig[n.name].eq(self.i.payload)
            elif n.kind == "delay":
                with m.If(valid[stage]):
                    m.d.sync += sig[n.name].eq(read(n.inputs[0], stage))
            elif n.kind == "output":
                with m.If(valid[stage]):
                    m.d.sync += self.o.payload.eq(read(n.inputs[0], stage))
            else:
                at = read_stage(g, n.name, p.stages, p.registered)
                args = [read(src, at) for src in n.inputs]
                if n.kind == "gain":
                    value = _product(args[0], n, zeros[n.inputs[0]])
                elif n.kind == "add":
                    value = _sum(g, n, args, zeros)
                elif n.kind == "quantize":
                    value = _quantize(m, g, n, args[0], ranges, zeros, names[n.name])
                else:  # pragma: no cover - Graph.check rejects unknown kinds
                    raise ValueError(f"hardware does not know node kind {n.kind!r}")
                if n.name in p.registered:
                    comb = Signal(signed(n.format.bits), name=f"{names[n.name]}_product")
                    m.d.comb += comb.eq(value)
                    m.d.sync += sig[n.name].eq(comb)
                else:
                    m.d.comb += sig[n.name].eq(value)
        return m


def _product(x, node, zeros: int):
    """``x * value``: a constant multiplier, a shift, or zero.

    ``zeros`` low bits of ``x`` are known zero: the multiplier takes ``x >> zeros`` and the
    product is shifted back, so the zeros stay plain wiring that synthesis sees.
    """
    v = node.value
    if v == 0:
        return Const(0, signed(node.format.bits))
    xr = x >> zeros if zeros else x
    if is_power_of_two(v):
        shift = abs(v).bit_length() - 1 + zeros
        if v > 0:
            return xr << shift if shift else xr
        return (-xr) << shift if shift else -xr
    p = xr * Const(v, signed(node.coefficient_format.bits))
    return p << zeros if zeros else p


def _sum(g: Graph, node, args, zeros: dict):
    """Signed sum of aligned terms as a balanced tree of two-input adders.

    Each term enters without its known-zero low bits, at its offset in the sum; an adder
    of two words at different offsets passes the lower word's extra low bits through as
    wiring (no carry can come from them), so no adder ever adds constant zeros.
    """
    terms = []
    for sign, src, a in zip(node.signs, node.inputs, args):
        z = zeros[src]
        offset = node.format.frac - g[src].format.frac + z
        terms.append((sign, a >> z if z else a, offset))
    while len(terms) > 1:
        nxt = []
        for j in range(0, len(terms) - 1, 2):
            (sa, a, oa), (sb, b, ob) = terms[j], terms[j + 1]
            if sa == sb:
                nxt.append((sa, *_add2(a, oa, b, ob, "+")))
            elif sa > 0:
                nxt.append((1, *_add2(a, oa, b, ob, "-")))
            else:
                nxt.append((1, *_add2(b, ob, a, oa, "-")))
        if len(terms) % 2:
            nxt.append(terms[-1])
        terms = nxt
    sign, total, offset = terms[0]
    total = total if sign > 0 else -total
    return total << offset if offset else total


def _low_bits(a, d: int):
    """The low ``d`` bits of signed ``a`` (sign-extended when ``a`` is narrower)."""
    if d <= len(a):
        return a[:d]
    return Cat(a, a[-1].replicate(d - len(a)))


def _add2(a, oa: int, b, ob: int, op: str):
    """``a * 2**oa (op) b * 2**ob`` as ``(word, offset)``; ``op`` is ``"+"`` or ``"-"``."""
    if oa < ob:
        d = ob - oa
        hi = a >> d
        return Cat(_low_bits(a, d), hi + b if op == "+" else hi - b).as_signed(), oa
    if ob < oa:
        d = oa - ob
        if op == "+":
            return Cat(_low_bits(b, d), a + (b >> d)).as_signed(), ob
        return (a << d) - b, ob  # the low bits of -b need the carry chain
    return (a + b if op == "+" else a - b), oa


def _round(v, k: int, rounding: str):
    """``v / 2**k`` rounded: one addition and an arithmetic shift (k > 0)."""
    half = 1 << (k - 1)
    negative = v[-1]
    if rounding == "floor":
        return v >> k
    if rounding == "half-up":
        # (v + 2**(k-1)) >> k without adding constant zeros: the bits below k-1 cannot
        # carry into the result
        return ((v >> (k - 1)) + 1) >> 1
    if rounding == "toward-zero":
        return (v + Mux(negative, (1 << k) - 1, 0)) >> k
    if rounding == "half-away":
        return (v + Mux(negative, half - 1, half)) >> k
    if rounding == "half-even":
        # ties go to the even neighbour: add half - 1, plus one when the kept LSB is set
        kept_lsb = v[k] if k < len(v) else v[-1]  # a shift past the word keeps its sign
        return (v + (half - 1) + kept_lsb) >> k
    raise ValueError(f"hardware does not know rounding rule {rounding!r}")


def _quantize(m: Module, g: Graph, node, v, ranges, zeros: dict, name: str):
    """Rounding to the node's fraction bits, then saturation or wrap to its word.

    Known-zero low bits of the input are dropped first (that part of the shift is
    exact under every rule); the rounded word gets exactly the bits of its range.
    """
    src = g[node.inputs[0]]
    k = src.format.frac - node.format.frac
    fmt = node.format
    if k > 0:
        exact = min(zeros[src.name], k)
        vr = v >> exact if exact else v
        if k > exact:
            rlo, rhi = rounded_range(g, node, ranges)
            r = Signal(signed(bits_for_range(rlo, rhi)), name=f"{name}_rounded")
            m.d.comb += r.eq(_round(vr, k - exact, node.rounding))
        else:
            r = vr
    elif k < 0:
        r = v << -k
    else:
        r = v
    if node.overflow == "wrap" or not can_overflow(g, node, ranges):
        return r  # wrap, or always in range: the assignment keeps the low bits
    assert node.overflow == "saturate", node.overflow
    return Mux(r > fmt.max_int, fmt.max_int, Mux(r < fmt.min_int, fmt.min_int, r))
