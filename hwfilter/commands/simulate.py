"""``hwfilter simulate FILE``: run the bit-exact model (or the float design) on words."""

from __future__ import annotations

import json
import sys

import numpy as np

from ..pipeline import quantized_graph
from ..reference import simulate_float, simulate_integer
from ..signals import DEFAULT_SAMPLES, default_signal, read_words, write_words
from ..spec import load

NAME = "simulate"
HELP = "run the bit-exact integer model (or, with --float, the float design) on input words"


def add_arguments(p):
    p.add_argument("file", help="filter file (TOML)")
    p.add_argument(
        "--input",
        help="input words: text (one signed integer per line) or .npy; default: "
        f"{DEFAULT_SAMPLES} seeded uniform random words at half full scale",
    )
    p.add_argument("--output", help="where to write output words (text or .npy)")
    p.add_argument(
        "--float",
        action="store_true",
        help="run the unquantized design instead; outputs in output units (float words)",
    )
    p.add_argument("--json", action="store_true", help="print a JSON summary")


def compare(graph, x_words) -> dict:
    """Quantized run vs float runs on the same input words: the numbers of ``--json``.

    ``sqnr_db`` and ``max_abs_error_lsb`` compare with the float design (coefficient
    error and roundoff together); ``measured_noise_power_lsb2`` compares with the float
    model using the quantized coefficients, which isolates roundoff noise.
    """
    fin, fout = graph.input.format, graph.output.format
    res = simulate_integer(graph, x_words)
    y = np.asarray(res.output, dtype=np.float64)
    xr = fin.to_float(x_words)
    scale = 2.0**fout.frac
    y_design = simulate_float(graph, xr, coefficients="design") * scale
    y_coef = simulate_float(graph, xr, coefficients="quantized") * scale
    err = y - y_design
    noise = y - y_coef
    sig = float(np.mean(y_design**2))
    err_pow = float(np.mean(err**2))
    return {
        "samples": int(len(x_words)),
        "overflows": res.overflows,
        "total_overflows": res.total_overflows,
        "sqnr_db": 10 * np.log10(sig / err_pow) if err_pow > 0 else float("inf"),
        "max_abs_error_lsb": float(np.max(np.abs(err))),
        "measured_noise_power_lsb2": float(np.mean(noise**2)),
        "measured_noise_mean_lsb": float(np.mean(noise)),
    }, res


def run(args) -> int:
    spec = load(args.file)
    graph = quantized_graph(spec)
    fin = spec.fixed.input
    x = read_words(args.input, fin) if args.input else default_signal(fin)
    if args.float:
        y = simulate_float(graph, fin.to_float(x), coefficients="design")
        y = y * 2.0**spec.fixed.output.frac
        if args.output:
            if args.output.endswith(".npy"):
                np.save(args.output, y)
            else:
                from ..signals import atomic_write_text

                atomic_write_text(args.output, "".join(f"{v!r}\n" for v in y.tolist()))
        summary = {"samples": int(len(x)), "float": True, "peak_lsb": float(np.max(np.abs(y)))}
    else:
        summary, res = compare(graph, x)
        if args.output:
            write_words(args.output, res.output)
    if args.json:
        print(json.dumps(summary, indent=2))
    else:
        print(f"{spec.name}: {summary['samples']} samples", end="")
        if args.float:
            print(" through the float design (output in output LSB units)")
        else:
            print(
                f", {summary['total_overflows']} overflows, SQNR {summary['sqnr_db']:.2f} dB "
                f"vs float, max error {summary['max_abs_error_lsb']:.2f} LSB"
            )
            for name, count in summary["overflows"].items():
                if count:
                    print(f"  {name}: {count} overflows", file=sys.stderr)
    return 0
