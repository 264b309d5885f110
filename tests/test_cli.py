"""The command line: exit codes, one-line errors, JSON summaries, atomic outputs."""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest
from scipy import signal

from hwfilter.cli import main

FILTER = """
name = "cli_demo"
sample_rate = 48000.0
[filter]
design = { method = "butterworth", band = "lowpass", order = 4, edges = [6000.0] }
[realization]
form = "cascade"
[fixed]
input = { bits = 16, frac = 15 }
output = { bits = 16, frac = 15 }
coefficient_bits = 18
state_bits = 24
"""


@pytest.fixture
def filt(tmp_path):
    p = tmp_path / "f.toml"
    p.write_text(FILTER)
    return p


def test_check_prints_summary(filt, capsys):
    assert main(["check", str(filt)]) == 0
    out = capsys.readouterr().out
    assert "cascade of 2 direct-form-2 sections" in out
    # Parhi / O&S counts per biquad (shared/references.md): 5 multipliers, 4 adders each;
    # a cascade of two: 10 and 8, 4 delays
    assert "10 multipliers, 8 two-input adders, 4 delays" in out


def test_check_json(filt, capsys):
    assert main(["check", str(filt), "--json"]) == 0
    s = json.loads(capsys.readouterr().out)
    assert s["counts"]["delays"] == 4
    for c in s["coefficients"]:  # quantized value is the integer over 2**frac, exactly
        assert c["quantized"] == c["integer"] * 2.0 ** -c["frac"]
        assert abs(c["error"]) <= 2.0 ** -(c["frac"] + 1)


def test_simulate_roundtrip_and_json(filt, tmp_path, capsys, rng):
    x = rng.integers(-8000, 8000, size=3000)
    xin = tmp_path / "x.txt"
    xin.write_text("\n".join(str(v) for v in x) + "\n")
    yout = tmp_path / "y.npy"
    assert main(["simulate", str(filt), "--input", str(xin), "--output", str(yout), "--json"]) == 0
    s = json.loads(capsys.readouterr().out)
    assert s["samples"] == 3000 and s["total_overflows"] == 0
    y = np.load(yout)
    # against scipy.signal.sosfilt of the float design, in output LSB: within a few LSB
    sos = signal.butter(4, 6000 / 24000, output="sos")
    ref = signal.sosfilt(sos, x / 32768) * 32768
    assert np.max(np.abs(y - ref)) == pytest.approx(s["max_abs_error_lsb"], rel=1e-6)
    assert s["max_abs_error_lsb"] < 8
    assert s["sqnr_db"] > 60
    assert s["measured_noise_power_lsb2"] < 1.0


def test_simulate_float_output(filt, tmp_path, capsys, rng):
    x = rng.integers(-8000, 8000, size=500)
    xin = tmp_path / "x.npy"
    np.save(xin, x)
    yout = tmp_path / "yf.txt"
    assert main(["simulate", str(filt), "--input", str(xin), "--output", str(yout), "--float"]) == 0
    y = np.array([float(v) for v in yout.read_text().split()])
    sos = signal.butter(4, 0.25, output="sos")
    np.testing.assert_allclose(y, signal.sosfilt(sos, x / 32768) * 32768, atol=1e-7)


def test_simulate_default_signal(filt, capsys):
    assert main(["simulate", str(filt), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["samples"] == 8192


@pytest.mark.parametrize(
    "words,message",
    [
        ("1\n2\nabc\n", "line 3: must be a signed integer word, not 'abc'"),
        ("1\n40000\n", "line 2: word 40000 does not fit the input format"),
    ],
)
def test_bad_input_words_exit_2_without_output(filt, tmp_path, capsys, words, message):
    xin = tmp_path / "bad.txt"
    xin.write_text(words)
    yout = tmp_path / "y.txt"
    assert main(["simulate", str(filt), "--input", str(xin), "--output", str(yout)]) == 2
    err = capsys.readouterr().err
    assert message in err and str(xin) in err
    assert not yout.exists()


def test_bad_file_is_one_line_and_exit_2(tmp_path):
    p = tmp_path / "bad.toml"
    p.write_text('name = "x"\n[filter]\ntaps = [1.0]\n[fixed]\nstate_bit = 12\n')
    r = subprocess.run(
        [sys.executable, "-m", "hwfilter", "check", str(p)], capture_output=True, text=True
    )
    assert r.returncode == 2
    assert r.stderr.strip().count("\n") == 0 and "Traceback" not in r.stderr
    assert "fixed.state_bit: unknown key (did you mean 'state_bits'?)" in r.stderr


def test_new_writes_a_valid_starter(tmp_path, capsys):
    out = tmp_path / "my_lp.toml"
    assert main(["new", "my_lp", "-o", str(out)]) == 0
    assert main(["check", str(out)]) == 0
    assert main(["new", "my_lp", "-o", str(out)]) == 2  # no silent overwrite
    assert "already exists" in capsys.readouterr().err
    assert main(["new", "1bad", "-o", str(tmp_path / "x.toml")]) == 2
    assert not (tmp_path / "x.toml").exists()
