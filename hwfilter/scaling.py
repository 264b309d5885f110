"""Scaling pass: integer bits of every quantize node from the norms of the linear model.

Given a graph with quantized coefficients whose quantize nodes have no formats yet,
:func:`scaled_formats` gives each quantize node a :class:`~hwfilter.fixed.Format`
(``hwfilter.formats.set_quantizers`` then applies them). Every non-output quantizer
gets ``state_bits`` bits (``product_bits`` for product quantizers); the scaling rule
chooses how many of them are integer bits:

``l1``
    No overflow for *any* input within the input format. The worst case is counted
    exactly: with impulse response ``h`` from the input to the node, the largest value is
    ``sum max(h[n] x_max, h[n] x_min)`` with ``x_min = -2^(B-1)`` LSB and
    ``x_max = 2^(B-1) - 1`` LSB (not ``+-1.0``: for negative coefficients the extreme
    negative input gives the larger magnitude, see shared/references.md). The rounding
    errors of every quantizer reach the node too, and are bounded the same way from
    their error interval (:func:`hwfilter.noise.rounding_error_interval`) and the
    impulse response from their injection point; the formats are iterated to a fixed
    point because the errors depend on the fraction bits. The argument is an induction
    over samples: while nothing has overflowed the graph is linear plus bounded errors,
    so the bound holds, so nothing overflows at the next sample either. Finite responses
    are summed exactly; infinite ones carry a rigorous tail bound
    (:func:`hwfilter.linear.l1_parts`).
``l2``, ``linf``
    The usual tighter choices (Jackson 1970): the node's L2 or L-infinity norm times the
    input's largest magnitude must fit. Overflow remains possible; the result says so.
``none``
    :func:`hwfilter.formats.default_quantizer_formats`.

The output quantizer keeps ``output_format``; accumulators (gains, sums) stay at full
precision (the exactness rule). Per-node ``overrides`` win over the pass and are listed in
the result. Whatever the rule, the result reports whether the final formats are *proven*
free of overflow by the l1 bound (``overflow_possible``).

Also here: :func:`quantize_products` (a product quantizer after every gain) and
:func:`scale_section_gains` (power-of-two section gains for cascades).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np

from .errors import FilterFileError
from .fixed import Format
from .formats import default_quantizer_formats
from .graph import Graph, Node, strongly_connected_components
from .linear import LinearModel, l1_parts, l2_norm, linear_model, linf_norm
from .noise import rounding_error_interval

__all__ = [
    "SCALINGS",
    "SECTION_NORMS",
    "ScalingResult",
    "scaling_pass",
    "scaled_formats",
    "worst_case_ranges",
    "overflow_nodes",
    "int_bits_for",
    "quantize_products",
    "section_shifts",
    "scale_section_gains",
]

#: scaling rules of :func:`scaled_formats`
SCALINGS = ("l1", "l2", "linf", "none")
#: norms :func:`scale_section_gains` can normalize
SECTION_NORMS = ("l1", "l2", "linf")

_FLOAT_MARGIN = Fraction(1, 10**9)  # relative widening of float sums (never narrowing)


def int_bits_for(lo, hi, bits: int) -> int:
    """Fewest integer bits (sign included) of a ``bits``-bit word holding ``[lo, hi]``.

    The word holds multiples of its LSB ``q = 2^(int_bits - bits)``; a quantizer output
    in ``[lo, hi]`` fits when ``hi < 2^(int_bits-1)`` and ``lo > -2^(int_bits-1) - q``.
    Exact for Fractions.
    """
    lo, hi = Fraction(lo), Fraction(hi)

    def fits(ib: int) -> bool:
        top = Fraction(2) ** (ib - 1)
        return hi < top and lo > -top - Fraction(2) ** (ib - bits)

    big = max(abs(lo), abs(hi))
    if big == 0:
        return 1
    ib = math.floor(math.log2(big)) + 1
    while not fits(ib):
        ib += 1
    while fits(ib - 1):
        ib -= 1
    return ib


def _widen(p, n, t):
    """Exact Fractions (positive, negative, tail) from l1 parts, widened if float."""
    if isinstance(p, Fraction):
        return p, n, Fraction(t)
    if not (np.isfinite(p) and np.isfinite(n) and np.isfinite(t)):
        return None
    return (
        Fraction(float(p)) * (1 + _FLOAT_MARGIN),
        Fraction(float(n)) * (1 + _FLOAT_MARGIN),
        Fraction(float(t)) * (1 + _FLOAT_MARGIN) + Fraction(1, 2**1000),
    )


def _input_fracs(graph: Graph, qfrac: dict[str, int], input_frac: int) -> dict[str, int]:
    """Fraction bits of every node given the quantize nodes' (full precision elsewhere)."""
    frac: dict[str, int] = {graph.input.name: input_frac, **qfrac}
    for _ in range(len(graph.nodes) + 1):
        changed = False
        for n in graph.topological_order():
            if n.kind in ("input", "quantize"):
                continue
            ins = [frac.get(s) for s in n.inputs]
            if any(f is None for f in ins):
                continue
            if n.kind == "gain":
                f = ins[0] + n.coefficient_format.frac
            elif n.kind == "add":
                f = max(ins)
            else:
                f = ins[0]
            if frac.get(n.name) != f:
                frac[n.name] = f
                changed = True
        if not changed:
            break
    return frac


