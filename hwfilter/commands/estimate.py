"""``hwfilter estimate FILE``: resources and timing on a device, and the realizations compared.

Without options: the estimate of the file's realization on its device (the file's
``device``, or ``--device``): multipliers and blocks, LUTs, flip-flops, the critical path
with its nodes, Fmax, latency, the iteration bound and the sample rates.

``--compare`` estimates every applicable realization of the same filter, each with its
own format pass, in one table (area against precision: predicted roundoff SQNR and
stability next to the resources). ``--json`` prints a list of estimates. ``--synth`` runs
Yosys (and nextpnr where PyPI has one) on the file's realization and prints the estimate
and the tools' figures side by side.
"""

from __future__ import annotations

import json
import math
import sys

from ..boards import ACCURACY_LABELS, load_profile
from ..errors import FilterFileError
from ..estimate import MULTIPLIER_MODES, estimate
from ..pipeline import applicable_realizations, quantized_graph
from ..spec import load
from .build import add_pipelining_argument, pipelining_of

__all__ = [
    "NAME",
    "HELP",
    "accuracy_lines",
    "add_arguments",
    "run",
    "compare",
    "render_estimate",
    "render_table",
]

NAME = "estimate"
HELP = "resources and timing on a device profile; --compare all realizations; --synth check"

#: input level of the SQNR column: white input of this rms (real units, 1.0 = full scale
#: of a one-integer-bit input), the analysis module's busy-input level
SQNR_INPUT_RMS = 0.125


def add_arguments(p):
    p.add_argument("file", help="filter file (TOML)")
    p.add_argument(
        "--device",
        help="device profile name (ice40-up5k, ecp5-25k, ecp5-85k, gw1n-9, "
        "generic-lut6-dsp25x18) or the path of a profile file; default: the file's device",
    )
    p.add_argument(
        "--clock",
        type=float,
        metavar="MHZ",
        help="clock for the sample rate (default: the profile's default clock)",
    )
    p.add_argument("--compare", action="store_true", help="estimate every applicable realization")
    p.add_argument("--json", action="store_true", help="print a JSON list of estimates")
    p.add_argument(
        "--synth",
        action="store_true",
        help="also run Yosys (and nextpnr where available) on the file's realization",
    )
    p.add_argument(
        "--multipliers",
        choices=MULTIPLIER_MODES,
        default="auto",
        help="constant multipliers: hard blocks as the tool maps them (auto), logic rows, "
        "or canonical-signed-digit shift-add (default auto)",
    )
    add_pipelining_argument(p)
    p.add_argument("--seed", type=int, default=1, help="nextpnr placement seed (default 1)")


def _profile(args, spec):
    name = args.device or spec.device
    if not name:
        raise FilterFileError(
            "no device: give --device or set device in the file",
            source=spec.source,
            field="device",
        )
    return load_profile(name)


def _quality(graph) -> dict:
    """Predicted SQNR (when the noise analysis is installed) and exact stability."""
    out: dict = {}
    try:
        from ..noise import predict_noise, sqnr_db
        from ..stability import stability
    except ImportError:  # pragma: no cover - the analysis modules ship with the package
        return out
    try:
        pred = predict_noise(graph)
        out["sqnr_db"] = sqnr_db(graph, pred, SQNR_INPUT_RMS)["white_db"]
    except (ValueError, ArithmeticError) as e:  # pragma: no cover - reported, not fatal
        out["sqnr_error"] = str(e)
    st = stability(graph)
    out["stable"] = bool(st.stable)
    out["max_pole_radius"] = float(st.max_pole_radius)
    return out


def compare(spec, profile, *, clock_mhz=None, pipelining="none", multipliers="auto"):
    """Estimates (as dicts, with SQNR and stability) of every applicable realization."""
    rows = []
    for form, section in applicable_realizations(spec):
        try:
            g = quantized_graph(spec, form=form, section=section)
        except FilterFileError as e:
            rows.append({"form": form, "section": section, "error": e.problem})
            continue
        e = estimate(
            g, profile, pipelining=pipelining, clock_mhz=clock_mhz, multipliers=multipliers
        )
        d = e.as_dict()
        d.update(_quality(g))
        rows.append(d)
    return rows


