"""The hardware plan: in which clock cycle every node is computed, and the registers.

A sample is *accepted* in the clock cycle where ``i.valid`` and ``i.ready`` are both high;
that cycle is stage 0 of the sample. Every node gets a **stage**: the cycle (counted from
acceptance) in which its combinational value belongs to that sample. Registers between
stages advance on every clock, so a value at stage ``s`` is available at stage ``s + k``
through ``k`` pipeline registers ("balance" registers); a one-hot *valid chain* of
``latency`` bits tells each stage whether it holds a real sample.

Scheduling rules (as-soon-as-possible, a longest-path fixpoint):

==================  ===================================================================
node                stage
==================  ===================================================================
input               0
registered product  stage of its input + 1 (a pipeline register on the multiplier)
other node          the latest stage among its inputs (earlier inputs are balanced)
delay (state)       latched in the cycle of its input's stage (its *latch stage* ``L``)
                    when that stage's valid bit is high; the next sample may read it
                    from stage ``L - (cycles_per_sample - 1)`` on
output              its input's stage; then one output register (``latency = stage + 1``)
==================  ===================================================================

A recursive loop closes through a delay: a loop holding ``R`` pipeline registers and
``D`` delays is only schedulable when ``R <= (cycles_per_sample - 1) * D``. So at one
sample per clock no register may sit inside a loop; pipelining ``"registered-products"``
registers only the multipliers outside every loop (feed-forward paths), and
``"registered-all-products"`` registers every multiplier and takes the fewest clocks per
sample that make its loops schedulable. While a sample is in its first
``cycles_per_sample`` cycles, ``i.ready`` is low (read from the valid chain).

===========================  ==============================================================
pipelining                   meaning
===========================  ==============================================================
``none``                     every node at stage 0: one sample per clock, the longest path
                             is the whole combinational datapath between registers;
                             latency 1 (the output register)
``registered-products``      a register after every multiplier on a feed-forward path
                             (products of power-of-two gains are wires, not registered);
                             still one sample per clock
``registered-all-products``  a register after every multiplier, inside loops too; several
                             clocks per sample when a loop holds a register
===========================  ==============================================================
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

from ..fixed import is_power_of_two, round_shift
from ..formats import node_ranges
from ..graph import VERILOG_KEYWORDS, Graph, GraphError, strongly_connected_components

__all__ = [
    "PIPELININGS",
    "PipelineRegister",
    "HardwarePlan",
    "plan",
    "signal_names",
    "is_multiplier",
    "loop_nodes",
    "can_overflow",
    "rounded_range",
    "constant_low_bits",
    "read_stage",
    "balance_length",
]

#: pipelining options, in order of increasing registers
PIPELININGS = ("none", "registered-products", "registered-all-products")

#: Verilog-2005 keywords (IEEE 1364-2005 Annex B) and names the ports use; a node named
#: like one gets a suffix
_RESERVED = VERILOG_KEYWORDS | {"clk", "rst", "accept"}


@dataclass(frozen=True)
class PipelineRegister:
    """One pipeline register (a word of ``bits`` flip-flops, advancing every clock).

    ``kind`` is ``"product"`` (after a multiplier), ``"balance"`` (delays ``source`` by
    one more clock so that a later stage can read it) or ``"output"`` (the output word,
    loaded when the output stage holds a sample).
    """

    name: str
    source: str
    kind: str
    bits: int
    stage: int

    def as_dict(self) -> dict:
        return {
            "name": self.name,
            "source": self.source,
            "kind": self.kind,
            "bits": self.bits,
            "stage": self.stage,
        }


@dataclass(frozen=True)
class HardwarePlan:
    """Stages and registers of one graph under one pipelining option.

    Attributes
    ----------
    pipelining : str
        One of :data:`PIPELININGS`.
    latency_cycles : int
        Clocks from the accepting edge of a sample's input to the edge after which its
        output is on ``o.payload`` with ``o.valid`` high.
    cycles_per_sample : int
        Clocks between two accepted samples at the fastest (``i.ready`` is low between).
    stages : dict
        Stage of every node's value (for a delay: its latch stage).
    registered : frozenset
        Gain nodes followed by a product register.
    pipeline_registers : tuple of PipelineRegister
    valid_bits : int
        Length of the valid chain (the control flip-flops).
    register_bits : dict
        Flip-flops by purpose: ``state`` (delays), ``pipeline`` (product, balance and
        output registers), ``control`` (the valid chain).
    """

    pipelining: str
    latency_cycles: int
    cycles_per_sample: int
    stages: dict = field(repr=False)
    registered: frozenset = field(repr=False)
    pipeline_registers: tuple = field(repr=False)
    valid_bits: int = 0
    register_bits: dict = field(default_factory=dict)

    @property
    def total_register_bits(self) -> int:
        """Flip-flops of every register word (state + pipeline + control)."""
        return sum(self.register_bits.values())

    def as_dict(self) -> dict:
        return {
            "pipelining": self.pipelining,
            "latency_cycles": self.latency_cycles,
            "cycles_per_sample": self.cycles_per_sample,
            "register_bits": dict(self.register_bits),
            "valid_bits": self.valid_bits,
            "registered_products": sorted(self.registered),
            "pipeline_registers": [r.as_dict() for r in self.pipeline_registers],
        }


def is_multiplier(node) -> bool:
    """True for a gain that needs a multiplier (not zero, not a power of two)."""
    return node.kind == "gain" and node.value not in (None, 0) and not is_power_of_two(node.value)


def loop_nodes(graph: Graph) -> frozenset:
    """Names of the nodes on some recursive loop (strongly connected, through delays)."""
    succ: dict[str, list[str]] = {n.name: [] for n in graph.nodes}
    for n in graph.nodes:
        for s in n.inputs:
            succ[s].append(n.name)
    return frozenset(
        w
        for comp in strongly_connected_components(succ)
        if len(comp) > 1 or comp[0] in succ[comp[0]]
        for w in comp
    )


def rounded_range(graph: Graph, node, ranges: dict | None = None) -> tuple[int, int]:
    """Exact range of quantize ``node``'s input after rounding, before overflow."""
    ranges = node_ranges(graph) if ranges is None else ranges
    src = graph[node.inputs[0]]
    lo, hi, _ = ranges[src.name]
    if lo < src.format.min_int or hi > src.format.max_int:  # a narrowed sum wraps: any word
        lo, hi = src.format.min_int, src.format.max_int
    k = src.format.frac - node.format.frac
    return round_shift(lo, k, node.rounding), round_shift(hi, k, node.rounding)


