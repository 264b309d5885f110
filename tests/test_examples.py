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


def _compare_cases():
    """Every example with every profile; the default run keeps one profile per example
    (every profile used), the other pairs are slow."""
    from hwfilter.boards import profile_names

    names = profile_names()
    for i, path in enumerate(FILES):
        for j, name in enumerate(names):
            marks = () if j == i % len(names) else (pytest.mark.slow,)
            yield pytest.param(path, name, marks=marks, id=f"{path.stem}-{name}")


def _check_compare(path, device, capsys):
    # the estimate command answers the realization question for the example on the
    # device: every applicable realization, each with the fields scripts read, and a
    # fits verdict that agrees with the counts it reports
    from hwfilter.boards import load_profile
    from hwfilter.pipeline import applicable_realizations

    spec = load(path)
    assert main(["estimate", str(path), "--device", device, "--compare", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert [(r["form"], r["section"]) for r in rows] == list(applicable_realizations(spec))
    p = load_profile(device)
    for r in rows:
        assert r["device"] == device
        assert r["multipliers"] >= 0 and r["luts"] > 0 and r["registers"] > 0
        assert r["fmax_mhz"] > 0 and r["latency_cycles"] >= 1
        over = r["dsp_blocks"] > p.multipliers or r["luts"] > p.luts
        over = over or r["registers"] > p.flip_flops
        assert r["fits"] == (not r["fit_problems"])
        if over:
            assert not r["fits"]
        assert "sqnr_db" in r and "stable" in r


@pytest.mark.parametrize("path, device", list(_compare_cases()))
def test_compare_answers_on_every_profile(path, device, capsys):
    _check_compare(path, device, capsys)
