"""``hwfilter check FILE``: validate a filter file and summarize its realization."""

from __future__ import annotations

import json

from ..pipeline import quantized_graph
from ..spec import load

NAME = "check"
HELP = "validate a filter file; print node counts, coefficients float vs quantized, formats"


def add_arguments(p):
    p.add_argument("file", help="filter file (TOML)")
    p.add_argument("--json", action="store_true", help="print the summary as JSON")


def summary(spec, graph) -> dict:
    """The numbers ``check`` prints, as a dict (also used by reports)."""
    counts = graph.counts()
    coefficients = []
    for n in graph.of_kind("gain"):
        q = n.quantized_coefficient
        coefficients.append(
            {
                "name": n.name,
                "group": n.group,
                "design": n.coefficient,
                "quantized": q,
                "integer": n.value,
                "bits": n.coefficient_format.bits,
                "frac": n.coefficient_format.frac,
                "error": q - n.coefficient,
            }
        )
    return {
        "name": spec.name,
        "source": spec.source,
        "form": graph.form,
        "section": graph.section_form or None,
        "order": spec.order,
        "sections": len(graph.sections),
        "counts": {
            "delays": counts["delay"],
            "multipliers": counts["gain"],
            "adders": counts["adders"],
            "quantizers": counts["quantize"],
        },
        "coefficients": coefficients,
        "nodes": [
            {"name": n.name, "kind": n.kind, "bits": n.format.bits, "frac": n.format.frac}
            for n in graph.nodes
        ],
    }


def run(args) -> int:
    spec = load(args.file)
    graph = quantized_graph(spec)
    s = summary(spec, graph)
    if args.json:
        print(json.dumps(s, indent=2))
        return 0
    c = s["counts"]
    sec = f" of {s['sections']} {s['section']} sections" if s["section"] else ""
    print(f"{spec.source}: {spec.name}, order {s['order']}, {s['form']}{sec}")
    print(
        f"  {c['multipliers']} multipliers, {c['adders']} two-input adders, "
        f"{c['delays']} delays, {c['quantizers']} quantizers"
    )
    print(
        f"  input {spec.fixed.input.bits} bits / {spec.fixed.input.frac} fraction bits, "
        f"output {spec.fixed.output.bits} / {spec.fixed.output.frac}"
    )
    print("  coefficients (design -> quantized, integer, bits/frac):")
    for co in s["coefficients"]:
        print(
            f"    {co['name']:<12} {co['design']:>+16.10f} -> {co['quantized']:>+16.10f}"
            f"  {co['integer']:>10}  {co['bits']}/{co['frac']}"
        )
    print("  node formats (bits/frac):")
    width = max(len(n["name"]) for n in s["nodes"])
    for n in s["nodes"]:
        print(f"    {n['name']:<{width}}  {n['kind']:<9} {n['bits']:>3}/{n['frac']}")
    worst = max((abs(co["error"]) for co in s["coefficients"]), default=0.0)
    print(f"  largest coefficient error {worst:.3g}; ok")
    return 0
