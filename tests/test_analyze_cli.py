"""The analysis bundle and ``hwfilter analyze``: response vs scipy, verdicts, JSON keys."""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy import signal

from hwfilter.analysis import analyze, response_deviation
from hwfilter.cli import main
from hwfilter.fixed import Format
from hwfilter.formats import quantize_coefficients, set_quantizers
from hwfilter.realize import realize
from hwfilter.scaling import scaled_formats

FI = Format(16, 15)


def _quantized(b, a, form, coef_bits=16, scaling="l1", out=FI, overflow="saturate"):
    fg = realize("t", b=b, a=a, form=form)
    g = quantize_coefficients(fg, coef_bits)
    fm = scaled_formats(g, input_format=FI, output_format=out, state_bits=20, scaling=scaling)
    return set_quantizers(g, fm, input_format=FI, rounding="half-even", overflow=overflow), fg


def _tf(graph):
    """Quantized b, a of a direct form II graph, read back from its gains."""
    q = {n.name: n.quantized_coefficient for n in graph.of_kind("gain")}
    nb = max(int(k[1:]) for k in q if k.startswith("b")) + 1
    na = max(int(k[1:]) for k in q if k.startswith("a")) + 1
    return [q.get(f"b{k}", 0.0) for k in range(nb)], [1.0] + [
        q.get(f"a{k}", 0.0) for k in range(1, na)
    ]


def test_response_deviation_matches_scipy():
    # scipy.signal.freqz of the quantized and the design coefficients as the reference
    b, a = signal.ellip(4, 0.5, 50, 0.3)
    g, fg = _quantized(b, a, "direct-form-2", coef_bits=10)
    bq, aq = _tf(g)
    w = np.linspace(0, np.pi, 2048)
    want = np.max(np.abs(signal.freqz(bq, aq, worN=w)[1] - signal.freqz(b, a, worN=w)[1]))
    r = response_deviation(g, fg)
    assert r["max_deviation"] == pytest.approx(want, rel=1e-9)
    assert r["spec_met"] is None


def test_spec_verdicts_against_scipy_measurements():
    # the ripple and attenuation of the design, measured with scipy.signal.freqz, set the
    # thresholds; 8-bit direct-form coefficients then miss what the design just meets
    fs = 1000.0
    b, a = signal.ellip(4, 0.5, 50, 100.0, fs=fs)
    f = np.linspace(0, 100, 4000)
    pb = 20 * np.log10(np.abs(signal.freqz(b, a, worN=f, fs=fs)[1]))
    fsb = np.linspace(150, 500, 4000)
    sb = 20 * np.log10(np.abs(signal.freqz(b, a, worN=fsb, fs=fs)[1]))
    ripple, atten = pb.max() - pb.min(), pb.max() - sb.max()
    assert ripple == pytest.approx(0.5, abs=0.01)
    spec = dict(
        passband=[(0.0, 100.0)],
        stopband=[(150.0, 500.0)],
        passband_ripple_db=ripple + 0.01,
        stopband_attenuation_db=atten - 0.01,
        sample_rate=fs,
    )
    fine, fg = _quantized(b, a, "cascade", coef_bits=24)
    r = response_deviation(fine, fg, points=4000, **spec)
    assert r["design_ripple_db"] == pytest.approx(ripple, abs=1e-3)
    assert r["design_attenuation_db"] == pytest.approx(atten, abs=1e-2)
    assert r["design_meets_spec"] is True and r["spec_met"] is True
    coarse, fg = _quantized(b, a, "direct-form-2", coef_bits=8)
    r = response_deviation(coarse, fg, points=4000, **spec)
    assert r["design_meets_spec"] is True and r["spec_met"] is False
    assert r["quantized_ripple_db"] > ripple + 1.0
    assert r["passband_deviation_db"] > 1.0
    with pytest.raises(ValueError, match="sample_rate must be a positive number of Hz"):
        response_deviation(coarse, fg, passband=[(0, 100)])
    with pytest.raises(ValueError, match="band edges must satisfy"):
        response_deviation(coarse, fg, passband=[(0, 600)], sample_rate=fs)


