"""Long runs in Verilator: the compiled design against the bit-exact model, 200k samples."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import require_tool
from scipy import signal

from hwfilter.fixed import Format
from hwfilter.formats import default_quantizer_formats, quantize_coefficients, set_quantizers
from hwfilter.hdl import plan
from hwfilter.hdl.simulate import build_verilator, first_mismatch
from hwfilter.hdl.vectors import vector_set
from hwfilter.realize import realize
from hwfilter.reference import simulate_integer


def cascade8(rounding="half-even", overflow="saturate"):
    # 8th-order lowpass as four direct form II sections (scipy's pairing), 18-bit states
    b, a = signal.butter(8, 0.1)
    g = realize("lp8", b=b, a=a, form="cascade", section="direct-form-2")
    g = quantize_coefficients(g, 18)
    f = Format(16, 15)
    fmts = default_quantizer_formats(g, input_format=f, output_format=f, state_bits=18)
    return set_quantizers(g, fmts, input_format=f, rounding=rounding, overflow=overflow)


@pytest.mark.tool
@pytest.mark.parametrize("pipelining", ["registered-products"])
def test_long_run_bit_exact(tmp_path, pipelining):
    require_tool("verilator")
    g = cascade8()
    assert len(g.sections) == 4
    model = build_verilator(g, tmp_path, pipelining=pipelining)
    x = vector_set(g, 200_000, seed=2).words
    ref = simulate_integer(g, x)
    assert ref.total_overflows > 0  # the full-scale segments drive the states into overflow
    r = model.run(x)
    mm = first_mismatch(x, ref.output, r.output)
    assert mm is None, mm.describe()
    # one idle cycle after every 7 samples: state holds while i.valid is low
    r = model.run(x[:50_000], idle_every=7)
    mm = first_mismatch(x[:50_000], ref.output[:50_000], r.output)
    assert mm is None, mm.describe()
    # the last of n samples is taken after n - 1 busy cycles and (n - 1) // 7 idle ones,
    # and comes out latency_cycles later
    p = plan(g, pipelining=pipelining)
    assert r.cycles == 49_999 + 49_999 // 7 + p.latency_cycles


@pytest.mark.tool
def test_multi_cycle_design_long_run(tmp_path):
    # several clocks per sample: the harness waits on i.ready; 100k samples bit-exact
    require_tool("verilator")
    g = cascade8(rounding="half-up", overflow="wrap")
    p = plan(g, pipelining="registered-all-products")
    assert p.cycles_per_sample == 2
    model = build_verilator(g, tmp_path, pipelining="registered-all-products")
    x = vector_set(g, 100_000, seed=3).words
    r = model.run(x)
    mm = first_mismatch(x, simulate_integer(g, x).output, r.output)
    assert mm is None, mm.describe()
    # samples were taken every second clock: the last after 2 (n - 1) cycles
    assert r.cycles == 2 * (len(x) - 1) + p.latency_cycles
    assert np.asarray(r.output).size == len(x)
