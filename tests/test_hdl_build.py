"""Build folders and the emitted testbench, run by independent simulators.

Icarus Verilog (``iverilog -g2005``) and Verilator (``--binary``) run the testbench exactly
as a user would, from the build folder: it must pass on the generated design and fail
(non-zero exit, a FAIL line) when one expected word is altered.
"""

from __future__ import annotations

import json
import re
import subprocess

import numpy as np
import pytest
from conftest import require_tool
from scipy import signal

from hwfilter.errors import FilterFileError
from hwfilter.fixed import Format
from hwfilter.formats import default_quantizer_formats, quantize_coefficients, set_quantizers
from hwfilter.hdl import PORTS, plan
from hwfilter.hdl import build as build_module
from hwfilter.hdl.build import MANIFEST, write_build
from hwfilter.hdl.vectors import SEGMENTS, hex_lines, vector_set
from hwfilter.realize import realize
from hwfilter.reference import simulate_integer


def quantized(form="cascade", section="direct-form-2", name="lp4"):
    b, a = signal.butter(4, 0.2)
    g = realize(name, b=b, a=a, form=form, section=section)
    g = quantize_coefficients(g, 16)
    f = Format(16, 15)
    fmts = default_quantizer_formats(g, input_format=f, output_format=f, state_bits=18)
    return set_quantizers(g, fmts, input_format=f, rounding="half-even", overflow="saturate")


def _alter_one_expected(folder, index=37):
    path = folder / "lp4_expected.hex"
    lines = path.read_text().splitlines()
    lines[index] = f"{(int(lines[index], 16) + 1) % (1 << 16):04x}"
    path.write_text("\n".join(lines) + "\n")


def test_build_folder_contents(tmp_path):
    g = quantized()
    out = tmp_path / "build"
    m = write_build(g, out, pipelining="registered-products", samples=300, seed=4)
    assert sorted(p.name for p in out.iterdir()) == sorted(
        ["lp4.v", "lp4_tb.v", "lp4_in.hex", "lp4_expected.hex", MANIFEST]
    )
    data = json.loads((out / MANIFEST).read_text())
    assert data == m
    p = plan(g, pipelining="registered-products")
    assert data["module"] == "lp4"
    assert data["ports"] == PORTS
    assert data["latency_cycles"] == p.latency_cycles
    assert data["cycles_per_sample"] == p.cycles_per_sample
    assert data["input_format"] == {"bits": 16, "frac": 15}
    assert data["nodes"]["s1.w"]["bits"] == g["s1.w"].format.bits
    assert data["nodes"]["s1.w"]["signal"] == "s1_w"
    assert [s["name"] for s in data["vectors"]["segments"]] == list(SEGMENTS)
    # the hex files are the vector set and the reference model's words
    x = vector_set(g, 300, seed=4).words
    assert (out / "lp4_in.hex").read_text() == hex_lines(x, 16)
    y = simulate_integer(g, x).output
    assert (out / "lp4_expected.hex").read_text() == hex_lines(y, 16)
    # no absolute paths anywhere in the build
    for f in out.iterdir():
        assert str(tmp_path) not in f.read_text()


def test_build_is_deterministic_and_replaces_an_earlier_build(tmp_path):
    g = quantized()
    write_build(g, tmp_path / "a", samples=100)
    write_build(g, tmp_path / "b", samples=100)
    for f in (tmp_path / "a").iterdir():
        assert f.read_text() == (tmp_path / "b" / f.name).read_text()
    write_build(g, tmp_path / "a", samples=50)  # an earlier build is replaced
    assert json.loads((tmp_path / "a" / MANIFEST).read_text())["vectors"]["samples"] == 50
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a", "b"]  # no temporary left


def test_build_refuses_a_foreign_folder(tmp_path):
    (tmp_path / "notes.txt").write_text("mine")
    with pytest.raises(FilterFileError, match="must be new, empty or an earlier build"):
        write_build(quantized(), tmp_path)
    assert (tmp_path / "notes.txt").read_text() == "mine"
    with pytest.raises(FilterFileError, match="must be a folder"):
        write_build(quantized(), tmp_path / "notes.txt")


