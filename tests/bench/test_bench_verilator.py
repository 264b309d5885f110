"""Speed of verification in Verilator: 1M samples of an 8th-order cascade through the
compiled design (pytest-benchmark; run with
``pytest tests/bench/test_bench_verilator.py --benchmark-enable``).

Goal: 1M samples verified in seconds (the Verilator build, ~10 s, is outside the timing).
The timed part is the harness run (write inputs, simulate every clock, read outputs); the
bit-exact comparison with the reference model follows it, untimed.
"""

from __future__ import annotations

import pytest
from conftest import require_tool
from scipy import signal

from hwfilter.fixed import Format
from hwfilter.formats import default_quantizer_formats, quantize_coefficients, set_quantizers
from hwfilter.hdl.simulate import build_verilator, first_mismatch
from hwfilter.hdl.vectors import vector_set
from hwfilter.realize import realize
from hwfilter.reference import simulate_integer

SAMPLES = 1_000_000


@pytest.mark.tool
@pytest.mark.parametrize("pipelining", ["none", "registered-products"])
def test_bench_verilator_1m(benchmark, tmp_path, pipelining):
    require_tool("verilator")
    b, a = signal.butter(8, 0.1)
    g = quantize_coefficients(realize("lp8", b=b, a=a, form="cascade"), 18)
    f = Format(16, 15)
    fm = default_quantizer_formats(g, input_format=f, output_format=f, state_bits=24)
    g = set_quantizers(g, fm, input_format=f, rounding="half-even", overflow="saturate")
    model = build_verilator(g, tmp_path, pipelining=pipelining)
    x = vector_set(g, SAMPLES).words
    result = benchmark.pedantic(model.run, args=(x,), rounds=3, iterations=1)
    assert first_mismatch(x, simulate_integer(g, x).output, result.output) is None
    stats = getattr(benchmark, "stats", None)
    if stats:  # with --benchmark-enable: report throughput
        rate = result.cycles / stats.stats.mean
        benchmark.extra_info["cycles_per_second"] = rate
        print(f"\n{pipelining}: {rate / 1e6:.1f} M cycles/s ({SAMPLES} samples)")
