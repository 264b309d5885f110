"""Every shipped example loads, realizes and runs through the bit-exact model."""

from __future__ import annotations

import json

import pytest
from conftest import EXAMPLES

from hwfilter.cli import main
from hwfilter.spec import load

FILES = sorted(EXAMPLES.glob("*.toml"))


def test_there_are_examples():
    # issue scope: vibration band-pass, hum notch, crossover pair, FIR channel filter
    assert {f.stem for f in FILES} >= {
        "vibration_bandpass",
        "hum_notch",
        "crossover_low",
        "crossover_high",
        "sdr_channel_fir",
    }


@pytest.mark.parametrize("path", FILES, ids=[f.stem for f in FILES])
def test_example_checks_and_simulates(path, capsys):
    spec = load(path)
    text = path.read_text()
    assert "Invented scenario" in text  # demo data says so in the file
    assert main(["check", str(path)]) == 0
    capsys.readouterr()
    assert main(["simulate", str(path), "--json"]) == 0
    s = json.loads(capsys.readouterr().out)
    assert s["samples"] > 1000
    # the shipped word lengths leave at least 60 dB between signal and error on a busy
    # half-scale input (common practice: a 16-bit path should stay well above 60 dB)
    assert s["sqnr_db"] > 60, spec.name
