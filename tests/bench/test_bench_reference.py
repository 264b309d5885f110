"""Speed of the bit-exact model (pytest-benchmark; run fully with
``pytest tests/bench --benchmark-enable -m 'slow or not slow'``).

Goals: >= 2 M samples/s per biquad-equivalent for one channel, >= 10 M sample-channels/s
batched over 256 channels.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal

from hwfilter.fixed import Format
from hwfilter.formats import default_quantizer_formats, quantize_coefficients, set_quantizers
from hwfilter.realize import realize
from hwfilter.reference import simulate_integer


def _graph(order):
    b, a = signal.butter(order, 0.2)
    g = quantize_coefficients(realize(f"o{order}", b=b, a=a, form="cascade"), 18)
    f = Format(16, 15)
    fm = default_quantizer_formats(g, input_format=f, output_format=f, state_bits=24)
    return set_quantizers(g, fm, input_format=f, rounding="half-up", overflow="saturate")


@pytest.mark.parametrize("order", [2, 8], ids=["biquad", "cascade8"])
@pytest.mark.parametrize(
    "channels,samples", [(1, 1_000_000), (256, 20_000)], ids=["single", "batch256"]
)
def test_bench_integer_model(benchmark, order, channels, samples):
    g = _graph(order)
    x = np.random.default_rng(1).integers(-8000, 8000, size=(channels, samples))
    simulate_integer(g, x[:, :100], engine="numba")  # compile outside the timing
    res = benchmark(simulate_integer, g, x, engine="numba")
    assert res.output.shape == (channels, samples)
    stats = getattr(benchmark, "stats", None)
    if stats:  # with --benchmark-enable: report throughput
        rate = channels * samples / stats.stats.mean
        benchmark.extra_info["sample_channels_per_s"] = rate
        benchmark.extra_info["per_biquad_equivalent"] = rate * order / 2