def _f(v, fmt="{:.1f}") -> str:
    if v is None:
        return "-"
    if isinstance(v, float) and math.isinf(v):
        return "inf"
    return fmt.format(v)


def _rate(hz) -> str:
    if hz is None:
        return "-"
    if hz == float("inf"):
        return "unbounded"
    if hz >= 1e6:
        return f"{hz / 1e6:.3g} MS/s"
    return f"{hz / 1e3:.3g} kS/s"


def render_table(rows: list[dict], profile) -> str:
    """The ``--compare`` table: one line per realization."""
    have_sqnr = any("sqnr_db" in r for r in rows)
    head = ["form", "section", "mult", "DSP", "LUTs", "FFs", "path ns", "Fmax", "lat"]
    if have_sqnr:
        head.append("SQNR dB")
    head.append("stability")
    lines = [
        f"realizations on {profile.name} ({profile.part}): {profile.multipliers} multiplier "
        f"blocks, {profile.luts} LUTs, {profile.flip_flops} flip-flops"
    ]
    table = []
    for r in rows:
        if "error" in r:
            table.append([r["form"], r["section"] or "-", "error: " + r["error"]])
            continue
        fit = "" if r["fits"] else " !"
        line = [
            r["form"],
            r["section"] or "-",
            str(r["multipliers"]),
            _f(r["dsp_blocks"], "{:g}") + fit,
            str(r["luts"]),
            str(r["registers"]),
            _f(r["critical_path_ns"]),
            _f(r["fmax_mhz"]),
            str(r["latency_cycles"]),
        ]
        if have_sqnr:
            line.append(_f(r.get("sqnr_db")))
        if "stable" in r:
            line.append(
                ("stable" if r["stable"] else "UNSTABLE") + f" r={r['max_pole_radius']:.4f}"
            )
        else:
            line.append("-")
        table.append(line)
    widths = [max(len(str(x[i])) for x in [head] + table if i < len(x)) for i in range(len(head))]
    lines.append("  ".join(h.ljust(w) for h, w in zip(head, widths)))
    for t in table:
        lines.append("  ".join(str(x).ljust(w) for x, w in zip(t, widths)))
    notes = [
        "mult: multipliers (gains not zero or a power of two); DSP: hard multiplier blocks "
        "('!': the design does not fit the device); path: longest register-to-register "
        "path; lat: latency in clock cycles"
    ]
    if have_sqnr:
        notes.append(
            f"SQNR: predicted roundoff signal-to-noise ratio for a white input of rms "
            f"{SQNR_INPUT_RMS} (full scale 1.0); stability: exact test of the quantized "
            "structure, r = largest pole radius"
        )
    else:
        notes.append("SQNR column left out: the noise analysis (hwfilter.noise) is not there")
    lines += notes
    lines += accuracy_lines(profile, "")
    return "\n".join(lines)


def accuracy_lines(profile, indent: str = "  ") -> list[str]:
    """How close this profile's estimates came to the synthesis tools (its ``[accuracy]``
    table), one line per figure."""
    return [
        f"{indent}accuracy of {ACCURACY_LABELS[k]} on {profile.name}: {v}"
        for k, v in profile.accuracy_notes().items()
    ]