def test_failed_build_leaves_nothing_half_written(tmp_path, monkeypatch):
    g = quantized()
    write_build(g, tmp_path / "out", samples=64)
    before = {f.name: f.read_text() for f in (tmp_path / "out").iterdir()}

    def broken(*args, **kwargs):
        raise KeyboardInterrupt  # as if the user pressed Ctrl-C while files were written

    monkeypatch.setattr(build_module, "write_testbench_files", broken)
    with pytest.raises(KeyboardInterrupt):
        write_build(g, tmp_path / "out", samples=128)
    with pytest.raises(KeyboardInterrupt):
        write_build(g, tmp_path / "fresh", samples=128)
    # the earlier build is intact, the new one was never created, no temporary is left
    assert {f.name: f.read_text() for f in (tmp_path / "out").iterdir()} == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def _iverilog(folder):
    iverilog = require_tool("iverilog")
    vvp = require_tool("vvp")
    r = subprocess.run(
        [iverilog, "-g2005", "-o", "tb.vvp", "lp4_tb.v", "lp4.v"],
        cwd=folder,
        capture_output=True,
        text=True,
    )
    assert r.returncode == 0, r.stderr
    return subprocess.run([vvp, "-n", "tb.vvp"], cwd=folder, capture_output=True, text=True)


@pytest.mark.tool
@pytest.mark.parametrize("pipelining", ["none", "registered-all-products"])
def test_testbench_under_icarus(tmp_path, pipelining):
    write_build(quantized(), tmp_path / "b", pipelining=pipelining, samples=400)
    r = _iverilog(tmp_path / "b")
    assert r.returncode == 0, r.stdout + r.stderr
    assert r.stdout.strip().splitlines()[-1] == "checked 400 samples, 0 mismatches: PASS"
    _alter_one_expected(tmp_path / "b")
    r = _iverilog(tmp_path / "b")
    assert r.returncode != 0
    assert "checked 400 samples, 1 mismatches: FAIL" in r.stdout
    assert re.search(r"first mismatch at sample 37: expected -?\d+, got -?\d+", r.stdout)


@pytest.mark.tool
def test_testbench_under_verilator(tmp_path):
    verilator = require_tool("verilator")
    folder = tmp_path / "b"
    write_build(quantized(), folder, pipelining="registered-products", samples=400)
    r = subprocess.run(
        [
            verilator,
            "--binary",
            "-Wno-fatal",
            "--top-module",
            "lp4_tb",
            "-o",
            "lp4_tb",
            "lp4_tb.v",
            "lp4.v",
        ],
        cwd=folder,
        capture_output=True,
        text=True,
    )
    assert r.returncode == 0, r.stderr[-2000:]
    exe = folder / "obj_dir" / "lp4_tb"
    r = subprocess.run([exe], cwd=folder, capture_output=True, text=True)
    assert r.returncode == 0, r.stdout + r.stderr
    assert "checked 400 samples, 0 mismatches: PASS" in r.stdout
    _alter_one_expected(folder)  # $readmemh reads the file at run time: no rebuild
    r = subprocess.run([exe], cwd=folder, capture_output=True, text=True)
    assert r.returncode != 0
    assert "checked 400 samples, 1 mismatches: FAIL" in r.stdout


@pytest.mark.tool
def test_icarus_outputs_equal_reference(tmp_path):
    # the output words the testbench writes (+outputs=FILE) are the reference's words
    from hwfilter.hdl.simulate import run_iverilog

    require_tool("iverilog")
    g = quantized("cascade", "transposed-direct-form-2")
    x = vector_set(g, 300, seed=9).words
    r = run_iverilog(g, x, pipelining="registered-products", workdir=tmp_path)
    assert r.passed
    assert np.array_equal(r.output.astype(np.int64), simulate_integer(g, x).output)
