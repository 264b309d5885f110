"""Coefficient quantization and per-node formats.

Three steps turn a float graph into a quantized one:

1. :func:`quantize_coefficients` rounds every gain to ``coefficient_bits``, one binary
   point per coefficient group (``s1.b``, ``s1.a``, ``h``...), integer bits chosen to
   hold the group's largest magnitude.
2. the quantize nodes get their formats: from the scaling pass (:mod:`hwfilter.scaling`)
   or from :func:`default_quantizer_formats`, plus per-node overrides.
3. :func:`infer_formats` gives every other node its full-precision format from exact
   integer ranges (the exactness rule: only quantize nodes lose information).
"""

from __future__ import annotations

from .fixed import Format, bits_for_range, coefficient_format, quantize_value
from .graph import Graph, GraphError

__all__ = [
    "quantize_coefficients",
    "default_quantizer_formats",
    "set_quantizers",
    "infer_formats",
    "node_ranges",
    "DEFAULT_STATE_GUARD_BITS",
]

#: Integer bits that stored states get above the input's when no scaling pass runs.
DEFAULT_STATE_GUARD_BITS = 2


def quantize_coefficients(graph: Graph, bits: int, *, group_bits: dict | None = None) -> Graph:
    """Round every gain to ``bits`` (or ``group_bits[group]``) with a per-group format.

    Coefficients are rounded to nearest (ties away from zero) from their exact binary
    value; the group's integer bits hold its largest magnitude after rounding.
    """
    groups: dict[str, list] = {}
    for n in graph.of_kind("gain"):
        groups.setdefault(n.group or n.name, []).append(n)
    changed = []
    for group, nodes in groups.items():
        gbits = (group_bits or {}).get(group, bits)
        fmt = coefficient_format([n.coefficient for n in nodes], gbits)
        for n in nodes:
            v = quantize_value(n.coefficient, fmt, "half-away", "saturate")
            changed.append(n.replace(value=v, coefficient_format=fmt))
    return graph.replace_nodes(changed)


def default_quantizer_formats(
    graph: Graph, *, input_format: Format, output_format: Format, state_bits: int
) -> dict[str, Format]:
    """Formats of the quantize nodes when no scaling pass chooses them.

    The output quantizer takes the output format; every other quantizer (states,
    section outputs, products) takes ``state_bits`` bits with
    ``input_format.int_bits + DEFAULT_STATE_GUARD_BITS`` integer bits.
    """
    int_bits = input_format.int_bits + DEFAULT_STATE_GUARD_BITS
    out = {}
    for n in graph.of_kind("quantize"):
        if n.role == "output":
            out[n.name] = output_format
        else:
            out[n.name] = Format(state_bits, state_bits - int_bits)
    return out


def set_quantizers(
    graph: Graph,
    formats: dict[str, Format],
    *,
    input_format: Format,
    rounding: str,
    overflow: str,
    node_rules: dict[str, dict] | None = None,
) -> Graph:
    """Set the input format and every quantize node's format and rules, then infer the rest.

    ``node_rules`` maps node names to ``{"rounding": ..., "overflow": ...}`` overrides.
    """
    changed = [graph.input.replace(format=input_format)]
    for n in graph.of_kind("quantize"):
        rules = (node_rules or {}).get(n.name, {})
        changed.append(
            n.replace(
                format=formats[n.name],
                rounding=rules.get("rounding", rounding),
                overflow=rules.get("overflow", overflow),
            )
        )
    cleared = [n.replace(format=None) for n in graph.of_kind("gain", "add", "delay", "output")]
    return infer_formats(graph.replace_nodes(changed + cleared))


def node_ranges(graph: Graph) -> dict[str, tuple[int, int, int]]:
    """Exact integer range ``(lo, hi, frac)`` of every node's value.

    Input and quantize nodes span their whole format; gains, sums and delays follow
    exactly from their inputs (a sum aligns fraction bits first). Every recursive loop
    must pass through a quantize node, or the word would grow without bound.
    """
    rng: dict[str, tuple[int, int, int]] = {}
    for n in graph.nodes:
        if n.kind == "input" or n.kind == "quantize":
            if n.format is None:
                raise GraphError(f"node {n.name!r} has no format yet")
            rng[n.name] = (n.format.min_int, n.format.max_int, n.format.frac)
    pending = [n for n in graph.nodes if n.name not in rng]
    while pending:
        progress = False
        rest = []
        for n in pending:
            if not all(s in rng for s in n.inputs):
                rest.append(n)
                continue
            progress = True
            if n.kind in ("delay", "output"):
                rng[n.name] = rng[n.inputs[0]]
            elif n.kind == "gain":
                if n.value is None:
                    raise GraphError(f"gain {n.name!r} has no quantized coefficient yet")
                lo, hi, f = rng[n.inputs[0]]
                c = n.value
                cands = (c * lo, c * hi)
                rng[n.name] = (min(cands), max(cands), f + n.coefficient_format.frac)
            elif n.kind == "add":
                frac = max(rng[s][2] for s in n.inputs)
                lo = hi = 0
                for sign, s in zip(n.signs, n.inputs):
                    slo, shi, sf = rng[s]
                    slo, shi = slo << (frac - sf), shi << (frac - sf)
                    if sign < 0:
                        slo, shi = -shi, -slo
                    lo, hi = lo + slo, hi + shi
                rng[n.name] = (lo, hi, frac)
            else:  # pragma: no cover - check() rejects unknown kinds
                raise GraphError(f"node {n.name!r}: unknown kind {n.kind!r}")
        if not progress:
            names = ", ".join(n.name for n in rest[:6])
            raise GraphError(
                f"graph {graph.name!r} has a recursive loop without a quantize node "
                f"(through {names}); its word would grow without bound"
            )
        pending = rest
    return rng


def infer_formats(graph: Graph) -> Graph:
    """Give every node without a format its full-precision format (exact range).

    An add that already has a format keeps it (a pass proved a narrower word enough;
    the sum then wraps to it); its fraction bits must equal the full-precision ones.
    """
    rng = node_ranges(graph)
    changed = []
    for n in graph.nodes:
        lo, hi, frac = rng[n.name]
        if n.format is None:
            changed.append(n.replace(format=Format(bits_for_range(lo, hi), frac)))
        elif n.kind == "add" and n.format.frac != frac:
            raise GraphError(
                f"add {n.name!r} format must keep {frac} fraction bits, not {n.format.frac}"
            )
    return graph.replace_nodes(changed)