def can_overflow(graph: Graph, node, ranges: dict | None = None) -> bool:
    """True when quantize ``node``'s rounded input can leave its word (so overflow acts)."""
    rlo, rhi = rounded_range(graph, node, ranges)
    return rlo < node.format.min_int or rhi > node.format.max_int


def constant_low_bits(graph: Graph) -> dict[str, int]:
    """Low bits of every node's word that are zero for every input (known zeros).

    A product by an even constant, a fraction alignment shift or an exact requantization
    leaves its low bits zero: registers holding them are constant there, and synthesis
    removes those flip-flops. Saturation can produce the odd word ``max_int``, so a
    saturating quantizer that can overflow has none. A delay knows its input's zeros
    only as far as constant propagation from reset shows them (the least fixpoint:
    start from none and repeat), which is also all that synthesis can prove.
    """
    ranges = node_ranges(graph)
    order = graph.topological_order()
    tz = {d.name: 0 for d in graph.delays}
    while True:
        for n in order:
            if n.kind == "delay":
                continue
            bits = n.format.bits
            if n.kind == "input":
                z = 0
            elif n.kind == "output":
                z = tz[n.inputs[0]]
            elif n.kind == "gain":
                v = abs(n.value)
                z = bits if v == 0 else tz[n.inputs[0]] + (v & -v).bit_length() - 1
            elif n.kind == "add":
                z = min(tz[s] + n.format.frac - graph[s].format.frac for s in n.inputs)
            else:
                src = graph[n.inputs[0]]
                k = src.format.frac - n.format.frac
                z = tz[src.name] - k if tz[src.name] >= k else 0
                if n.overflow == "saturate" and can_overflow(graph, n, ranges):
                    z = 0
            tz[n.name] = min(max(z, 0), bits)
        changed = False
        for d in graph.delays:
            z = min(tz[d.inputs[0]], d.format.bits)
            if z > tz[d.name]:
                tz[d.name] = z
                changed = True
        if not changed:
            return tz


def signal_names(graph: Graph) -> dict[str, str]:
    """A unique, legal Verilog identifier for every node (``s1.w`` -> ``s1_w``)."""
    names: dict[str, str] = {}
    used: set[str] = set(_RESERVED)
    for n in graph.nodes:
        base = re.sub(r"\W", "_", n.name)
        if not base or base[0].isdigit() or base[0] == "_":
            base = "n_" + base
        cand, k = base, 1
        while cand in used or cand.startswith(("i__", "o__", "valid_")):
            k += 1
            cand = f"{base}_{k}"
        used.add(cand)
        names[n.name] = cand
    return names


