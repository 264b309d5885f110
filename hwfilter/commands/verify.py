"""``hwfilter verify FILE``: run the generated design cycle by cycle against the reference.

Every output word of the design, simulated in Amaranth's simulator, Icarus Verilog or
Verilator, must equal the bit-exact reference model's word; the first mismatch is shown
with its sample index, the inputs before it and the two words. SQNR against the float
design is printed for information. Exit status 0 only when every simulator matched.
"""

from __future__ import annotations

import sys
import tempfile
import time

import numpy as np

from ..errors import FilterFileError
from ..hdl.simulate import (
    SIMULATORS,
    ToolError,
    build_verilator,
    first_mismatch,
    run_amaranth,
    run_iverilog,
)
from ..hdl.vectors import vector_set
from ..reference import simulate_float, simulate_integer
from ..signals import default_signal
from .build import add_pipelining_argument, pipelining_of

NAME = "verify"
HELP = "simulate the generated design and compare every output with the bit-exact model"

#: samples when --samples is not given
DEFAULT_SAMPLES = 2048
#: the Amaranth simulator runs a few thousand cycles per second: longer runs default to
#: Verilator, and ``--simulator all`` gives Amaranth only this many samples
AMARANTH_SAMPLES = 20_000


def add_arguments(p):
    p.add_argument("file", help="filter file (TOML)")
    p.add_argument(
        "--simulator",
        choices=SIMULATORS + ("all",),
        help=f"which simulator (default: amaranth up to {AMARANTH_SAMPLES} samples, "
        "verilator beyond)",
    )
    p.add_argument(
        "--samples",
        type=int,
        default=DEFAULT_SAMPLES,
        help=f"input samples: the test vector set, then random words (default {DEFAULT_SAMPLES})",
    )
    p.add_argument("--seed", type=int, default=1, help="seed of the random words (default 1)")
    add_pipelining_argument(p)
    p.add_argument("--vcd", metavar="FILE", help="write waveforms of the Amaranth simulation")


def sqnr_db(graph, x_words, y_words, start: int = 0, stop: int | None = None) -> float:
    """SQNR of output words against the float design on the same input, in dB.

    Both run from zero state over all of ``x_words``; the ratio is taken over samples
    ``start:stop``.
    """
    fin, fout = graph.input.format, graph.output.format
    y_float = simulate_float(graph, fin.to_float(x_words), coefficients="design")
    y_float = y_float[start:stop] * 2.0**fout.frac
    err = np.asarray(y_words[start:stop], dtype=np.float64) - y_float
    noise = float(np.sum(err**2))
    signal = float(np.sum(y_float**2))
    if noise == 0.0:
        return float("inf")
    return 10.0 * np.log10(signal / noise) if signal > 0 else float("-inf")


def _simulators(args) -> list[str]:
    if args.simulator == "all":
        return list(SIMULATORS)
    if args.simulator:
        return [args.simulator]
    return ["amaranth"] if args.samples <= AMARANTH_SAMPLES else ["verilator"]


def run(args) -> int:
    from ..pipeline import quantized_graph
    from ..spec import load

    if args.samples < 1:
        raise FilterFileError(f"--samples must be a positive integer, not {args.samples!r}")
    sims = _simulators(args)
    if args.vcd and "amaranth" not in sims:
        raise FilterFileError("--vcd needs the Amaranth simulator (--simulator amaranth or all)")
    spec = load(args.file)
    graph = quantized_graph(spec)
    pipelining = pipelining_of(spec, args)
    vectors = vector_set(graph, args.samples, seed=args.seed)
    x = vectors.words
    ref = simulate_integer(graph, x)
    expected = np.asarray(ref.output)
    print(
        f"{graph.name}: {len(x)} samples, pipelining {pipelining}; reference model: "
        f"{ref.total_overflows} wraps or saturations"
    )
    failed = False
    for sim in sims:
        xs, exp = x, expected
        note = ""
        if sim == "amaranth" and len(x) > AMARANTH_SAMPLES and args.simulator == "all":
            xs, exp = x[:AMARANTH_SAMPLES], expected[:AMARANTH_SAMPLES]
            note = f" (first {AMARANTH_SAMPLES} samples: the Amaranth simulator is slow)"
        t0 = time.perf_counter()
        try:
            if sim == "amaranth":
                result = run_amaranth(graph, xs, pipelining=pipelining, vcd=args.vcd)
            elif sim == "iverilog":
                result = run_iverilog(graph, xs, pipelining=pipelining, expected=exp)
            else:
                with tempfile.TemporaryDirectory(prefix="hwfilter-verilator-") as wd:
                    model = build_verilator(graph, wd, pipelining=pipelining)
                    built = time.perf_counter() - t0
                    note += f" (Verilator build {built:.1f} s)"
                    t0 = time.perf_counter()
                    result = model.run(xs)
        except ToolError as e:
            print(f"hwfilter verify: error: {e}", file=sys.stderr)
            return 2
        seconds = time.perf_counter() - t0
        mismatch = first_mismatch(xs, exp, result.output)
        rate = f", {result.cycles / seconds:,.0f} cycles/s" if result.cycles and seconds else ""
        if mismatch is None and result.passed is not False:
            print(
                f"{sim}: {len(xs)} outputs bit-exact{note}; {result.cycles} cycles in "
                f"{seconds:.1f} s{rate}"
            )
        else:
            failed = True
            what = mismatch.describe() if mismatch else result.summary
            print(f"{sim}: MISMATCH{note}: {what}")
        if sim == "amaranth" and args.vcd:
            print(f"amaranth: waveforms in {args.vcd}")
    # the vectors overload on purpose; the busy default signal of `hwfilter simulate` gives
    # the figure a designer compares (the design equals the reference bit for bit)
    busy = default_signal(graph.input.format)
    y_busy = simulate_integer(graph, busy).output
    print(
        f"SQNR against the float design: {sqnr_db(graph, x, expected):.2f} dB over the "
        f"verified samples (full-scale vectors, {ref.total_overflows} overflows); "
        f"{sqnr_db(graph, busy, y_busy):.2f} dB on {len(busy)} random words at half "
        "full scale"
    )
    return 1 if failed else 0
