"""``hwfilter build`` and ``hwfilter verify`` from the command line."""

from __future__ import annotations

import json

import numpy as np
import pytest
from conftest import require_tool

from hwfilter.cli import main
from hwfilter.commands import verify as verify_command
from hwfilter.pipeline import quantized_graph
from hwfilter.reference import simulate_float, simulate_integer
from hwfilter.spec import loads

FILTER = """
name = "lp_cli"
sample_rate = 48000.0
[filter]
design = { method = "butterworth", band = "lowpass", order = 4, edges = [6000.0] }
[realization]
form = "cascade"
section = "direct-form-1"
[fixed]
input = { bits = 16, frac = 15 }
output = { bits = 16, frac = 15 }
coefficient_bits = 16
state_bits = 20
rounding = "half-up"
overflow = "saturate"
[hardware]
pipelining = "registered-products"
"""


@pytest.fixture
def filt(tmp_path):
    p = tmp_path / "lp.toml"
    p.write_text(FILTER)
    return p


def test_build_writes_the_folder(filt, tmp_path, capsys):
    out = tmp_path / "out"
    assert main(["build", str(filt), "-o", str(out), "--samples", "256", "--hardware-only"]) == 0
    text = capsys.readouterr().out
    assert "module lp_cli: pipelining registered-products" in text
    m = json.loads((out / "build.json").read_text())
    assert m["pipelining"] == "registered-products"  # from the file's [hardware] table
    assert m["vectors"]["samples"] == 256
    assert (out / "lp_cli.v").read_text().count("module lp_cli(") == 1
    # the command line overrides the file
    assert (
        main(["build", str(filt), "-o", str(out), "--pipelining", "none", "--hardware-only"]) == 0
    )
    assert json.loads((out / "build.json").read_text())["latency_cycles"] == 1


def test_build_errors_are_one_line(filt, tmp_path, capsys):
    (tmp_path / "mine").mkdir()
    (tmp_path / "mine" / "keep.txt").write_text("x")
    assert main(["build", str(filt), "-o", str(tmp_path / "mine")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("hwfilter build: error: output folder must be new, empty")
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    bad = tmp_path / "bad.toml"
    bad.write_text(FILTER.replace('form = "cascade"', 'form = "spiral"'))
    assert main(["build", str(bad), "-o", str(tmp_path / "b")]) == 2
    assert "realization.form" in capsys.readouterr().err
    assert not (tmp_path / "b").exists()


def test_verify_amaranth_and_vcd(filt, tmp_path, capsys):
    vcd = tmp_path / "wave.vcd"
    assert main(["verify", str(filt), "--samples", "200", "--vcd", str(vcd)]) == 0
    text = capsys.readouterr().out
    assert "amaranth: 200 outputs bit-exact" in text
    assert "SQNR against the float design:" in text
    assert "$enddefinitions" in vcd.read_text()


def test_verify_sqnr_is_the_float_comparison(filt):
    # the printed SQNR is 10 log10(sum y_float^2 / sum (y - y_float)^2) on the same input
    g = quantized_graph(loads(FILTER))
    x = np.random.default_rng(1).integers(-8000, 8000, 3000)
    y = simulate_integer(g, x).output
    yf = simulate_float(g, x / 2**15) * 2**15
    want = 10 * np.log10(np.sum(yf**2) / np.sum((y - yf) ** 2))
    assert verify_command.sqnr_db(g, x, y) == pytest.approx(want, rel=1e-12)
    assert 60 < want < 110  # 16-bit output of a well-scaled lowpass (6 dB per bit)


def test_verify_reports_the_first_mismatch(filt, capsys, monkeypatch):
    real = verify_command.run_amaranth

    def faulty(graph, x, **kw):
        r = real(graph, x, **kw)
        r.output[57] += 1  # one wrong word, as a broken design would give
        return r

    monkeypatch.setattr(verify_command, "run_amaranth", faulty)
    assert main(["verify", str(filt), "--samples", "100"]) == 1
    text = capsys.readouterr().out
    assert "amaranth: MISMATCH" in text
    assert "sample 57: expected" in text and "inputs x[50..57] = [" in text


def test_verify_option_errors(filt, tmp_path, capsys):
    args = ["verify", str(filt), "--simulator", "verilator", "--vcd", str(tmp_path / "w.vcd")]
    assert main(args) == 2
    assert "--vcd needs the Amaranth simulator" in capsys.readouterr().err
    assert main(["verify", str(filt), "--samples", "0"]) == 2


@pytest.mark.tool
def test_verify_every_simulator(filt, capsys):
    require_tool("iverilog")
    require_tool("verilator")
    assert main(["verify", str(filt), "--simulator", "all", "--samples", "300"]) == 0
    text = capsys.readouterr().out
    for sim in ("amaranth", "iverilog", "verilator"):
        assert f"{sim}: 300 outputs bit-exact" in text