def test_analyze_cascade_verdicts():
    b, a = signal.ellip(4, 0.7, 45, 0.27)
    g, fg = _quantized(b, a, "cascade", out=Format(18, 15))
    res = analyze(g, fg, scaling="l1", measure_samples=120_000)
    assert res["stable"] is True and 0.9 < res["max_pole_radius"] < 1
    assert res["overflow_possible"] is False  # l1 scaling and a wide enough output
    assert {n["name"] for n in res["nodes"]} == {n.name for n in g.nodes}
    noise = res["noise"]
    assert noise["measured_power_lsb2"] == pytest.approx(noise["predicted_power_lsb2"], rel=0.1)
    assert noise["predicted_db"] == pytest.approx(10 * np.log10(noise["predicted_power_lsb2"]))
    assert res["sqnr"]["measured_db"] == pytest.approx(res["sqnr"]["predicted_db"], abs=0.5)
    assert res["limit_cycle_lsb"] == max(c["amplitude_lsb"] for c in res["limit_cycles"])
    json.dumps(res)  # plain Python values throughout


def test_analyze_unstable_direct_form():
    # Kaiser's example (shared/references.md): 16-bit direct form of butter(8, 0.05)
    b, a = signal.butter(8, 0.05)
    fg = realize("k", b=b, a=a, form="direct-form-2")
    g = quantize_coefficients(fg, 16)
    fm = scaled_formats(g, input_format=FI, output_format=FI, state_bits=24, scaling="none")
    g = set_quantizers(g, fm, input_format=FI, rounding="half-even", overflow="saturate")
    res = analyze(g, fg, measure=True, limit_cycle_points=1 << 12)
    assert res["stable"] is False and res["max_pole_radius"] == pytest.approx(1.38, abs=0.005)
    assert res["overflow_possible"] is True
    assert "measured_power_lsb2" not in res["noise"]  # no measurement of an unstable filter
    assert res["limit_cycles"][0]["search"] == "bounded"


FILTER = """\
name = "analyze_demo"
sample_rate = 48000.0
[filter]
design = { method = "elliptic", band = "lowpass", order = 4, edges = [6000.0], \
           ripple = 0.5, attenuation = 50.0 }
[realization]
form = "cascade"
[fixed]
input = { bits = 16, frac = 15 }
output = { bits = 16, frac = 15 }
coefficient_bits = 18
state_bits = 24
scaling = "l1"
[fixed.nodes]
"s1.w" = { bits = 24, frac = 19 }
[spec]
passband = [[0.0, 6000.0]]
stopband = [[11000.0, 24000.0]]
passband_ripple = 0.6
stopband_attenuation = 49.0
"""


@pytest.fixture
def filt(tmp_path):
    p = tmp_path / "f.toml"
    p.write_text(FILTER)
    return p


def test_analyze_command_json(filt, capsys):
    assert main(["analyze", str(filt), "--json", "--samples", "100000"]) == 0
    res = json.loads(capsys.readouterr().out)
    assert isinstance(res["stable"], bool) and res["stable"]
    assert 0 < res["max_pole_radius"] < 1
    nodes = {n["name"]: n for n in res["nodes"]}
    assert nodes["s1.w"]["bits"] == 24 and nodes["s1.w"]["frac"] == 19
    assert nodes["s1.w"]["overridden"] is True and nodes["s2.w"]["overridden"] is False
    assert {"name", "bits", "frac"} <= set(nodes["y_out"])
    assert res["noise"]["predicted_power_lsb2"] > 0 and "predicted_db" in res["noise"]
    assert isinstance(res["limit_cycle_lsb"], int)
    assert isinstance(res["overflow_possible"], bool)
    resp = res["response"]
    assert resp["passband_deviation_db"] < 0.01 and resp["spec_met"] is True
    assert res["noise"]["measured_samples"] > 90_000


def test_analyze_command_text(filt, capsys):
    assert main(["analyze", str(filt), "--no-measure"]) == 0
    out = capsys.readouterr().out
    assert "stable (exact Schur-Cohn test on the quantized coefficients): yes" in out
    assert "response spec: met" in out
    for name in ("s1.w", "s2.w", "y_out"):
        assert f"\n  {name} " in out
    assert "measured" not in out.split("SQNR")[0]


def test_analyze_command_bad_file(tmp_path, capsys):
    p = tmp_path / "bad.toml"
    p.write_text(FILTER.replace('scaling = "l1"', 'scaling = "loud"'))
    assert main(["analyze", str(p)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "scaling" in err and "Traceback" not in err
    assert main(["analyze", str(tmp_path / "missing.toml")]) == 2
