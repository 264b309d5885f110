"""Verilog text: deterministic, named after the graph and its nodes, clean under Verilator."""

from __future__ import annotations

import re
import subprocess

import pytest
from conftest import require_tool
from scipy import signal

from hwfilter.fixed import Format
from hwfilter.formats import default_quantizer_formats, quantize_coefficients, set_quantizers
from hwfilter.hdl import PIPELININGS, PORTS, generate_verilog, module_name, plan
from hwfilter.hdl.verilog import VERILATOR_LINT_WAIVERS, lint_flags
from hwfilter.realize import FORMS, SECTION_FORMS, realize

REALIZATIONS = [
    (f, s) for f in FORMS for s in (SECTION_FORMS if f in ("cascade", "parallel") else ("",))
]


def quantized(form, section="", name="lp4", overflow="saturate", rounding="half-even"):
    if form.startswith("fir"):
        b, a = signal.firwin(9, 0.3), [1.0]
    else:
        b, a = signal.butter(4, 0.2)
    g = realize(name, b=b, a=a, form=form, section=section or "direct-form-2")
    g = quantize_coefficients(g, 16)
    f = Format(16, 15)
    fmts = default_quantizer_formats(g, input_format=f, output_format=f, state_bits=20)
    return set_quantizers(g, fmts, input_format=f, rounding=rounding, overflow=overflow)


def test_deterministic_and_free_of_paths():
    g = quantized("cascade", "direct-form-2")
    a = generate_verilog(g, pipelining="registered-products")
    b = generate_verilog(quantized("cascade", "direct-form-2"), pipelining="registered-products")
    assert a == b
    # no source locations (src attributes) and no absolute paths of this machine
    assert "src =" not in a
    assert "/work/" not in a and "site-packages" not in a and ".py:" not in a


def test_module_ports_and_names():
    g = quantized("cascade", "direct-form-2", name="lp4")
    text = generate_verilog(g)
    assert re.search(r"^module lp4\(", text, re.M)
    for port in PORTS.values():
        assert re.search(rf"^\s*(input|output)\s.*\b{port}\b", text, re.M), port
    # internal signals are named after the nodes: s1.w -> s1_w, s2.w1 -> s2_w1
    for node in ("s1.w", "s1.w1", "s2.w2", "s1.y_sum"):
        assert re.search(rf"\b{node.replace('.', '_')}\b", text), node
    # a product register keeps the node's name; the multiplier before it is <name>_product
    p = plan(g, pipelining="registered-products")
    text = generate_verilog(g, pipelining="registered-products")
    for name in p.registered:
        sig = name.replace(".", "_")
        assert re.search(rf"\breg\b.*\b{sig}\b", text) and f"{sig}_product" in text


def test_module_name_is_an_identifier():
    g = quantized("direct-form-2", name="lp4")
    assert module_name(g) == "lp4"
    from dataclasses import replace

    assert module_name(replace(g, name="band-pass 2")) == "band_pass_2"
    assert module_name(replace(g, name="2nd")) == "filter_2nd"


@pytest.mark.tool
@pytest.mark.parametrize("pipelining", PIPELININGS)
@pytest.mark.parametrize("form,section", REALIZATIONS, ids=[f"{f}-{s}" for f, s in REALIZATIONS])
def test_verilator_lint(tmp_path, form, section, pipelining):
    # Verilator (an independent tool) finds nothing beyond the documented waivers
    verilator = require_tool("verilator")
    g = quantized(form, section, overflow="wrap", rounding="half-up")
    (tmp_path / "lp4.v").write_text(generate_verilog(g, pipelining=pipelining))
    r = subprocess.run(
        [verilator, *lint_flags(), "lp4.v"], cwd=tmp_path, capture_output=True, text=True
    )
    assert r.returncode == 0, r.stderr


@pytest.mark.tool
def test_lint_waivers_are_needed(tmp_path):
    # each waived class really fires without its waiver (so none is waived for nothing)
    verilator = require_tool("verilator")
    g = quantized("cascade", "direct-form-1")
    (tmp_path / "lp4.v").write_text(generate_verilog(g, pipelining="registered-products"))
    r = subprocess.run(
        [verilator, "--lint-only", "-Wall", "lp4.v"], cwd=tmp_path, capture_output=True, text=True
    )
    fired = set(re.findall(r"%Warning-([A-Z]+)", r.stderr))
    assert fired == set(VERILATOR_LINT_WAIVERS)