def render_estimate(e, profile) -> str:
    """The report of one estimate."""
    sec = f" of {e.section} sections" if e.section else ""
    lines = [
        f"{e.graph}: {e.form}{sec} on {profile.name} ({profile.part}), pipelining "
        f"{e.pipelining}, multipliers {e.multiplier_mode}",
        f"  multipliers       {e.multipliers} (and {e.shifts} power-of-two gains as shifts); "
        f"{e.adders} two-input adders; {e.delays} delays",
        f"  multiplier blocks {e.dsp_blocks:g} of {profile.multipliers}"
        + (
            f" (in {e.dsp_sites} of {profile.multiplier_sites} sites)"
            if e.dsp_sites is not None
            else ""
        ),
        f"  LUTs              {e.luts} of {profile.luts} ("
        + ", ".join(
            f"{k} {v}"
            for k, v in e.lut_detail.items()
            if v or k in ("sums", "quantizers", "multipliers")
        )
        + ")",
        f"  flip-flops        {e.registers} of {profile.flip_flops} ("
        + ", ".join(f"{k} {v}" for k, v in e.register_detail.items() if v)
        + ")",
        f"  critical path     {e.critical_path_ns:.2f} ns: " + " -> ".join(e.critical_path),
        f"  Fmax              {e.fmax_mhz:.1f} MHz",
        f"  latency           {e.latency_cycles} clock cycle(s), {e.cycles_per_sample} "
        "cycle(s) per sample",
    ]
    if e.iteration_bound_ns > 0:
        lines.append(
            f"  iteration bound   {e.iteration_bound_ns:.2f} ns (loop "
            + " -> ".join(e.critical_loop)
            + f"): at most {_rate(e.bound_sample_rate_hz)} with any retiming"
        )
    else:
        lines.append("  iteration bound   none (no recursive loop: pipelining is unbounded)")
    if e.clock_mhz is not None:
        lines.append(
            f"  {'at ' + format(e.clock_mhz, 'g') + ' MHz':18s}"
            + (
                f"{_rate(e.sample_rate_hz)}"
                if e.sample_rate_hz is not None
                else "timing not met (the clock is above the estimated Fmax)"
            )
        )
    lines.append(f"  at Fmax           {_rate(e.max_sample_rate_hz)}")
    lines.append("  fits the device   " + ("yes" if e.fits else "no: " + "; ".join(e.fit_problems)))
    for n in e.notes:
        lines.append(f"  note: {n}")
    lines += accuracy_lines(profile)
    return "\n".join(lines)


def render_cross_check(cc) -> str:
    lines = ["synthesis cross-check (estimate / tool):"]
    lines.append(f"  {'':24s}{'estimate':>10s}{'tool':>10s}{'ratio':>8s}")
    for r in cc.rows:
        ratio = "-" if r.ratio is None else f"{r.ratio:.2f}"
        tool = "-" if r.tool is None else f"{r.tool:.4g}"
        lines.append(f"  {r.metric:24s}{r.estimate:>10.4g}{tool:>10s}{ratio:>8s}")
    for n in cc.notes:
        lines.append(f"  {n}")
    return "\n".join(lines)


def run(args) -> int:
    spec = load(args.file)
    profile = _profile(args, spec)
    pipelining = pipelining_of(spec, args)
    if args.clock is not None and not args.clock > 0:
        raise FilterFileError(f"--clock must be a positive frequency in MHz, not {args.clock!r}")
    if args.compare:
        rows = compare(
            spec,
            profile,
            clock_mhz=args.clock,
            pipelining=pipelining,
            multipliers=args.multipliers,
        )
    else:
        g = quantized_graph(spec)
        e = estimate(
            g, profile, pipelining=pipelining, clock_mhz=args.clock, multipliers=args.multipliers
        )
        rows = [e.as_dict()]
    cc = None
    if args.synth:
        from ..synth import cross_check

        cc = cross_check(quantized_graph(spec), profile, pipelining=pipelining, seed=args.seed)
    if args.json:
        if cc is not None:
            rows[0 if not args.compare else _own_row(rows, spec)]["synth"] = cc.as_dict()
        json.dump(rows, sys.stdout, indent=2, default=float)
        sys.stdout.write("\n")
        return 0
    if args.compare:
        print(render_table(rows, profile))
    else:
        print(render_estimate(e, profile))
    if cc is not None:
        print(render_cross_check(cc))
    return 0


def _own_row(rows, spec) -> int:
    """Index of the file's own realization in a ``--compare`` list."""
    r = spec.realization
    for i, row in enumerate(rows):
        if row.get("form") == r.form and (
            row.get("section") in (None, r.section) or row.get("section") == r.section
        ):
            if r.form not in ("cascade", "parallel") or row.get("section") == r.section:
                return i
    return 0
