"""The estimator: textbook counts, product mapping rules, registers, timing, options."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from scipy import signal

from hwfilter.boards import MappingPass, load_profile
from hwfilter.estimate import MULTIPLIER_MODES, estimate, map_product, multiplier_sites
from hwfilter.fixed import Format
from hwfilter.formats import default_quantizer_formats, quantize_coefficients, set_quantizers
from hwfilter.hdl import plan
from hwfilter.hdl.flipflops import flip_flop_count
from hwfilter.realize import realize

ECP5 = load_profile("ecp5-25k")
FI = Format(16, 15)

# a biquad whose five coefficients are all "busy" (no zero, no power of two after rounding)
B = [0.3012, -0.2718, 0.2091]
A = [1.0, -1.1093, 0.4517]


def quantized(form, b=B, a=A, section="direct-form-2", sos=None, bits=18, state=24):
    g = realize("t", b=b, a=a, form=form, section=section, sos=sos)
    g = quantize_coefficients(g, bits)
    f = default_quantizer_formats(g, input_format=FI, output_format=FI, state_bits=state)
    return set_quantizers(g, f, input_format=FI, rounding="half-up", overflow="saturate")


# Counts per biquad (Parhi, VLSI DSP Systems, ch. 2-3; Oppenheim & Schafer, Discrete-Time
# Signal Processing, 3rd ed., ch. 6 [M]): direct form I has 5 multipliers, 4 adders and 4
# delays; direct form II and its transpose 5, 4 and 2.
@pytest.mark.parametrize(
    "form, mults, adders, delays",
    [
        ("direct-form-1", 5, 4, 4),
        ("direct-form-2", 5, 4, 2),
        ("transposed-direct-form-2", 5, 4, 2),
    ],
)
def test_biquad_counts_against_the_textbook(form, mults, adders, delays):
    e = estimate(quantized(form), ECP5)
    assert (e.multipliers, e.adders, e.delays) == (mults, adders, delays)
    assert e.shifts == 0


@pytest.mark.parametrize("n", [7, 8, 15, 16, 31])
def test_symmetric_fir_needs_half_the_multipliers(n):
    # a symmetric N-tap FIR folds to ceil(N/2) multipliers (Parhi; common practice)
    half = [0.013 + 0.37 * k / n + 0.001 * k * k for k in range((n + 1) // 2)]
    taps = half + half[: n // 2][::-1]
    g = quantized("fir-symmetric", b=taps, a=[1.0])
    e = estimate(g, ECP5)
    assert e.multipliers == math.ceil(n / 2)
    direct = estimate(quantized("fir-direct", b=taps, a=[1.0]), ECP5)
    assert direct.multipliers == n


def test_power_of_two_gains_are_free():
    # b = [0.5, 0.25]: both quantize to powers of two: shifts, no multiplier, no block
    g = quantized("fir-direct", b=[0.5, 0.25], a=[1.0])
    e = estimate(g, ECP5)
    assert e.multipliers == 0 and e.shifts == 2 and e.dsp_blocks == 0
    assert e.lut_detail["multipliers"] == 0


def test_zero_taps_cost_nothing():
    # common practice: a zero coefficient is no hardware (Yosys removes the product and
    # the operand; in a symmetric FIR also the pre-adder that only it reads)
    with_zero = estimate(quantized("fir-direct", b=[0.3, 0.0, -0.2], a=[1.0]), ECP5)
    without = estimate(quantized("fir-direct", b=[0.3, -0.2], a=[1.0]), ECP5)
    assert with_zero.luts == without.luts and with_zero.multipliers == without.multipliers
    sym = estimate(quantized("fir-symmetric", b=[0.0, 0.3, 0.5, 0.3, 0.0], a=[1.0]), ECP5)
    inner = estimate(quantized("fir-symmetric", b=[0.3, 0.5, 0.3], a=[1.0]), ECP5)
    assert sym.luts == inner.luts


def test_tile_products_read_whole_join_the_sum():
    # a 30-bit state times an 18-bit coefficient takes two 18x18 tiles (mul2dsp rules);
    # with wrap the state sum keeps no more bits than the product, so the tile sum
    # merges into it (probed with Yosys 0.70: test_synth.py::test_tile_sum_merge_rule)
    from dataclasses import replace as rep

    g = quantized("transposed-direct-form-2", state=30)
    wrapped = g.replace_nodes(
        [rep(n, overflow="wrap") for n in g.of_kind("quantize") if n.name != "y_out"]
    )
    e = estimate(wrapped, ECP5)
    tiled = [p for p in e.products if p.blocks == 2]
    assert tiled, "the test needs multi-block products"
    assert e.lut_detail["multipliers"] < estimate(g, ECP5).lut_detail["multipliers"]


ECP5_PASS = MappingPass(18, 18, 2, 2, 0, 18, 18, False, 1.0, "test")


@pytest.mark.parametrize(
    "a, b, blocks, logic",
    [
        # derived by hand from the mul2dsp rules in MappingPass's docstring
        (16, 16, 1, ()),  # fits one block
        (18, 18, 1, ()),
        (20, 16, 2, ()),  # 20 = 18 + 2: two tiles
        (24, 16, 2, ()),  # 24 = 18 + 6
        (19, 16, 1, ((1, 16),)),  # 19 = 18 + 1: the one-bit chunk is too narrow
        (16, 24, 2, ()),  # the wider operand is cut first, whichever it is
        (36, 36, 4, ()),  # 2 x 2 tiles
        (37, 16, 2, ((1, 16),)),
        (1, 16, 0, ((16, 1),)),  # too narrow for any block
    ],
)
def test_product_tiling(a, b, blocks, logic):
    m = map_product(a, b, a + b, [ECP5_PASS])
    assert m.blocks == blocks
    assert m.logic_parts == logic


def test_signed_only_block_tiles_with_headroom():
    # a 25x18 block taking signed operands only: an unsigned low chunk is 17 data bits
    # plus a zero sign bit, so 43 = 17 + 17 + 9 bits need three tiles, 42 = 17 + 25 two
    p = MappingPass(25, 18, 2, 2, 9, 18, 18, True, 1.0, "test")
    assert map_product(43, 18, 61, [p]).blocks == 3
    assert map_product(42, 18, 60, [p]).blocks == 2
    assert map_product(2, 5, 7, [p]).blocks == 0  # product narrower than 9 bits


def test_later_pass_takes_what_an_earlier_one_leaves():
    big = MappingPass(18, 18, 10, 4, 0, 18, 18, False, 1.0, "test")
    small = MappingPass(9, 9, 4, 4, 0, 9, 9, False, 0.5, "test")
    # 24 x 16: 18 x 16 fits the big block; the 6-bit rest is too narrow for it (a < 10)
    # and becomes two 9x9 halves (16 = 9 + 7)
    m = map_product(24, 16, 40, [big, small])
    assert m.blocks == 1 + 2 * 0.5 and m.cells == 3


def test_registers_follow_the_hardware_plan():
    g = quantized("transposed-direct-form-2")
    e = estimate(g, ECP5)
    hp = plan(g)
    # two 24-bit states, the 16-bit output register and one valid bit
    assert hp.total_register_bits == 2 * 24 + 16 + 1
    # what synthesis keeps of them (the hardware pass's flip-flop model)
    assert e.registers == flip_flop_count(g, hp).kept <= hp.total_register_bits


def test_identical_delays_are_counted_once():
    # a cascade of direct form I sections: section 2 delays section 1's output twice,
    # exactly as section 1's own feedback delays do; synthesis keeps one copy
    sos = signal.butter(4, 0.2, output="sos")
    g = quantized("cascade", section="direct-form-1", sos=sos)
    e = estimate(g, ECP5)
    # s1: x1, x2 (16 bits), y1, y2 (24); s2: x1, x2 (= s1.y1, s1.y2), y1, y2 (24)
    assert e.register_detail["duplicate"] <= -2 * 24
    assert e.registers <= 2 * 16 + 4 * 24 + 16 + 1


def test_pipelining_moves_registers_and_shortens_the_path():
    taps = [0.11, -0.23, 0.37, 0.41, 0.37, -0.23, 0.11]
    g = quantized("fir-direct", b=taps, a=[1.0])
    flat = estimate(g, ECP5)
    piped = estimate(g, ECP5, pipelining="registered-products")
    assert piped.latency_cycles == flat.latency_cycles + 1
    assert piped.registers > flat.registers
    assert piped.critical_path_ns < flat.critical_path_ns
    # a registered product ends a path: no path runs on through its register
    hp = plan(g, pipelining="registered-products")
    assert hp.registered
    assert not any(n in hp.registered for n in piped.critical_path[:-1])


def test_iteration_bound_is_below_the_critical_path():
    # every loop segment between two delays is a register-to-register path, so the
    # bound (loop time over delays) cannot exceed the longest path's computation time
    for form in ("direct-form-1", "direct-form-2", "transposed-direct-form-2"):
        e = estimate(quantized(form), ECP5)
        d = ECP5.delay
        assert 0 < e.iteration_bound_ns <= e.critical_path_ns - d.clock_to_out - d.setup
        assert e.critical_loop


def test_fir_has_no_iteration_bound():
    e = estimate(quantized("fir-transposed", b=[0.3, 0.4, 0.3], a=[1.0]), ECP5)
    assert e.iteration_bound_ns == 0 and e.bound_sample_rate_hz == float("inf")


def test_sample_rate_at_a_clock():
    g = quantized("direct-form-2")
    e = estimate(g, ECP5, clock_mhz=10.0)
    assert e.fmax_mhz > 10.0
    assert e.sample_rate_hz == pytest.approx(10e6)
    e = estimate(g, ECP5, clock_mhz=1000.0)
    assert e.sample_rate_hz is None
    assert any("above the estimated Fmax" in n for n in e.notes)
    assert e.max_sample_rate_hz == pytest.approx(e.fmax_mhz * 1e6)


def test_default_clock_comes_from_the_profile():
    e = estimate(quantized("direct-form-2"), ECP5)
    assert e.clock_mhz == ECP5.default_clock_mhz


@pytest.mark.parametrize("mode", MULTIPLIER_MODES)
def test_multiplier_modes(mode):
    g = quantized("direct-form-2")
    e = estimate(g, ECP5, multipliers=mode)
    if mode == "auto":
        assert e.dsp_blocks > 0
        assert all(p.implementation == "hard" for p in e.products)
    else:
        assert e.dsp_blocks == 0
        assert all(p.implementation == mode for p in e.products)
        assert e.lut_detail["sums"] > estimate(g, ECP5).lut_detail["sums"]


def test_shift_add_rows_are_the_nonzero_csd_digits():
    g = quantized("direct-form-2")
    e = estimate(g, ECP5, multipliers="shift-add")
    from hwfilter.csd import nonzero_digits

    for p in e.products:
        assert p.rows == p.csd_digits == nonzero_digits(p.value)
        assert p.shift_add_adders == p.csd_digits - 1
    logic = estimate(g, ECP5, multipliers="logic")
    # CSD never needs more terms than binary, and the sums get no bigger
    assert sum(p.rows for p in e.products) <= sum(p.rows for p in logic.products)
    assert e.luts <= logic.luts


def test_does_not_fit_a_small_device():
    # 24-bit states times 16-bit coefficients tile two 16x16 blocks each on the UP5K,
    # which has 8: an eighth-order cascade cannot fit
    sos = signal.butter(8, 0.1, output="sos")
    g = quantized("cascade", sos=sos)
    e = estimate(g, load_profile("ice40-up5k"))
    assert not e.fits
    assert any("multiplier blocks, the device has 8" in p for p in e.fit_problems)


# GW1N-9 multiplier cells placed or not by nextpnr 0.11 (himbaechel-gowin): registered
# products alone in the timing wrapper, observed 2026-12-03 (docs/estimates.md, DSP
# sites): (36x36 cells, 18x18 cells, 9x9 cells) -> placed
GOWIN_SITE_PROBES = {
    (0, 20, 0): True,
    (0, 16, 2): True,
    (0, 14, 8): True,
    (0, 16, 4): True,
    (0, 17, 1): False,
    (0, 18, 2): False,
    (0, 16, 8): False,
    (0, 14, 9): False,
    (5, 0, 0): True,
    (4, 2, 0): True,
    (4, 4, 0): True,
    (4, 0, 1): True,
    (4, 2, 1): True,
    (4, 0, 8): True,
    (2, 10, 1): True,
}


@pytest.mark.parametrize("cells, placed", GOWIN_SITE_PROBES.items())
def test_gowin_multiplier_sites_follow_the_placement_probes(cells, placed):
    p = load_profile("gw1n-9")
    n36, n18, n9 = cells
    # the profile's passes: 36x36, the two 18x18 passes, 9x9
    sites, why = multiplier_sites(p, (n36, n18, 0, n9))
    assert (why == "") == placed, (cells, sites, why)
    # the blocks alone would say every one of these fits (20 blocks or fewer)
    assert 4 * n36 + n18 + n9 / 2 <= p.multipliers
    # two 18x18 or four 9x9 cells to a DSP macro (nextpnr 0.11
    # himbaechel/uarch/gowin/pack_dsp.cc: a MULT18X18 takes two of the macro's four
    # MULT9X9 places), a 36x36 on two macros (the probe of five placed on all ten)
    assert sites == 2 * n36 + math.ceil(n18 / 2) + math.ceil(n9 / 4)


def test_cells_of_both_18x18_passes_share_sites():
    # the two 18x18 passes map the same cell (MULT18X18): one of each shares a macro
    assert multiplier_sites(load_profile("gw1n-9"), (0, 1, 1, 0)) == (1, "")


def test_a_design_that_fits_by_blocks_but_not_by_sites():
    # the calibration filter lp4 as one direct form II (tests/test_synth.py): 17.5 of the
    # GW1N-9's 20 blocks, but 9 18x18 and 17 9x9 cells need 10 macros, and nextpnr 0.11
    # found no legal placement for it (test_calibration_gowin, 2026-12-03)
    from test_synth import calibration_specs

    from hwfilter.pipeline import quantized_graph

    lp4 = next(s for s in calibration_specs() if s.name == "lp4")
    p = load_profile("gw1n-9")
    e = estimate(quantized_graph(lp4, form="direct-form-2"), p)
    assert e.dsp_blocks == 17.5 <= p.multipliers
    assert e.dsp_sites == 10 and not e.fits
    assert e.fit_problems == (
        "its multiplier cells (9 18x18, 17 9x9) need 10 multiplier sites; with 9x9 cells in "
        "the mix, only 9 sites take cells that share one",
    )
    # the same filter as a cascade of direct form II sections places (8 macros)
    cascade = estimate(quantized_graph(lp4, form="cascade", section="direct-form-2"), p)
    assert cascade.fits and cascade.dsp_sites == 8
    # profiles without sites report none
    assert estimate(quantized_graph(lp4, form="direct-form-2"), ECP5).dsp_sites is None


def test_cli_shows_the_sites(iir, capsys):
    import json

    from hwfilter.cli import main

    assert main(["estimate", iir, "--device", "gw1n-9", "--json"]) == 0
    (row,) = json.loads(capsys.readouterr().out)
    assert row["dsp_sites"] >= row["dsp_blocks"] / 2
    assert main(["estimate", iir, "--device", "gw1n-9"]) == 0
    out = capsys.readouterr().out
    assert f"(in {row['dsp_sites']} of 10 sites)" in out
    assert main(["estimate", iir, "--device", "ecp5-25k"]) == 0
    assert "sites)" not in capsys.readouterr().out


def test_json_fields():
    d = estimate(quantized("cascade", sos=signal.butter(4, 0.2, output="sos")), ECP5).as_dict()
    for key in (
        "form",
        "section",
        "multipliers",
        "dsp_blocks",
        "luts",
        "registers",
        "critical_path_ns",
        "fmax_mhz",
        "latency_cycles",
        "fits",
    ):
        assert key in d
    assert d["form"] == "cascade" and d["section"] == "direct-form-2"
    assert isinstance(d["fits"], bool)


def test_bad_options():
    g = quantized("direct-form-2")
    with pytest.raises(ValueError, match="multipliers must be one of auto, logic, shift-add"):
        estimate(g, ECP5, multipliers="fast")
    with pytest.raises(ValueError, match="clock must be a positive frequency in MHz, not -1"):
        estimate(g, ECP5, clock_mhz=-1)
    with pytest.raises(ValueError, match="must be quantized"):
        estimate(realize("t", b=B, a=A, form="direct-form-2"), ECP5)


def test_absorbing_blocks_take_product_registers():
    # the generic part packs a register after a single-block product into the block
    # (its input registers are left out here: the next test covers them)
    taps = [0.11, -0.23, 0.37, 0.41]
    g = quantized("fir-direct", b=taps, a=[1.0])
    gen = load_profile("generic-lut6-dsp25x18")
    gen = replace(gen, multiplier=replace(gen.multiplier, block_registers=0))
    piped = estimate(g, gen, pipelining="registered-products")
    hp = plan(g, pipelining="registered-products")
    ff = flip_flop_count(g, hp)
    product = [r.name for r in hp.pipeline_registers if r.kind == "product"]
    product_bits = sum(ff.by_register[r]["kept"] for r in product)
    assert product_bits > 0
    assert piped.register_detail["absorbed"] == -product_bits
    assert piped.registers == ff.kept - product_bits


def test_block_input_registers_leave_the_fabric():
    """Yosys xilinx_dsp (techlibs/xilinx/xilinx_dsp.pmg, in_dffe) copies the register
    before a block's input, and the one before that, into every block that reads them:
    a delay read only by block multipliers (or by such delays) leaves the fabric; one
    that an adder reads stays. The counts themselves are checked against Yosys in
    tests/test_synth.py."""
    gen = load_profile("generic-lut6-dsp25x18")
    g = quantized("direct-form-2")  # both states read by the a and b multipliers only
    hp = plan(g)
    ff = flip_flop_count(g, hp)
    state = sum(ff.by_register[d.name]["kept"] for d in g.delays)
    e = estimate(g, gen)
    assert e.register_detail["absorbed"] == -state
    assert e.registers == ff.kept - state
    # a tap of 1/2 is a shift: the adder reads that delay's word, so it stays
    from hwfilter.estimate import _Model
    from hwfilter.fixed import is_power_of_two

    g1 = quantized("fir-direct", b=[0.3, 0.5, -0.2, 0.1], a=[1.0])
    shifted = next(n.inputs[0] for n in g1.of_kind("gain") if is_power_of_two(n.value))
    m = _Model(g1, gen, "auto")
    m.run()
    gone = m.block_registers_absorbed(2)
    assert shifted not in gone  # the adder reads it
    assert set(gone) == {d.name for d in g1.delays} - {shifted, g1[shifted].inputs[0]}
    assert set(gone.values()) == {0}  # whole words
    # a part without the packing keeps every register
    assert estimate(g, ECP5).registers == ff.kept


def test_route_through_luts_for_flip_flops_loaded_from_flip_flops():
    """On a fabric whose flip-flop takes its data only from the LUT beside it (Gowin:
    nextpnr's packer adds "*_passthrough_lut" cells, the tool test in test_synth.py), a
    flip-flop loaded from another flip-flop or the input word needs a LUT of its own.
    Direct form I (textbook structure, Oppenheim & Schafer ch. 6 [M]) delays the input
    twice and its output twice: x1 loads the input, x2 loads x1, y2 loads y1 (y1 loads the
    state quantizer); direct form II only w2 loads w1; the transposed form none."""
    gowin = replace(load_profile("gw1n-9"), carry_route_through=0.0)
    for form, loaded in (
        ("direct-form-1", ("x1", "x2", "y2")),
        ("direct-form-2", ("w2",)),
        ("transposed-direct-form-2", ()),
    ):
        g = quantized(form)
        ff = flip_flop_count(g, plan(g))
        bits = sum(ff.by_register[d]["kept"] for d in loaded)
        e = estimate(g, gowin)
        assert e.lut_detail["route-through"] == bits, form
        assert "route-through" not in estimate(g, ECP5).lut_detail
    # a share of the flip-flops loaded from a carry-chain sum (measured, see the profile)
    g = quantized("transposed-direct-form-2")
    half = estimate(g, replace(gowin, carry_route_through=0.5)).lut_detail["route-through"]
    assert 0 < half <= 0.5 * flip_flop_count(g, plan(g)).kept + 1


def test_critical_path_is_a_chain_of_graph_nodes():
    g = quantized("cascade", sos=signal.butter(4, 0.2, output="sos"))
    e = estimate(g, ECP5)
    for a, b in zip(e.critical_path, e.critical_path[1:]):
        # consecutive nodes are connected (possibly through nothing but wires)
        assert a in g[b].inputs
    assert np.isfinite(e.fmax_mhz) and e.fmax_mhz > 0


# -- the command line ---------------------------------------------------------------------

IIR_FILE = """
name = "est_demo"
sample_rate = 48000.0
[filter]
design = { method = "butterworth", band = "lowpass", order = 4, edges = [6000.0] }
[realization]
form = "cascade"
[fixed]
coefficient_bits = 18
state_bits = 24
"""

FIR_FILE = """
name = "fir_demo"
[filter]
taps = [0.05, -0.12, 0.31, 0.52, 0.31, -0.12, 0.05]
[realization]
form = "fir-direct"
"""


@pytest.fixture
def iir(tmp_path):
    p = tmp_path / "iir.toml"
    p.write_text(IIR_FILE)
    return str(p)


def test_cli_report(iir, capsys):
    from hwfilter.cli import main

    assert main(["estimate", iir, "--device", "ecp5-25k", "--clock", "10"]) == 0
    out = capsys.readouterr().out
    assert "cascade of direct-form-2 sections on ecp5-25k" in out
    assert "critical path" in out and "iteration bound" in out
    assert "at 10 MHz" in out and "fits the device   yes" in out
    assert "accuracy of LUTs on ecp5-25k: 82 of 83 placed designs within 25 %" in out


def test_cli_json_list(iir, capsys):
    import json

    from hwfilter.cli import main

    assert main(["estimate", iir, "--device", "ecp5-25k", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert isinstance(rows, list) and len(rows) == 1
    assert rows[0]["form"] == "cascade" and rows[0]["section"] == "direct-form-2"


def test_cli_compare_iir(iir, capsys):
    import json

    from hwfilter.cli import main

    assert main(["estimate", iir, "--device", "ice40-up5k", "--compare", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    got = [(r["form"], r["section"]) for r in rows]
    # the three direct forms, then cascade and parallel with each section form
    forms = ["direct-form-1", "direct-form-2", "transposed-direct-form-2"]
    assert got == [(f, None) for f in forms] + [
        (c, s) for c in ("cascade", "parallel") for s in forms
    ]
    for r in rows:
        assert {
            "multipliers",
            "dsp_blocks",
            "luts",
            "registers",
            "critical_path_ns",
            "fmax_mhz",
            "latency_cycles",
            "fits",
            "sqnr_db",
            "stable",
        } <= set(r)
    assert not all(r["fits"] for r in rows)  # 24-bit states tile the UP5K's 8 blocks


def test_cli_compare_table(iir, capsys):
    from hwfilter.cli import main

    assert main(["estimate", iir, "--device", "ecp5-25k", "--compare"]) == 0
    out = capsys.readouterr().out
    assert "SQNR dB" in out and "stability" in out
    assert out.count("stable r=") == 9


@pytest.mark.parametrize(
    "taps, forms",
    [
        ([0.05, -0.12, 0.31, 0.52, 0.31, -0.12, 0.05], 3),  # symmetric: three FIR forms
        ([0.05, -0.12, 0.31, 0.52, 0.30, -0.12, 0.05], 2),  # not symmetric: two
    ],
)
def test_cli_compare_fir(tmp_path, capsys, taps, forms):
    import json

    from hwfilter.cli import main

    p = tmp_path / "fir.toml"
    p.write_text(FIR_FILE.replace("[0.05, -0.12, 0.31, 0.52, 0.31, -0.12, 0.05]", str(taps)))
    assert main(["estimate", str(p), "--device", "gw1n-9", "--compare", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert [r["form"] for r in rows][:forms] == ["fir-direct", "fir-transposed", "fir-symmetric"][
        :forms
    ]
    assert len(rows) == forms


def test_cli_errors(iir, tmp_path, capsys):
    from hwfilter.cli import main

    assert main(["estimate", iir]) == 2
    assert "device: no device: give --device or set device in the file" in (capsys.readouterr().err)
    assert main(["estimate", iir, "--device", "ecp9"]) == 2
    err = capsys.readouterr().err
    assert "device must be one of" in err and err.count("\n") == 1
    assert main(["estimate", iir, "--device", "ecp5-25k", "--clock", "-5"]) == 2
    assert "--clock must be a positive frequency in MHz, not -5.0" in capsys.readouterr().err
    bad = tmp_path / "bad.toml"
    bad.write_text("schema = 1\n")
    assert main(["estimate", iir, "--device", str(bad)]) == 2
    assert str(bad) in capsys.readouterr().err


def test_cli_multiplier_modes(iir, capsys):
    import json

    from hwfilter.cli import main

    assert (
        main(["estimate", iir, "--device", "ice40-up5k", "--multipliers", "shift-add", "--json"])
        == 0
    )
    row = json.loads(capsys.readouterr().out)[0]
    assert row["dsp_blocks"] == 0 and row["multiplier_mode"] == "shift-add"
    assert all(p["implementation"] == "shift-add" for p in row["products"])
