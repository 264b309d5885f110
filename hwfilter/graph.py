"""The signal-flow graph: hwfilter's one intermediate representation.

A graph is an immutable tuple of nodes. Every realization builds one; every feature is a
pass that reads or rewrites one.

==========  ==============  =========================================================
kind        inputs          meaning and output format
==========  ==============  =========================================================
input       none            the filter input; format = input format
output      1               the filter output; format = its input's format
delay       1               one sample of state (z^-1); format = its input's format
gain        1               multiply by ``coefficient`` (float design value); when
                            quantized, by the integer ``value`` in ``coefficient_format``;
                            output format is full precision (exact range of the product)
add         n, with signs   sum of ``signs[i] * inputs[i]``; full precision (fractions
                            aligned, range grown exactly) unless a pass narrows it, in
                            which case the sum wraps to the narrower word
quantize    1               the only lossy node: to ``format`` by ``rounding``/``overflow``
==========  ==============  =========================================================

Per sample: delay outputs hold the previous sample's state; the delay-free part of the
graph is evaluated in topological order; then every delay latches its input.

Node names are readable (``s2.b1``, ``s2.w1``, ``acc``) and flow into Verilog signal
names, reports and error messages. ``role`` tells passes where a quantize node sits
(``state``, ``section-output``, ``output``, ``product``); ``group`` names the coefficient
group that shares one binary point (for example ``s1.b``); ``section`` names the
section a node belongs to (``s1``) or is empty.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

from .fixed import Format

__all__ = [
    "NODE_KINDS",
    "Node",
    "Graph",
    "GraphError",
    "strongly_connected_components",
    "VERILOG_KEYWORDS",
]

#: Verilog-2005 reserved words (IEEE 1364-2005 Annex B): no module or signal may use one
VERILOG_KEYWORDS = frozenset(
    """always and assign automatic begin buf bufif0 bufif1 case casex casez cell cmos config
    deassign default defparam design disable edge else end endcase endconfig endfunction
    endgenerate endmodule endprimitive endspecify endtable endtask event for force forever
    fork function generate genvar highz0 highz1 if ifnone incdir include initial inout input
    instance integer join large liblist library localparam macromodule medium module nand
    negedge nmos nor noshowcancelled not notif0 notif1 or output parameter pmos posedge
    primitive pull0 pull1 pulldown pullup pulsestyle_onevent pulsestyle_ondetect rcmos real
    realtime reg release repeat rnmos rpmos rtran rtranif0 rtranif1 scalared showcancelled
    signed small specify specparam strong0 strong1 supply0 supply1 table task time tran
    tranif0 tranif1 tri tri0 tri1 triand trior trireg unsigned use uwire vectored wait wand
    weak0 weak1 while wire wor xnor xor""".split()
)
NODE_KINDS = ("input", "output", "delay", "gain", "add", "quantize")
_ARITY = {"input": 0, "output": 1, "delay": 1, "gain": 1, "quantize": 1}


class GraphError(ValueError):
    """A graph breaks one of the invariants checked by :meth:`Graph.check`."""


@dataclass(frozen=True)
class Node:
    """One node of a signal-flow graph (see the module docstring for the kinds)."""

    name: str
    kind: str
    inputs: tuple[str, ...] = ()
    signs: tuple[int, ...] = ()
    coefficient: float | None = None
    value: int | None = None
    coefficient_format: Format | None = None
    format: Format | None = None
    rounding: str | None = None
    overflow: str | None = None
    role: str = ""
    group: str = ""
    section: str = ""

    def replace(self, **changes) -> Node:
        return dataclasses.replace(self, **changes)

    @property
    def quantized_coefficient(self) -> float:
        """The coefficient the hardware multiplies by (the design value until quantized)."""
        assert self.kind == "gain"
        if self.value is None:
            return float(self.coefficient)
        return self.value * 2.0**-self.coefficient_format.frac


@dataclass(frozen=True)
class Graph:
    """An immutable signal-flow graph with one input and one output node.

    ``form`` and ``section_form`` record the realization that built it (for reports
    only: no pass may depend on them); ``sections`` lists section names in signal order.
    """

    name: str
    nodes: tuple[Node, ...]
    form: str = ""
    section_form: str = ""
    sections: tuple[str, ...] = ()
    _index: dict = field(default=None, init=False, repr=False, compare=False, hash=False)

    def __post_init__(self):
        object.__setattr__(self, "_index", {n.name: n for n in self.nodes})

    # -- lookup ---------------------------------------------------------------------
    def __getitem__(self, name: str) -> Node:
        return self._index[name]

    def __contains__(self, name: str) -> bool:
        return name in self._index

    def __iter__(self):
        return iter(self.nodes)

    def of_kind(self, *kinds: str) -> list[Node]:
        return [n for n in self.nodes if n.kind in kinds]

    @property
    def input(self) -> Node:
        return self.of_kind("input")[0]

    @property
    def output(self) -> Node:
        return self.of_kind("output")[0]

    @property
    def delays(self) -> list[Node]:
        return self.of_kind("delay")

    def users(self, name: str) -> list[Node]:
        """Nodes that read ``name``."""
        return [n for n in self.nodes if name in n.inputs]

    @property
    def is_quantized(self) -> bool:
        return all(n.format is not None for n in self.nodes) and all(
            n.value is not None for n in self.of_kind("gain")
        )

    # -- rewriting --------------------------------------------------------------------
    def replace_nodes(self, changed: dict[str, Node] | list[Node]) -> Graph:
        """A new graph with some nodes replaced by name (order kept)."""
        if not isinstance(changed, dict):
            changed = {n.name: n for n in changed}
        nodes = tuple(changed.get(n.name, n) for n in self.nodes)
        return dataclasses.replace(self, nodes=nodes)

    # -- invariants -----------------------------------------------------------------
    def topological_order(self) -> list[Node]:
        """Every node in evaluation order of the delay-free part.

        Delay outputs and the input are sources (they are known at the start of a
        sample); the order puts each other node after all nodes it reads. Raises
        :class:`GraphError` on a delay-free loop, naming the nodes in it.
        """
        order: list[Node] = []
        state: dict[str, int] = {}  # 1 visiting, 2 done

        def visit(node: Node, path: list[str]):
            s = state.get(node.name)
            if s == 2:
                return
            if s == 1:
                loop = path[path.index(node.name) :] + [node.name]
                raise GraphError(f"graph {self.name!r} has a delay-free loop: {' -> '.join(loop)}")
            state[node.name] = 1
            if node.kind != "delay":
                for src in node.inputs:
                    visit(self._index[src], path + [node.name])
            state[node.name] = 2
            order.append(node)

        # iterative deepening is not needed at our sizes; recursion depth ~ graph depth
        for n in self.nodes:
            visit(n, [])
        return order

    def check(self) -> Graph:
        """Check the invariants in one place; returns the graph for chaining."""
        seen = set()
        for n in self.nodes:
            if n.kind not in NODE_KINDS:
                raise GraphError(
                    f"node {n.name!r} kind must be one of {', '.join(NODE_KINDS)}, not {n.kind!r}"
                )
            if n.name in seen:
                raise GraphError(f"node name {n.name!r} is used twice in graph {self.name!r}")
            seen.add(n.name)
        for n in self.nodes:
            want = _ARITY.get(n.kind)
            if want is not None and len(n.inputs) != want:
                raise GraphError(
                    f"node {n.name!r} ({n.kind}) must have {want} input(s), not {len(n.inputs)}"
                )
            if n.kind == "add":
                if not n.inputs:
                    raise GraphError(f"add node {n.name!r} must have at least one input")
                if len(n.signs) != len(n.inputs) or any(s not in (1, -1) for s in n.signs):
                    raise GraphError(
                        f"add node {n.name!r} must have one sign (+1 or -1) per input, "
                        f"not {n.signs!r}"
                    )
            if n.kind == "gain" and n.coefficient is None:
                raise GraphError(f"gain node {n.name!r} must have a coefficient")
            if n.kind == "quantize" and n.format is not None:
                if n.rounding is None or n.overflow is None:
                    raise GraphError(f"quantize node {n.name!r} must have rounding and overflow")
            for src in n.inputs:
                if src not in self._index:
                    raise GraphError(f"node {n.name!r} reads {src!r}, which is not in the graph")
                if self._index[src].kind == "output":
                    raise GraphError(f"node {n.name!r} reads the output node {src!r}")
        if len(self.of_kind("input")) != 1 or len(self.of_kind("output")) != 1:
            raise GraphError(f"graph {self.name!r} must have exactly one input and one output")
        self.topological_order()
        return self

    def counts(self) -> dict[str, int]:
        """Node counts by kind, plus ``adders`` (two-input adders: n-input add = n - 1)."""
        c = {k: 0 for k in NODE_KINDS}
        for n in self.nodes:
            c[n.kind] += 1
        c["adders"] = sum(len(n.inputs) - 1 for n in self.of_kind("add"))
        return c


def strongly_connected_components(successors: dict) -> list[list]:
    """Strongly connected components of a directed graph (Tarjan's algorithm, iterative).

    ``successors`` maps every vertex to the vertices it has edges to (every successor
    must itself be a key). Components come out in Tarjan's order (reverse topological:
    a component before those that reach it), vertices in the order they were closed.
    """
    index: dict = {}
    low: dict = {}
    on_stack: set = set()
    stack: list = []
    out: list[list] = []
    counter = 0
    for root in successors:
        if root in index:
            continue
        work = [(root, 0)]
        index[root] = low[root] = counter
        counter += 1
        stack.append(root)
        on_stack.add(root)
        while work:
            u, pos = work[-1]
            succ = successors[u]
            if pos < len(succ):
                work[-1] = (u, pos + 1)
                w = succ[pos]
                if w not in index:
                    index[w] = low[w] = counter
                    counter += 1
                    stack.append(w)
                    on_stack.add(w)
                    work.append((w, 0))
                elif w in on_stack:
                    low[u] = min(low[u], index[w])
                continue
            work.pop()
            if work:
                p = work[-1][0]
                low[p] = min(low[p], low[u])
            if low[u] == index[u]:
                comp = []
                while True:
                    w = stack.pop()
                    on_stack.discard(w)
                    comp.append(w)
                    if w == u:
                        break
                out.append(comp)
    return out
