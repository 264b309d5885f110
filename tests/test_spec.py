"""Filter-file validation: every error names the file, the field and the problem."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal

from hwfilter.errors import FilterFileError, QuantizationWarning
from hwfilter.fixed import Format
from hwfilter.spec import from_dict, load, loads, make

BASE = 'name = "t"\nsample_rate = 1000.0\n'


def err(text: str) -> str:
    with pytest.raises(FilterFileError) as e:
        loads(BASE + text if not text.startswith("name") else text, "f.toml")
    return str(e.value)


@pytest.mark.parametrize(
    "text,expected",
    [
        ("[filter]\nb = [1.0, nan]\na = [1.0]\n", "f.toml: filter.b: item 1 must be finite"),
        ("[filter]\nb = [1.0]\na = [0.0, 1.0]\n", "f.toml: filter.a: a[0] must not be zero"),
        ("[filter]\nb = [1.0]\n", "f.toml: filter.a: is required with b"),
        ("[filter]\nsections = [[1, 0, 0, 1, 0.5]]\n", "row 0 must be 6 numbers"),
        (
            "[filter]\nsections = [[1, 0, 0, 2, 0.5, 0]]\n",
            "f.toml: filter.sections: row 0: a0 (the 4th value) must be 1, not 2",
        ),
        (
            "[filter]\nb = [1.0]\na = [1.0, -1.5]\n",
            "f.toml: filter: the filter is unstable: a pole has |p| = 1.5 > 1",
        ),
        (
            '[filter]\ndesign = { method = "butterworth", band = "lowpass", order = 4, '
            "edges = [600.0] }\n",
            "item 0 (600.0 Hz) must lie between 0 and Nyquist (500.0 Hz)",
        ),
        ("[filter]\ntaps = [1.0]\nb = [1.0]\n", "must give exactly one of"),
        (
            '[filter]\ntaps = [1.0]\n[realization]\nfrom = "cascade"\n',
            "f.toml: realization.from: unknown key (did you mean 'form'?)",
        ),
        (
            '[filter]\ntaps = [1.0]\n[realization]\nform = "casade"\n',
            "realization.form: must be one of direct-form-1, direct-form-2",
        ),
        (
            "[filter]\ntaps = [1.0]\n[fixed]\ninput = { bits = 8, frac = 9 }\n",
            "f.toml: fixed.input: frac (9) must not exceed bits (8)",
        ),
        (
            "[filter]\ntaps = [1.0]\n[fixed]\ninput = { bits = 0, frac = 0 }\n",
            "f.toml: fixed.input.bits: must be at least 1, not 0",
        ),
        (
            "[filter]\ntaps = [1.0]\n[fixed]\nstate_bits = -3\n",
            "f.toml: fixed.state_bits: must be at least 2, not -3",
        ),
        (
            '[filter]\ntaps = [1.0]\n[fixed]\nrounding = "nearest"\n',
            "fixed.rounding: must be one of floor, half-up, half-even, toward-zero, half-away",
        ),
        ('[filter]\ntaps = [1.0]\n[fixed]\nscalng = "l1"\n', "(did you mean 'scaling'?)"),
        (
            '[filter]\nb = [1.0]\na = [1.0, -0.5]\n[realization]\nform = "fir-direct"\n',
            "realization.form: form 'fir-direct' needs an FIR filter",
        ),
        (
            '[filter]\ntaps = [1.0, 2.0, 3.0]\n[realization]\nform = "fir-symmetric"\n',
            "largest asymmetry 2 at tap 0",
        ),
        (
            '[filter]\ntaps = [0.0, 1.0, 2.0, 3.0]\n[realization]\nform = "fir-symmetric"\n',
            "largest asymmetry 2 at tap 1",
        ),
        (
            '[filter]\ndesign = { method = "elliptic", band = "lowpass", order = 4, '
            "edges = [100.0], ripple = 1.0 }\n",
            "filter.design.attenuation: stopband attenuation (dB) must be given",
        ),
        (
            "[filter]\ntaps = [1.0]\n[spec]\npassband = [[0.0, 700.0]]\n",
            "f.toml: spec.passband: item 0 (700.0 Hz) lies beyond Nyquist (500.0 Hz)",
        ),
    ],
)
def test_validation_errors(text, expected):
    assert expected in err(text)


@pytest.mark.parametrize("name", ["9lives", "has-dash", "module", "with space", ""])
def test_name_must_be_an_identifier(name):
    msg = err(f'name = "{name}"\n[filter]\ntaps = [1.0]\n')
    assert "f.toml: name: must" in msg


def test_poles_on_unit_circle_only_warn():
    with pytest.warns(QuantizationWarning, match="unit circle"):
        spec = loads(BASE + "[filter]\nb = [1.0]\na = [1.0, -1.0]\n", "f.toml")
    assert spec.order == 1


def test_invalid_toml_and_missing_file(tmp_path):
    assert "is not valid TOML" in err('name = "t"\n[filter\n')
    with pytest.raises(FilterFileError, match="file not found"):
        load(tmp_path / "missing.toml")


def test_designs_equal_scipy():
    # each design method matches the scipy call it names (scipy.signal as reference)
    spec = loads(
        BASE + '[filter]\ndesign = { method = "elliptic", band = "bandpass", '
        "order = 3, edges = [100.0, 200.0], ripple = 0.5, attenuation = 50.0 }\n"
    )
    b, a = signal.ellip(3, 0.5, 50, [0.2, 0.4], "bandpass")
    np.testing.assert_allclose(spec.b, b, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(spec.a, a, rtol=1e-12)
    spec = loads(
        BASE + '[filter]\ndesign = { method = "window", band = "lowpass", '
        "order = 20, edges = [125.0] }\n"
    )
    np.testing.assert_allclose(spec.b, signal.firwin(21, 0.25), atol=1e-15)
    spec = loads(
        BASE + '[filter]\ndesign = { method = "equiripple", band = "lowpass", '
        "order = 24, edges = [100.0, 150.0] }\n"
    )
    np.testing.assert_allclose(
        spec.b, signal.remez(25, [0, 100, 150, 500], [1, 0], fs=1000), atol=1e-12
    )


def test_complex_zeros_and_poles_from_pairs():
    spec = loads(
        BASE + "[filter]\nzeros = [[0.0, 1.0], [0.0, -1.0]]\n"
        "poles = [[0.5, 0.5], [0.5, -0.5]]\ngain = 0.25\n"
    )
    np.testing.assert_allclose(spec.b, [0.25, 0, 0.25])
    np.testing.assert_allclose(spec.a, [1.0, -1.0, 0.5])
    assert "conjugate pairs" in err("[filter]\nzeros = [[0.0, 1.0]]\npoles = []\ngain = 1.0\n")


def test_defaults_and_python_api():
    spec = make(
        name="demo", filter={"taps": [0.25, 0.5, 0.25]}, realization={"form": "fir-symmetric"}
    )
    assert spec.fixed.input == Format(16, 15) and spec.fixed.output == Format(16, 15)
    assert spec.fixed.coefficient_bits == 18 and spec.fixed.state_bits == 24
    assert (spec.fixed.rounding, spec.fixed.overflow, spec.fixed.scaling) == (
        "half-up",
        "saturate",
        "l1",
    )
    assert spec.realization.section == "direct-form-2"
    same = from_dict({"name": "demo", "filter": {"taps": [0.25, 0.5, 0.25]}})
    assert same.is_fir and same.realization.form == "cascade"
    # leading zeros are a pure delay: the taps after them are symmetric, and the form
    # is offered and accepted
    delayed = make(name="d", filter={"taps": [0.0, 0.25, 0.5, 0.25]})
    from hwfilter.pipeline import applicable_realizations

    assert ("fir-symmetric", None) in applicable_realizations(delayed)
    make(name="d", filter={"taps": [0.0, 0.25, 0.5, 0.25]}, realization={"form": "fir-symmetric"})


def test_pipelining_choices_match_the_hardware():
    # the file's [hardware] pipelining accepts exactly the options the hardware builds
    from hwfilter.hdl import PIPELININGS as HW
    from hwfilter.spec import PIPELININGS

    assert PIPELININGS == HW