@dataclass
class _Parts:
    """l1 parts from every source to every quantize node, as exact Fractions."""

    names: list[str]
    parts: dict  # (source, node) -> (pos, neg, tail) | None for unbounded


def _all_parts(model: LinearModel, names: list[str]) -> _Parts:
    parts = {}
    for src in model.sources:
        p = l1_parts(model, src, names)
        for i, k in enumerate(names):
            parts[src, k] = _widen(p.positive[i], p.negative[i], p.tail[i])
    return _Parts(names, parts)


def worst_case_ranges(
    graph: Graph,
    formats: dict[str, Format],
    *,
    input_format: Format,
    rounding=None,
    node_rules: dict | None = None,
    parts: _Parts | None = None,
    model: LinearModel | None = None,
    nodes=None,
) -> dict[str, tuple[Fraction, Fraction] | None]:
    """Exact bounds ``(lo, hi)`` of every quantize node's output value, in real units.

    ``nodes`` asks for other nodes instead (any node names; default the quantize nodes).

    Valid for every input word and every sample as long as no quantizer has overflowed
    (and then none does where the bound fits the format). ``None`` marks an unbounded
    node (an unstable loop). ``rounding`` (one rule, or None for "any rule") and
    ``node_rules`` give each quantizer's error interval; the dropped bits follow from
    ``formats``.
    """
    qnames = [q.name for q in graph.of_kind("quantize")]
    names = qnames if nodes is None else list(nodes)
    if parts is None:
        model = model or linear_model(graph, coefficients="quantized")
        parts = _Parts(names, {})
        for src in model.sources:
            p = l1_parts(model, src, names)
            for i, k in enumerate(names):
                parts.parts[src, k] = _widen(p.positive[i], p.negative[i], p.tail[i])
    fr = _input_fracs(graph, {k: f.frac for k, f in formats.items()}, input_format.frac)
    xmin, xmax = input_format.min_value, input_format.max_value
    eint = {}
    for k in qnames:
        rule = (node_rules or {}).get(k, {}).get("rounding", rounding)
        q = graph[k]
        src_frac = fr.get(q.inputs[0])
        dropped = None if src_frac is None else src_frac - formats[k].frac
        lo, hi = rounding_error_interval(rule, dropped)
        lsb = Fraction(2) ** -formats[k].frac
        eint[k] = (lo * lsb, hi * lsb)
    out = {}
    x = graph.input.name
    for k in names:
        terms = [(parts.parts[x, k], xmin, xmax)]
        terms += [(parts.parts[j, k], *eint[j]) for j in qnames]
        lo = hi = Fraction(0)
        bounded = True
        for pt, vmin, vmax in terms:
            if vmin == 0 and vmax == 0:
                continue
            if pt is None:
                bounded = False
                break
            p, n, t = pt
            mag = max(abs(vmin), abs(vmax))
            hi += p * vmax + n * vmin + t * mag
            lo += p * vmin + n * vmax - t * mag
        out[k] = (lo, hi) if bounded else None
    return out


