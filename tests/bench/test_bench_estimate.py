"""Speed of ``hwfilter estimate --compare`` (pytest-benchmark; run with
``pytest tests/bench --benchmark-enable``).

Goals: one estimate in tens of milliseconds; the whole comparison of one filter (every
applicable realization, each with its own format pass, estimate, predicted noise and
exact stability) in a few seconds for the examples (2026-12-01, 2 cores: 1.7 s for the
nine realizations of the sixth-order band-pass, most of it in the exact stability test
and the scaling pass; 7 ms for one estimate).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from hwfilter.boards import load_profile
from hwfilter.commands.estimate import compare
from hwfilter.estimate import estimate
from hwfilter.pipeline import quantized_graph
from hwfilter.spec import load

EXAMPLES = Path(__file__).resolve().parents[2] / "examples"


@pytest.mark.parametrize("example", ["vibration_bandpass", "sdr_channel_fir"])
def test_bench_compare(benchmark, example):
    spec = load(EXAMPLES / f"{example}.toml")
    profile = load_profile("ecp5-25k")
    rows = benchmark(compare, spec, profile)
    assert rows and all("luts" in r or "error" in r for r in rows)


def test_bench_estimate_one(benchmark):
    spec = load(EXAMPLES / "vibration_bandpass.toml")
    g = quantized_graph(spec)
    profile = load_profile("ecp5-25k")
    e = benchmark(estimate, g, profile)
    assert e.fmax_mhz > 0
