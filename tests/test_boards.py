"""Device profiles: the shipped files, the facts they hold, and the errors for bad files."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from hwfilter.boards import BOARDS_DIR, FAMILIES, load_profile, profile_names
from hwfilter.errors import FilterFileError

REQUIRED = ("ice40-up5k", "ecp5-25k", "ecp5-85k", "gw1n-9", "generic-lut6-dsp25x18")
NUMBER_FIELDS = (
    "counts.luts",
    "counts.lut_inputs",
    "counts.flip_flops",
    "counts.multipliers",
    "counts.block_rams",
    "counts.block_ram_bits",
    "multiplier.a_bits",
    "multiplier.b_bits",
    "multiplier.signed_only",
    "multiplier.pre_adder",
    "multiplier.accumulator_bits",
    "multiplier.absorbs_output_register",
    "multiplier.absorbs_post_adder",
    "logic.carry_bits_per_cell",
    "delay.lut",
    "delay.carry_entry",
    "delay.carry_per_bit",
    "delay.multiplier",
    "delay.routing",
    "delay.setup",
    "delay.clock_to_out",
)


def test_required_profiles_ship():
    assert set(REQUIRED) <= set(profile_names())


@pytest.mark.parametrize("name", REQUIRED)
def test_every_number_has_a_source(name):
    p = load_profile(name)
    assert p.name == name == Path(p.path).stem
    assert p.family in FAMILIES
    for key in NUMBER_FIELDS:
        src = p.source(key)
        assert src.strip(), key
    if p.default_clock_mhz is not None:
        assert p.source("default_clock_mhz")
    assert p.mapping and all(m.source.strip() for m in p.mapping)


@pytest.mark.parametrize("name", ["ecp5-25k", "ecp5-85k"])
def test_ecp5_delays_are_calibrated(name):
    p = load_profile(name)
    for key in ("delay.lut", "delay.carry_per_bit", "delay.multiplier", "delay.routing"):
        assert "calibrated against nextpnr 0.11 on 2026-12-01" in p.source(key)


def test_uncalibrated_delays_say_so():
    p = load_profile("generic-lut6-dsp25x18")
    assert "from memory" in p.source("delay.lut")
    assert "not calibrated" in p.source("delay.lut")
    # Gowin: nextpnr's timing model values, whose paths are incomplete (not checked)
    g = load_profile("gw1n-9")
    for key in ("delay.lut", "delay.routing", "delay.setup", "delay.clock_to_out"):
        assert "nextpnr 0.11 (himbaechel-gowin) timing model" in g.source(key)
        assert "not checked" in g.source(key)
    assert "from memory" in g.source("delay.multiplier")
    assert "leaves paths untimed" in g.synthesis.timing_not_checked
    assert "\n" not in g.synthesis.timing_not_checked


# Device facts from shared/references.md (data sheets as remembered, [M]), and for the
# Lattice parts the "available" counts of nextpnr 0.11's device database
@pytest.mark.parametrize(
    "name, luts, mults, a_bits, b_bits",
    [
        ("ice40-up5k", 5280, 8, 16, 16),
        ("ecp5-25k", 24288, 28, 18, 18),
        ("ecp5-85k", 83640, 156, 18, 18),
        ("gw1n-9", 8640, 20, 18, 18),
        ("generic-lut6-dsp25x18", 20800, 90, 25, 18),
    ],
)
def test_device_facts(name, luts, mults, a_bits, b_bits):
    p = load_profile(name)
    assert (p.luts, p.multipliers, p.multiplier.a_bits, p.multiplier.b_bits) == (
        luts,
        mults,
        a_bits,
        b_bits,
    )


def test_more_device_facts():
    up5k = load_profile("ice40-up5k")
    assert (up5k.block_rams, up5k.block_ram_bits, up5k.multiplier.accumulator_bits) == (
        30,
        4096,
        32,
    )
    assert load_profile("gw1n-9").flip_flops == 6480
    generic = load_profile("generic-lut6-dsp25x18")
    assert generic.lut_inputs == 6 and generic.multiplier.accumulator_bits == 48
    assert generic.multiplier.signed_only
    assert load_profile("ecp5-25k").carry_bits_per_cell == 2


@pytest.mark.parametrize("name", profile_names())
def test_profiles_state_their_measured_accuracy(name):
    # every shipped profile says how close its estimates came to the tools, with a source
    # (the calibration tables in docs/estimates.md)
    p = load_profile(name)
    assert set(p.accuracy) == {"luts", "fmax"}
    for key in p.accuracy:
        assert "docs/estimates.md" in p.source(f"accuracy.{key}")
    if p.family != "ecp5":
        assert "not" in p.accuracy["luts"] or "not" in p.accuracy["fmax"]


def test_gowin_places_with_pins_and_counts_two_cell_types():
    # nextpnr 0.11's Gowin architecture will not place unconstrained pins (observed
    # 2026-12-03: "ERROR: Unconstrained IO"), so the profile carries a pin file for the
    # timing wrapper's seven ports, and counts LUT4 and ALU cells as placed LUTs
    flow = load_profile("gw1n-9").synthesis
    assert flow.nextpnr == "himbaechel-gowin"
    assert "cst=pins.cst" in flow.nextpnr_args
    for port in ("clk", "rst", "sin", "vin", "sout", "vout", "rdy"):
        assert f'IO_LOC "{port}" ' in flow.pin_constraints
    assert flow.placed_luts == ("LUT4", "ALU")
    assert load_profile("ecp5-25k").synthesis.placed_luts == ("TRELLIS_COMB",)


def test_load_by_path(tmp_path):
    text = (BOARDS_DIR / "ecp5-25k.toml").read_text()
    f = tmp_path / "mine.toml"
    f.write_text(text.replace('name = "ecp5-25k"', 'name = "mine"'))
    p = load_profile(str(f))
    assert p.name == "mine" and p.path == str(f)


def _broken(tmp_path, old: str, new: str) -> str:
    text = (BOARDS_DIR / "ecp5-25k.toml").read_text()
    assert old in text, old
    f = tmp_path / "bad.toml"
    f.write_text(text.replace(old, new, 1))
    return str(f)


@pytest.mark.parametrize(
    "old, new, field, problem",
    [
        (
            "luts = { value = 24288, source",
            "luts = { value = -5, source",
            "counts.luts",
            "value must be at least 1, not -5",
        ),
        (
            "\nlut = { value = ",
            '\nlut = { value = "fast", source = "x" } # ',
            "delay.lut",
            "value must be a finite number, not 'fast'",
        ),
        (
            "lut_inputs = { value = 4, source",
            "lut_inputs = 4 # { value = 4, source",
            "counts.lut_inputs",
            'must be a table { value = ..., source = "..." }, not 4',
        ),
        (
            '4, source = "from memory: ECP5 family data sheet, 4-input LUTs"',
            '4, source = " "',
            "counts.lut_inputs",
            "source must be a non-empty string",
        ),
        ('family = "ecp5"', 'family = "ecp6"', "family", "must be one of ice40, ecp5"),
        ("luts = {", "lutz = {", "counts.lutz", "unknown key (did you mean 'luts'?)"),
        (
            "\nmultiplier = { value = ",
            '\nmultiplier = { value = -1.0, source = "x" } # ',
            "delay.multiplier",
            "value must be zero or positive, not -1.0",
        ),
        ("schema = 1", "schema = 2", "schema", "must be 1, not 2"),
        (
            "min_a_bits = 2",
            "min_a_bits = -2",
            "synthesis.multiplier_pass[0].min_a_bits",
            "must be a non-negative integer, not -2",
        ),
        (
            'nextpnr = "ecp5"',
            'nextpnr = "vpr"',
            "synthesis.nextpnr",
            "must be one of ecp5, ice40, himbaechel-gowin or empty, not 'vpr'",
        ),
        (
            "chain_end_luts = { value = 4,",
            'carry_route_through = { value = 1.5, source = "x" }\nchain_end_luts = { value = 4,',
            "logic.carry_route_through",
            "value must be at most 1, not 1.5",
        ),
        (
            'luts = { value = "82 of 83',
            'luts = { value = 80, source = "x" } # "82 of 83',
            "accuracy.luts",
            "value must be a non-empty text, not 80",
        ),
        ("\nfmax = { value = ", "\nfmx = { value = ", "accuracy.fmx", "did you mean 'fmax'?"),
        (
            "chain_end_luts = { value = 4,",
            "chain_end_luts = { value = -1,",
            "logic.chain_end_luts",
            "value must be at least 0, not -1",
        ),
        ('placed_luts = "TRELLIS_COMB"', "placed_luts = 5", "synthesis.placed_luts", "strings"),
        (
            'placed_luts = "TRELLIS_COMB"',
            'placed_luts = ["TRELLIS_COMB", 3]',
            "synthesis.placed_luts",
            "must be a list of strings",
        ),
        ('nextpnr = "ecp5"', 'nextpnr = ""', "synthesis.placed_luts", "needs a place-and-route"),
        (
            "chain_end_luts = { value = 4,",
            'full_adder_luts = { value = 0, source = "x" }\nchain_end_luts = { value = 4,',
            "logic.full_adder_luts",
            "value must be positive, not 0",
        ),
        (
            "block_ram_bits = {",
            'multiplier_sites = { value = 8, source = "x" }\nblock_ram_bits = {',
            "synthesis.multiplier_pass[0].per_site",
            "is missing: counts.multiplier_sites is set",
        ),
        (
            "min_a_bits = 2",
            "min_a_bits = 2\nper_site = 0",
            "synthesis.multiplier_pass[0].per_site",
            "must be a positive number, not 0",
        ),
        (
            "min_a_bits = 2",
            "min_a_bits = 2\nsite_limit = 1.5",
            "synthesis.multiplier_pass[0].site_limit",
            "must be a non-negative integer, not 1.5",
        ),
    ],
)
def test_bad_profile_names_file_field_problem(tmp_path, old, new, field, problem):
    path = _broken(tmp_path, old, new)
    with pytest.raises(FilterFileError) as e:
        load_profile(path)
    msg = str(e.value)
    assert path in msg
    assert field in msg
    assert problem in msg


def test_missing_field(tmp_path):
    path = _broken(tmp_path, "flip_flops = {", "# flip_flops = {")
    with pytest.raises(FilterFileError, match=r"counts\.flip_flops: is missing"):
        load_profile(path)


def test_invalid_toml(tmp_path):
    f = tmp_path / "broken.toml"
    f.write_text("schema = 1\nname = [")
    with pytest.raises(FilterFileError, match=re.escape(str(f)) + ": is not valid TOML"):
        load_profile(str(f))


def test_unknown_name_lists_the_known_ones():
    with pytest.raises(FilterFileError, match="device: device must be one of .*ecp5-25k") as e:
        load_profile("ecp5-25")
    assert "did you mean 'ecp5-25k'?" in str(e.value)


def test_missing_file(tmp_path):
    with pytest.raises(FilterFileError, match="cannot read device profile"):
        load_profile(str(tmp_path / "none.toml"))