@dataclass
class ScalingResult:
    """Formats chosen by the scaling pass and what they guarantee.

    Attributes
    ----------
    formats : dict
        Quantize node name -> Format (what :func:`scaled_formats` returns).
    scaling : str
        The rule used.
    norms : dict
        Node -> norm of the input-to-node response under the rule (``l1`` for
        ``l1``/``none``).
    ranges : dict
        Node -> proven ``(lo, hi)`` (floats) of its value while no overflow occurs, or
        None when unbounded.
    overridden : list
        Nodes whose format came from ``overrides`` rather than the pass.
    overflow_nodes : list
        Nodes whose proven range does not fit their final format: overflow is possible
        there (always listed, whatever the rule).
    """

    formats: dict[str, Format]
    scaling: str
    norms: dict[str, float]
    ranges: dict
    overridden: list[str] = field(default_factory=list)
    overflow_nodes: list[str] = field(default_factory=list)

    @property
    def overflow_possible(self) -> bool:
        """False only when the l1 bound proves that no quantizer can overflow."""
        return bool(self.overflow_nodes)

    def as_dict(self) -> dict:
        return {
            "scaling": self.scaling,
            "formats": {k: f.as_dict() for k, f in self.formats.items()},
            "norms": dict(self.norms),
            "ranges": {k: (None if r is None else list(r)) for k, r in self.ranges.items()},
            "overridden": list(self.overridden),
            "overflow_nodes": list(self.overflow_nodes),
            "overflow_possible": self.overflow_possible,
        }


def _check_overrides(graph: Graph, overrides: dict | None) -> dict[str, Format]:
    overrides = dict(overrides or {})
    for name, fmt in overrides.items():
        if name not in graph or graph[name].kind != "quantize":
            raise FilterFileError(
                f"override node must be a quantize node of graph {graph.name!r}, not {name!r}",
                field="overrides",
            )
        if not isinstance(fmt, Format):
            raise FilterFileError(
                f"override for {name!r} must be a Format, not {fmt!r}", field="overrides"
            )
    return overrides


