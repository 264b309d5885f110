"""``hwfilter analyze FILE``: stability, overflow, noise, limit cycles and response.

Prints a table of every node (kind, format, the norms of the response from the input,
the roundoff noise each quantizer adds at the output) and the verdicts; ``--json`` prints
the whole :func:`hwfilter.analysis.analyze` result instead.
"""

from __future__ import annotations

import math

from ..analysis import analyze
from ..pipeline import float_graph, quantized_graph
from ..spec import load

__all__ = ["NAME", "HELP", "add_arguments", "run", "analyze_spec", "render_text"]

NAME = "analyze"
HELP = "exact stability, overflow proof, roundoff noise, limit cycles, response vs design"


def add_arguments(p):
    p.add_argument("file", help="filter file (TOML)")
    p.add_argument("--json", action="store_true", help="print the full analysis as JSON")
    p.add_argument(
        "--no-measure",
        dest="measure",
        action="store_false",
        help="skip the noise measurement (bit-exact vs float simulation)",
    )
    p.add_argument(
        "--samples",
        type=int,
        default=1 << 17,
        help="samples of the busy input for the noise measurement (default 131072)",
    )
    p.add_argument("--seed", type=int, default=0, help="seed of the busy input (default 0)")


def analyze_spec(spec, *, measure: bool = True, samples: int = 1 << 17, seed: int = 0) -> dict:
    """:func:`hwfilter.analysis.analyze` of a loaded filter file's realization."""
    graph = quantized_graph(spec)
    fg = float_graph(spec)
    r = spec.response
    kw = {}
    if r is not None:
        kw = {
            "passband": r.passband,
            "stopband": r.stopband,
            "passband_ripple_db": r.passband_ripple_db,
            "stopband_attenuation_db": r.stopband_attenuation_db,
        }
    overridden = [k for k, ov in spec.fixed.nodes.items() if ov.format is not None]
    result = analyze(
        graph,
        fg,
        sample_rate=spec.sample_rate,
        scaling=spec.fixed.scaling,
        overridden=overridden,
        measure=measure,
        measure_samples=samples,
        seed=seed,
        **kw,
    )
    result["source"] = spec.source
    return result


def _num(v, digits: int = 4) -> str:
    if v is None:
        return "-"
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, int):
        return str(v)
    if not math.isfinite(v):
        return "inf" if v > 0 else ("-inf" if v < 0 else "n/a")
    if v != 0 and (abs(v) < 1e-3 or abs(v) >= 1e5):
        return f"{v:.{digits}g}"
    return f"{v:.{digits}g}"


def _table(rows: list[list[str]], header: list[str]) -> list[str]:
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(header)]
    lines = [
        "  "
        + "  ".join(
            h.ljust(w) if i < 2 else h.rjust(w)
            for i, (h, w) in enumerate(zip(header, widths, strict=True))
        )
    ]
    for r in rows:
        lines.append(
            "  "
            + "  ".join(
                c.ljust(w) if i < 2 else c.rjust(w)
                for i, (c, w) in enumerate(zip(r, widths, strict=True))
            )
        )
    return lines


