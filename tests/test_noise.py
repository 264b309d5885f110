"""Roundoff noise: exact error statistics, noise gains, prediction against measurement."""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from scipy import signal

from hwfilter.fixed import ROUNDING_RULES, Format, round_shift
from hwfilter.formats import default_quantizer_formats, quantize_coefficients, set_quantizers
from hwfilter.noise import (
    busy_input,
    measure_noise,
    predict_noise,
    rounding_error_interval,
    rounding_error_stats,
    sqnr_db,
    trailing_zero_bits,
)
from hwfilter.realize import realize
from hwfilter.scaling import quantize_products, scaled_formats

FI = Format(16, 15)


def _enumerate(rule, k):
    """Errors Q(v) - v (in result LSBs) over a sign-balanced range of every pattern."""
    span = 1 << (k + 3)
    errs = [Fraction(round_shift(v, k, rule) * (1 << k) - v, 1 << k) for v in range(-span, span)]
    return errs


@pytest.mark.parametrize("rule", ROUNDING_RULES)
@pytest.mark.parametrize("k", [1, 2, 3, 5, 8])
def test_error_stats_match_enumeration(rule, k):
    # reference: exhaustive enumeration with hwfilter.fixed.round_shift over a range where
    # every dropped-bit pattern occurs equally often with either sign; shared/references.md
    # gives floor mean -(q/2)(1 - 2^-k), var (q^2/12)(1 - 2^-2k) and half-even var
    # (q^2/12)(1 + 2^(1-2k)) (O&S 6.7 [M], derived)
    errs = _enumerate(rule, k)
    n = len(errs)
    mean = sum(errs) / n
    var = sum((e - mean) ** 2 for e in errs) / n
    assert rounding_error_stats(rule, k) == (mean, var)
    assert rounding_error_interval(rule, k) == (min(errs), max(errs))
    if rule == "floor":
        assert mean == -Fraction(1, 2) * (1 - Fraction(1, 2**k))
        assert var == Fraction(1, 12) * (1 - Fraction(1, 4**k))
    if rule == "half-even":
        assert var == Fraction(1, 12) * (1 + Fraction(2, 4**k))
    # the k-independent interval contains every k's
    lo, hi = rounding_error_interval(rule)
    assert lo <= min(errs) and max(errs) <= hi


def test_no_bits_dropped_no_noise():
    for rule in ROUNDING_RULES:
        assert rounding_error_stats(rule, 0) == (0, 0)
        assert rounding_error_stats(rule, -3) == (0, 0)
    with pytest.raises(ValueError, match="rounding must be one of"):
        rounding_error_stats("nearest", 2)


def _quantized(form, rounding, *, products=False, state_bits=18, out=None):
    out = out or Format(24, 20)
    if form.startswith("fir"):
        g = realize("f", b=signal.firwin(15, 0.23), a=[1.0], form=form)
    else:
        b, a = signal.ellip(4, 0.7, 45, 0.27)
        g = realize("e", b=b, a=a, form=form)
    if products:
        g = quantize_products(g)
    g = quantize_coefficients(g, 18)
    if products:
        fm = scaled_formats(
            g, input_format=FI, output_format=out, state_bits=state_bits, scaling="l1"
        )
    else:
        fm = default_quantizer_formats(g, input_format=FI, output_format=out, state_bits=state_bits)
    return set_quantizers(g, fm, input_format=FI, rounding=rounding, overflow="saturate")


CASES = [
    ("direct-form-1", False),
    ("direct-form-2", False),
    ("transposed-direct-form-2", False),
    ("cascade", False),
    ("parallel", False),
    ("cascade", True),
    ("fir-direct", True),
    ("fir-transposed", True),
    ("fir-symmetric", True),
]


@pytest.mark.parametrize("rounding", ["floor", "half-even"])
@pytest.mark.parametrize("form,products", CASES)
def test_predicted_noise_matches_measurement(form, products, rounding):
    # shared/references.md: the white-noise model holds for busy inputs and non-simple
    # coefficients: ellip/firwin coefficients, 3277 LSB rms input, 1.2e5 samples, 10 %
    g = _quantized(form, rounding, products=products)
    pred = predict_noise(g)
    x = busy_input(g, 120_000, rms=0.1, seed=3)
    assert np.std(x) > 100
    meas = measure_noise(g, x)
    assert sum(meas.overflows.values()) == 0
    assert meas.power_lsb2 == pytest.approx(pred.power_lsb2, rel=0.10)
    # internal quantizers dominate (else this only tests the output rounding)
    internal = sum(s.power_lsb2 for s in pred.sources if s.name != "y_out")
    assert internal > 3 * next(s.power_lsb2 for s in pred.sources if s.name == "y_out")
    if rounding == "floor":
        # DC offset = sum mean_i * sum g_i; its sampling error is about sqrt(power / N)
        # times the noise's correlation length, far below 5 %
        assert meas.dc_lsb == pytest.approx(pred.dc_lsb, rel=0.05)