def scaling_pass(
    graph: Graph,
    *,
    input_format: Format,
    output_format: Format,
    state_bits: int,
    scaling: str,
    overrides: dict[str, Format] | None = None,
    product_bits: int | None = None,
    rounding: str | None = None,
    node_rules: dict | None = None,
) -> ScalingResult:
    """Choose every quantize node's format; see the module docstring for the rules.

    Parameters
    ----------
    graph : Graph
        Graph with quantized coefficients; its quantize nodes need no formats.
    input_format, output_format : Format
        Formats of the filter input and of the output quantizer.
    state_bits : int
        Total bits of every other quantizer (``product_bits`` for role ``product``).
    scaling : {"l1", "l2", "linf", "none"}
        The rule for integer bits.
    overrides : dict, optional
        Node name -> Format; wins over the pass (reported in ``overridden``).
    rounding : str, optional
        Rounding rule of the quantizers, for the error bounds of ``l1`` and of the overflow
        proof (``None``: any rule, the widest interval). ``node_rules`` as in
        :func:`hwfilter.formats.set_quantizers`.

    Raises
    ------
    FilterFileError
        For an unknown rule, a bad override, or ``l1`` on an unstable structure.
    """
    if scaling not in SCALINGS:
        raise FilterFileError(
            f"scaling must be one of {', '.join(SCALINGS)}, not {scaling!r}", field="scaling"
        )
    if not isinstance(state_bits, int) or state_bits < 2:
        raise FilterFileError(f"state bits must be an integer >= 2, not {state_bits!r}")
    overrides = _check_overrides(graph, overrides)
    product_bits = product_bits or state_bits
    qnodes = graph.of_kind("quantize")
    names = [q.name for q in qnodes]
    model = linear_model(graph, coefficients="quantized")
    parts = _all_parts(model, names)
    x = graph.input.name
    xmag = abs(input_format.min_value)

    def bits_of(q: Node) -> int:
        return product_bits if q.role == "product" else state_bits

    def fixed(q: Node) -> Format | None:
        if q.name in overrides:
            return overrides[q.name]
        if q.role == "output":
            return output_format
        return None

    l1 = {}
    for k in names:
        pt = parts.parts[x, k]
        l1[k] = math.inf if pt is None else float(pt[0] - pt[1] + pt[2])
    if scaling == "none":
        formats = default_quantizer_formats(
            graph, input_format=input_format, output_format=output_format, state_bits=state_bits
        )
        norms = l1
    elif scaling in ("l2", "linf"):
        if scaling == "l2":
            vals = l2_norm(model, x, names)
        else:
            vals, _ = linf_norm(model, x, names)
        norms = {k: float(v) for k, v in zip(names, vals, strict=True)}
        formats = {}
        for q in qnodes:
            if not np.isfinite(norms[q.name]):
                raise FilterFileError(
                    f"scaling {scaling!r} needs a stable structure; node {q.name!r} has an "
                    "unbounded response (a pole on or outside the unit circle)"
                )
            bound = Fraction(norms[q.name]) * xmag
            b = bits_of(q)
            formats[q.name] = Format(b, b - int_bits_for(-bound, bound, b))
    else:  # l1: exact worst case, iterated with the rounding errors
        norms = l1
        for k in names:
            if parts.parts[x, k] is None:
                raise FilterFileError(
                    f"scaling 'l1' needs a stable structure; node {k!r} has an unbounded "
                    "response (a pole on or outside the unit circle)"
                )
        # start from the input term alone, then add the errors until nothing moves
        formats = {}
        for q in qnodes:
            p, n, t = parts.parts[x, q.name]
            hi = p * input_format.max_value + n * input_format.min_value + t * xmag
            lo = p * input_format.min_value + n * input_format.max_value - t * xmag
            b = bits_of(q)
            formats[q.name] = Format(b, b - int_bits_for(lo, hi, b))
        for _ in range(64):
            current = {q.name: fixed(q) or formats[q.name] for q in qnodes}
            ranges = worst_case_ranges(
                graph,
                current,
                input_format=input_format,
                rounding=rounding,
                node_rules=node_rules,
                parts=parts,
            )
            moved = False
            for q in qnodes:
                if fixed(q) is not None:
                    continue
                r = ranges[q.name]
                if r is None:
                    raise FilterFileError(
                        f"scaling 'l1' cannot bound node {q.name!r}: rounding errors reach it "
                        "through an unstable loop"
                    )
                b = bits_of(q)
                fmt = Format(b, b - int_bits_for(r[0], r[1], b))
                if fmt.int_bits > formats[q.name].int_bits:  # only ever grow: terminates
                    formats[q.name] = fmt
                    moved = True
            if not moved:
                break
    final = {}
    overridden = []
    for q in qnodes:
        f = fixed(q)
        final[q.name] = f if f is not None else formats[q.name]
        if q.name in overrides:
            overridden.append(q.name)
    ranges = worst_case_ranges(
        graph,
        final,
        input_format=input_format,
        rounding=rounding,
        node_rules=node_rules,
        parts=parts,
    )
    bad = []
    for q in qnodes:
        r, f = ranges[q.name], final[q.name]
        if r is None or not (
            r[1] < Fraction(2) ** (f.int_bits - 1)
            and r[0] > -(Fraction(2) ** (f.int_bits - 1)) - f.lsb
        ):
            bad.append(q.name)
    float_ranges = {
        k: (None if r is None else (float(r[0]), float(r[1]))) for k, r in ranges.items()
    }
    return ScalingResult(final, scaling, norms, float_ranges, overridden, bad)