def _schedule(graph: Graph, registered: frozenset, cps: int) -> dict[str, int] | None:
    """Stages by the rules in the module docstring; None when a loop is unschedulable."""
    stage = {n.name: 0 for n in graph.nodes}

    def ready(src: str) -> int:
        # earliest stage at which a reader may take ``src`` for the current sample
        if graph[src].kind == "delay":
            return max(0, stage[src] - (cps - 1))
        return stage[src]

    for _ in range(len(graph.nodes) + 2):
        changed = False
        for n in graph.nodes:
            if n.kind == "input":
                continue
            s = max((ready(src) for src in n.inputs), default=0)
            if n.name in registered:
                s += 1
            if s > stage[n.name]:
                stage[n.name] = s
                changed = True
        if not changed:
            return stage
    return None


def read_stage(graph: Graph, reader: str, stages: dict[str, int], registered) -> int:
    """The stage in which node ``reader`` reads its inputs."""
    s = stages[reader]
    return s - 1 if reader in registered else s


def balance_length(graph: Graph, src: str, at: int, stages: dict[str, int], cps: int) -> int:
    """Pipeline registers needed to read ``src`` at stage ``at`` (0: read it directly)."""
    s = stages[src]
    if graph[src].kind == "delay":
        # the register holds the previous sample's word from stage s - (cps - 1) to s
        assert at >= s - (cps - 1), (src, at, s)
        return max(0, at - s)
    assert at >= s, (src, at, s)
    return at - s


def plan(graph: Graph, *, pipelining: str = "none") -> HardwarePlan:
    """Schedule a quantized graph for hardware: stages, latency, rate and registers.

    Parameters
    ----------
    graph : Graph
        A quantized graph (every node has a format, every gain an integer value).
    pipelining : str
        One of :data:`PIPELININGS`.

    Returns
    -------
    HardwarePlan

    Raises
    ------
    ValueError
        For an unknown pipelining option or a graph that is not quantized.
    """
    if pipelining not in PIPELININGS:
        raise ValueError(f"pipelining must be one of {', '.join(PIPELININGS)}, not {pipelining!r}")
    if not graph.is_quantized:
        raise ValueError(f"graph {graph.name!r} must be quantized before hardware generation")
    graph.check()
    loops = loop_nodes(graph)
    if pipelining == "none":
        registered = frozenset()
    elif pipelining == "registered-products":
        registered = frozenset(
            n.name for n in graph.nodes if is_multiplier(n) and n.name not in loops
        )
    else:
        registered = frozenset(n.name for n in graph.nodes if is_multiplier(n))
    cps = 1
    while True:
        stages = _schedule(graph, registered, cps)
        if stages is not None:
            break
        cps += 1
        if cps > len(graph.nodes) + 1:  # pragma: no cover - R <= nodes bounds cps
            raise GraphError(f"graph {graph.name!r} cannot be scheduled")
    names = signal_names(graph)
    regs: list[PipelineRegister] = []
    for n in graph.nodes:
        if n.name in registered:
            regs.append(
                PipelineRegister(names[n.name], n.name, "product", n.format.bits, stages[n.name])
            )
    # balance registers: per source, as many as its latest reader needs
    need: dict[str, int] = {}
    for n in graph.nodes:
        if n.kind == "input":
            continue
        at = (
            stages[n.name]
            if n.kind in ("delay", "output")
            else read_stage(graph, n.name, stages, registered)
        )
        for src in n.inputs:
            k = balance_length(graph, src, at, stages, cps)
            need[src] = max(need.get(src, 0), k)
    for n in graph.nodes:
        base = stages[n.name]
        for k in range(1, need.get(n.name, 0) + 1):
            regs.append(
                PipelineRegister(
                    f"{names[n.name]}_d{k}", n.name, "balance", n.format.bits, base + k
                )
            )
    out = graph.output
    latency = stages[out.name] + 1
    regs.append(PipelineRegister("o__payload", out.name, "output", out.format.bits, latency))
    latch = max((stages[d.name] for d in graph.delays), default=0)
    valid_bits = max(latency, latch, cps - 1)
    register_bits = {
        "state": sum(d.format.bits for d in graph.delays),
        "pipeline": sum(r.bits for r in regs),
        "control": valid_bits,
    }
    return HardwarePlan(
        pipelining=pipelining,
        latency_cycles=latency,
        cycles_per_sample=cps,
        stages=stages,
        registered=registered,
        pipeline_registers=tuple(regs),
        valid_bits=valid_bits,
        register_bits=register_bits,
    )