def render_text(res: dict) -> str:
    """The readable report ``analyze`` prints."""
    st = res["stability"]
    noise = res["noise"]
    lines = [f"{res.get('source', '')}: {res['name']}, {res['realization']}", "", "verdicts:"]
    moved = st.get("pole_displacement")
    lines.append(
        f"  stable (exact Schur-Cohn test on the quantized coefficients): "
        f"{'yes' if res['stable'] else 'NO'}; max pole radius {res['max_pole_radius']:.6f}"
        + (
            f" (design {st['design_max_pole_radius']:.6f}, poles moved by up to {_num(moved)})"
            if st.get("design_max_pole_radius") is not None
            else ""
        )
    )
    if res["overflow_possible"]:
        lines.append(
            "  overflow: possible at "
            + ", ".join(res["overflow_nodes"])
            + " (the worst-case input bound exceeds the format)"
        )
    else:
        lines.append("  overflow: impossible for any input (proven by the l1 worst-case bound)")
    cyc = [c for c in res["limit_cycles"] if c["states"]]
    if res["limit_cycle_lsb"]:
        lines.append(f"  zero-input limit cycles: up to {res['limit_cycle_lsb']} LSB")
    else:
        lines.append("  zero-input limit cycles: none")
    for c in cyc:
        where = c["section"] or "filter"
        lines.append(
            f"    {where}: {c['amplitude_lsb']} LSB (period {c['period']}), "
            f"{c['search']} search of {c['points']} states"
        )
    osc = [o for o in res["overflow_oscillations"] if o["found"]]
    if osc:
        note = (
            "; only after an upset: no input can overflow" if not res["overflow_possible"] else ""
        )
        for o in osc:
            kind = "stuck overflow state" if o["period"] == 1 else "overflow oscillation"
            lines.append(
                f"  {kind} in {o['section'] or 'filter'} "
                f"({'/'.join(o['overflow_rules'])}): {o['amplitude_lsb']} LSB, "
                f"period {o['period']}, from a large initial state{note}"
            )
    else:
        rules = sorted({r for o in res["overflow_oscillations"] for r in o["overflow_rules"]})
        lines.append(f"  overflow oscillations ({'/'.join(rules) or '-'}): none found")
    lines.append(
        f"  output noise: predicted {_num(noise['predicted_power_lsb2'])} LSB^2 "
        f"({_num(noise['predicted_db'])} dB re 1 LSB^2), DC {_num(noise['predicted_dc_lsb'])} LSB"
    )
    if "measured_power_lsb2" in noise:
        lines.append(
            f"                measured {_num(noise['measured_power_lsb2'])} LSB^2 "
            f"({_num(noise['measured_db'])} dB), DC {_num(noise['measured_dc_lsb'])} LSB, "
            f"{noise['measured_samples']} samples"
        )
    sq = res["sqnr"]
    lines.append(
        f"  SQNR ({sq['input']}): predicted {_num(sq['predicted_db'])} dB, measured "
        f"{_num(sq['measured_db'])} dB; full-scale sine {_num(sq['full_scale_sine_db'])} dB"
    )
    r = res["response"]
    lines.append(
        f"  response vs design: max |Hq - Hd| {_num(r['max_deviation'])} "
        f"({_num(r['max_deviation_db'])} dB re peak)"
        + (
            f", passband {_num(r['passband_deviation_db'])} dB"
            if r["passband_deviation_db"] is not None
            else ""
        )
        + (
            f", stopband peak {_num(r['stopband_deviation_db'])} dB"
            if r["stopband_deviation_db"] is not None
            else ""
        )
    )
    if r["spec_met"] is None:
        lines.append("  response spec: none given")
    else:
        lines.append(
            f"  response spec: {'met' if r['spec_met'] else 'MISSED'} (ripple "
            f"{_num(r['quantized_ripple_db'])} dB, attenuation "
            f"{_num(r['quantized_attenuation_db'])} dB; design "
            f"{'meets' if r['design_meets_spec'] else 'misses'} it)"
        )
    rule = res.get("scaling")
    used = (
        f"; integer bits chosen by the {rule} norm"
        if rule in ("l1", "l2", "linf")
        else ("; default integer bits (no scaling)" if rule == "none" else "")
    )
    lines += [
        "",
        f"nodes (norms of the response from the input{used}; noise added at the output):",
    ]
    rows = []
    for n in res["nodes"]:
        rows.append(
            [
                n["name"],
                n["kind"],
                f"{n['bits']}/{n['frac']}",
                str(n["int_bits"]),
                _num(n["l1"]),
                _num(n["l2"]),
                _num(n["linf"]),
                _num(n.get("noise_power_lsb2")) if n["kind"] == "quantize" else "",
                _num(n.get("noise_dc_lsb")) if n["kind"] == "quantize" else "",
                ("override " if n["overridden"] else "")
                + ("may overflow" if n.get("overflow_possible") else ""),
            ]
        )
    lines += _table(
        rows,
        ["node", "kind", "bits/frac", "int", "l1", "L2", "Linf", "noise LSB^2", "DC LSB", ""],
    )
    return "\n".join(line.rstrip() for line in lines)


def run(args) -> int:
    spec = load(args.file)
    res = analyze_spec(spec, measure=args.measure, samples=args.samples, seed=args.seed)
    if args.json:
        from ..report import to_json

        print(to_json(res))
    else:
        print(render_text(res))
    return 0