def overflow_nodes(graph: Graph) -> list[str]:
    """Nodes of a quantized graph where overflow is possible (not excluded by the l1 bound).

    Every quantize node, with its own format and rounding rule, and every sum narrowed
    below its full-precision range, is checked against its proven range
    (:func:`worst_case_ranges`). An empty list proves that nothing ever wraps or saturates.
    """
    from .formats import node_ranges

    if not graph.is_quantized:
        raise ValueError(f"graph {graph.name!r} must be quantized to check for overflow")
    qs = graph.of_kind("quantize")
    full = node_ranges(graph)
    narrowed = [
        n.name
        for n in graph.of_kind("add")
        if full[n.name][0] < n.format.min_int or full[n.name][1] > n.format.max_int
    ]
    names = [q.name for q in qs] + narrowed
    ranges = worst_case_ranges(
        graph,
        {q.name: q.format for q in qs},
        input_format=graph.input.format,
        node_rules={q.name: {"rounding": q.rounding} for q in qs},
        nodes=names,
    )
    bad = []
    for name in names:
        r, f = ranges[name], graph[name].format
        top = Fraction(2) ** (f.int_bits - 1)
        if r is None or not (r[1] < top and r[0] > -top - f.lsb):
            bad.append(name)
    return bad


def scaled_formats(
    graph: Graph,
    *,
    input_format: Format,
    output_format: Format,
    state_bits: int,
    scaling: str,
    overrides: dict[str, Format] | None = None,
    **options,
) -> dict[str, Format]:
    """Quantize node name -> Format by the scaling rule (see :func:`scaling_pass`)."""
    return scaling_pass(
        graph,
        input_format=input_format,
        output_format=output_format,
        state_bits=state_bits,
        scaling=scaling,
        overrides=overrides,
        **options,
    ).formats


# -- graph rewrites -------------------------------------------------------------------


def quantize_products(graph: Graph) -> Graph:
    """A quantize node (role ``product``) after every gain, so each product is rounded.

    The new node ``<gain>_q`` sits in the gain's section and takes over all its readers.
    Formats come later from the scaling pass (like any quantize node).
    """
    gains = {n.name for n in graph.of_kind("gain")}
    qname = {g: f"{g}_q" for g in gains}
    for q in qname.values():
        if q in graph:
            raise ValueError(f"product quantizer name must be free, not {q!r} (already in graph)")
    nodes = []
    for n in graph.nodes:
        if n.kind != "gain" and any(s in gains for s in n.inputs):
            n = n.replace(inputs=tuple(qname.get(s, s) for s in n.inputs))
        nodes.append(n)
        if n.kind == "gain":
            nodes.append(
                Node(qname[n.name], "quantize", (n.name,), role="product", section=n.section)
            )
    return Graph(graph.name, tuple(nodes), graph.form, graph.section_form, graph.sections).check()


def _sccs(graph: Graph) -> dict[str, int]:
    """Size of the strongly connected component of every node (edges src -> reader)."""
    succ = {n.name: [] for n in graph.nodes}
    for n in graph.nodes:
        for s in n.inputs:
            succ[s].append(n.name)
    return {w: len(comp) for comp in strongly_connected_components(succ) for w in comp}