def test_first_order_noise_gain_in_prediction():
    # O&S [M] via shared/references.md: a state quantizer in the loop of 1/(1 - a z^-1)
    # has noise gain 1 / (1 - a^2) (times b0^2 after the numerator)
    g = realize("f1", b=[0.7311], a=[1.0, -0.8731], form="direct-form-2")
    g = quantize_coefficients(g, 16)
    fm = default_quantizer_formats(g, input_format=FI, output_format=FI, state_bits=20)
    g = set_quantizers(g, fm, input_format=FI, rounding="half-even", overflow="saturate")
    pred = predict_noise(g)
    src = {s.name: s for s in pred.sources}
    a1 = -g["a1"].value * 2.0 ** -g["a1"].coefficient_format.frac
    b0 = g["b0"].value * 2.0 ** -g["b0"].coefficient_format.frac
    assert src["w"].noise_gain == pytest.approx(b0**2 / (1 - a1**2), rel=1e-12)
    assert src["w"].dc_gain == pytest.approx(b0 / (1 - a1), rel=1e-12)
    assert src["y_out"].noise_gain == 1.0
    # w_sum = (x << 17) - a1 * w1 has 32 fraction bits, w keeps 17: 15 dropped, less the
    # zero LSBs of the quantized a1 word (x << 17 has 17 of them, w1 none)
    v = abs(g["a1"].value)
    tz = (v & -v).bit_length() - 1
    assert (g["w_sum"].format.frac, g["w"].format.frac) == (32, 17)
    assert src["w"].dropped_bits == 15 - min(tz, 17)


def test_trailing_zero_bits_reduce_dropped_bits():
    # a product by 0.5 (value 2^14 with 15 fraction bits) has 14 zero LSBs; quantizing
    # it to 15 fraction bits drops 15 bits of which only 1 can be nonzero
    g = realize("h", b=[0.5], a=[1.0], form="fir-direct")
    g = quantize_coefficients(g, 16)
    g = set_quantizers(g, {"y_out": FI}, input_format=FI, rounding="half-even", overflow="saturate")
    assert g["h0"].value == 1 << 14
    assert trailing_zero_bits(g)["h0"] == 14
    src = predict_noise(g).sources[0]
    assert src.dropped_bits == 1
    assert src.variance == pytest.approx(float(rounding_error_stats("half-even", 1)[1]))
    # measured: half of the inputs are odd, their halves round to even: variance 1/8
    meas = measure_noise(g, busy_input(g, 100_000, rms=0.2, seed=5))
    assert meas.power_lsb2 == pytest.approx(1 / 8, rel=0.05)


def test_full_scale_sine_sqnr():
    # common practice (shared/references.md): a full-scale sine quantized to B bits gives
    # 6.02 B + 1.76 dB; exactly 10 log10(1.5 * 2^(2B)) for a one-integer-bit format
    B = 12
    fi = Format(24, 23)
    g = realize("id", b=[1.0], a=[1.0], form="fir-direct")
    g = quantize_coefficients(g, 16)
    g = set_quantizers(
        g, {"y_out": Format(B, B - 1)}, input_format=fi, rounding="half-even", overflow="saturate"
    )
    pred = predict_noise(g)
    got = sqnr_db(g, pred, input_rms=1 / math.sqrt(2))["sine_db"]
    assert got == pytest.approx(10 * math.log10(1.5) + 20 * B * math.log10(2), abs=1e-4)
    assert got == pytest.approx(6.02 * B + 1.76, abs=0.05)


def test_toward_zero_is_flagged_signal_correlated():
    g = _quantized("direct-form-2", "toward-zero")
    srcs = predict_noise(g).sources
    assert all(s.signal_correlated for s in srcs if s.dropped_bits > 0)
    assert not any(
        s.signal_correlated for s in predict_noise(_quantized("cascade", "floor")).sources
    )


def test_prediction_needs_a_quantized_graph():
    g = realize("f1", b=[1.0], a=[1.0, -0.5], form="direct-form-2")
    with pytest.raises(ValueError, match="must be quantized before noise prediction"):
        predict_noise(g)