def _section_io(graph: Graph) -> list[tuple[str, str, list[str]]]:
    """``(section, output node, feed-forward gains)`` of a chain of sections, in order."""
    if not graph.sections:
        raise ValueError(f"graph {graph.name!r} must have sections to scale their gains")
    members = {s: {n.name for n in graph.nodes if n.section == s} for s in graph.sections}
    size = _sccs(graph)
    out = []
    prev_out = graph.input.name
    for s in graph.sections:
        ext_in = {src for n in graph.nodes if n.section == s for src in n.inputs} - members[s]
        if ext_in != {prev_out}:
            raise ValueError(
                f"sections must form a chain (a cascade); section {s!r} reads "
                f"{sorted(ext_in)!r}, not just {prev_out!r}"
            )
        outs = {src for n in graph.nodes if n.section != s for src in n.inputs if src in members[s]}
        if len(outs) != 1:
            raise ValueError(f"section {s!r} must have one output, not {sorted(outs)!r}")
        gains = [
            n.name for n in graph.nodes if n.section == s and n.kind == "gain" and size[n.name] == 1
        ]
        prev_out = outs.pop()
        out.append((s, prev_out, gains))
    return out


def _section_norm(model: LinearModel, node: str, norm: str) -> float:
    if norm == "l1":
        return float(l1_parts(model, model.sources[0], [node]).l1[0])
    if norm == "l2":
        return float(l2_norm(model, model.sources[0], node))
    return float(linf_norm(model, model.sources[0], node)[0])


def section_shifts(float_graph: Graph, *, norm: str = "linf") -> dict[str, int]:
    """Power-of-two exponent ``m`` per section applied by :func:`scale_section_gains`."""
    if norm not in SECTION_NORMS:
        raise ValueError(f"norm must be one of {', '.join(SECTION_NORMS)}, not {norm!r}")
    io = _section_io(float_graph)
    g = float_graph
    shifts = {}
    total = 0
    for i, (s, out, gains) in enumerate(io):
        if i == len(io) - 1:
            m = -total
        else:
            model = linear_model(g, coefficients="design")
            peak = _section_norm(model, out, norm)
            m = 0 if peak == 0 or not np.isfinite(peak) else -math.ceil(math.log2(peak))
            total += m
        shifts[s] = m
        g = g.replace_nodes([g[k].replace(coefficient=g[k].coefficient * 2.0**m) for k in gains])
    return shifts


def scale_section_gains(float_graph: Graph, *, norm: str = "linf") -> Graph:
    """Rescale each cascade section's feed-forward (numerator) gains by a power of two.

    Rule: going down the cascade, the gain of every section but the last is multiplied
    by ``2^m`` with ``m = -ceil(log2 N)``, where ``N`` is the ``norm`` (default peak
    magnitude, L-infinity) of the response from the filter input to that section's
    output, so that the scaled response has norm in ``(1/2, 1]`` and the section's output
    uses its word fully without overflowing (for ``l1``: for any input). The last section
    takes ``2^-(sum of the other m)``, so the overall response is unchanged. Powers of two
    keep the quantized coefficients' mantissas: only their binary points move.

    The feed-forward gains of a section are its gains on no recursive loop (the
    numerator of a direct form I, II or transposed II section); the function checks with
    the linear model that the section's response is scaled exactly.
    """
    io = _section_io(float_graph)
    shifts = section_shifts(float_graph, norm=norm)
    changed = []
    for s, _, gains in io:
        for k in gains:
            n = float_graph[k]
            changed.append(n.replace(coefficient=n.coefficient * 2.0 ** shifts[s]))
    scaled = float_graph.replace_nodes(changed)
    # check: the response to every section output is scaled by the cumulative 2^m
    before = linear_model(float_graph, coefficients="design")
    after = linear_model(scaled, coefficients="design")
    w = np.linspace(0.05, 3.0, 7)
    cum = 0
    from .linear import frequency_response

    for s, out, _ in io:
        cum += shifts[s]
        h0 = frequency_response(before, before.sources[0], out, w)
        h1 = frequency_response(after, after.sources[0], out, w)
        if not np.allclose(h1, h0 * 2.0**cum, rtol=1e-9, atol=1e-300):
            raise ValueError(
                f"section {s!r}: its feed-forward gains do not scale its output "
                "(the section is not a direct form I, II or transposed II)"
            )
    return scaled
