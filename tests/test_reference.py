"""The bit-exact integer model against independent hand models and numpy."""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest
from scipy import signal

from hwfilter.fixed import Format, round_shift
from hwfilter.formats import infer_formats, quantize_coefficients, set_quantizers
from hwfilter.graph import Graph, Node
from hwfilter.realize import realize
from hwfilter.reference import simulate_float, simulate_integer


def quantized(g, coef_bits, fin, state, out, rounding="half-even", overflow="saturate"):
    g = quantize_coefficients(g, coef_bits)
    fmts = {n.name: (out if n.role == "output" else state) for n in g.of_kind("quantize")}
    return set_quantizers(g, fmts, input_format=fin, rounding=rounding, overflow=overflow)


def hand_df2_biquad(x, b, a, cfrac, wfmt, ofmt, xfrac, rounding):
    """Direct form II biquad written out with exact Fractions (independent of the graph).

    w[n] = Q_w(x[n] - a1 w[n-1] - a2 w[n-2]);  y[n] = Q_y(b0 w[n] + b1 w[n-1] + b2 w[n-2])
    Q rounds the exact rational value to the target's LSB and saturates.
    """

    def q(value: Fraction, fmt: Format) -> int:
        scaled = value * 2**fmt.frac  # exact rational in target LSBs
        num, den = scaled.numerator, scaled.denominator
        k = den.bit_length() - 1
        v = round_shift(num, k, rounding) if k else num
        return min(max(v, fmt.min_int), fmt.max_int)

    lsb_c = Fraction(1, 2**cfrac)
    w1 = w2 = Fraction(0)
    out = []
    for xi in x:
        xv = Fraction(int(xi), 2**xfrac)
        w = q(xv - a[1] * lsb_c * w1 - a[2] * lsb_c * w2, wfmt) * Fraction(1, 2**wfmt.frac)
        y = q((b[0] * w + b[1] * w1 + b[2] * w2) * lsb_c, ofmt)
        out.append(y)
        w1, w2 = w, w1
    return out


@pytest.mark.parametrize("rounding", ["floor", "half-even", "half-away"])
def test_biquad_matches_fraction_hand_model(rounding, rng):
    b, a = signal.butter(2, 0.3)
    g = realize("bq", b=b, a=a, form="direct-form-2")
    fin, wfmt, ofmt = Format(12, 11), Format(16, 13), Format(12, 11)
    g = quantized(g, 14, fin, wfmt, ofmt, rounding)
    # each coefficient group (b, a) has its own binary point; read them from the graph
    bfrac, afrac = g["b0"].coefficient_format.frac, g["a1"].coefficient_format.frac
    x = rng.integers(-2048, 2048, size=400)
    got = simulate_integer(g, x, engine="python").output.tolist()
    # the hand model needs one coefficient LSB: express b and a on the finer of the two
    cfrac = max(bfrac, afrac)
    bi = [g[f"b{k}"].value << (cfrac - bfrac) for k in range(3)]
    ai = [1 << cfrac] + [g[f"a{k}"].value << (cfrac - afrac) for k in (1, 2)]
    want = hand_df2_biquad(x, bi, ai, cfrac, wfmt, ofmt, fin.frac, rounding)
    assert got == want


@pytest.mark.parametrize("form", ["fir-direct", "fir-transposed", "fir-symmetric"])
def test_fir_integer_output_equals_exact_convolution(form, rng):
    h = signal.firwin(15, 0.25)
    g = realize("f", b=h, a=[1.0], form=form)
    fin = Format(16, 15)
    g = quantize_coefficients(g, 16)
    # output keeps every bit (no rounding): exactly the integer convolution
    hf = g["h0"].coefficient_format.frac
    wide = Format(16 + 16 + 4, fin.frac + hf)
    g = set_quantizers(g, {"y_out": wide}, input_format=fin, rounding="floor", overflow="wrap")
    taps = [
        g[f"h{min(k, 14 - k)}"].value if form == "fir-symmetric" else g[f"h{k}"].value
        for k in range(15)
    ]
    x = rng.integers(-32768, 32768, size=600)
    # np.convolve on Python ints (dtype=object) is exact: the outside reference
    want = np.convolve(np.array(x, dtype=object), np.array(taps, dtype=object))[: len(x)]
    got = simulate_integer(g, x, engine="python").output
    assert list(got) == list(want)
    assert list(simulate_integer(g, x, engine="numba").output) == list(want)


def test_forty_bit_product_chain_stays_exact():
    # 40-bit input times three 40-bit coefficients in a row: words of 160 bits, beyond
    # int64; the model falls back to Python ints. Hand model: exact Python-int products.
    fin = Format(40, 39)
    c = [0.7071067811865476, -0.5772156649015329, 0.36787944117144233]
    nodes = [Node("x", "input")]
    src = "x"
    for i, v in enumerate(c):
        nodes.append(Node(f"g{i}", "gain", (src,), coefficient=v, group=f"g{i}"))
        src = f"g{i}"
    nodes += [Node("y_out", "quantize", (src,), role="output"), Node("out", "output", ("y_out",))]
    g = quantize_coefficients(Graph("chain", tuple(nodes)).check(), 40)
    total_frac = fin.frac + sum(g[f"g{i}"].coefficient_format.frac for i in range(3))
    g = set_quantizers(
        g, {"y_out": Format(160, total_frac)}, input_format=fin, rounding="floor", overflow="wrap"
    )
    x = [-(2**39), 2**39 - 1, 123456789012, -987654321]
    prod = [v * g["g0"].value * g["g1"].value * g["g2"].value for v in x]
    assert max(abs(p) for p in prod).bit_length() > 63
    res = simulate_integer(g, x)
    assert [int(v) for v in res.output] == prod
    with pytest.raises(ValueError, match="over 62 bits"):
        simulate_integer(g, x, engine="numba")


def test_numba_and_python_engines_agree_with_overflow_counts(rng):
    b, a = signal.ellip(4, 1, 40, 0.3)
    for overflow in ("wrap", "saturate"):
        g = quantized(
            realize("c", b=b, a=a, form="cascade"),
            14,
            Format(12, 11),
            Format(14, 12),
            Format(12, 11),
            "half-up",
            overflow,
        )
        x = rng.integers(-2048, 2048, size=(3, 3000))
        r1 = simulate_integer(g, x, engine="python")
        r2 = simulate_integer(g, x, engine="numba")
        assert np.array_equal(r1.output, r2.output)
        assert r1.overflows == r2.overflows
        assert r1.total_overflows > 0  # loud input in a narrow state word does overflow


def test_saturation_counts_match_an_independent_count():
    # one gain of 1.5 into a 8-bit word with no headroom: count by hand with numpy
    nodes = (
        Node("x", "input"),
        Node("g", "gain", ("x",), coefficient=1.5, group="g"),
        Node("y_out", "quantize", ("g",), role="output"),
        Node("out", "output", ("y_out",)),
    )
    g = quantize_coefficients(Graph("s", nodes).check(), 8)
    g = set_quantizers(
        g, {"y_out": Format(8, 7)}, input_format=Format(8, 7), rounding="floor", overflow="saturate"
    )
    x = np.arange(-128, 128)
    res = simulate_integer(g, x, engine="python")
    exact = np.floor(x * 1.5).astype(int)
    assert res.output.tolist() == np.clip(exact, -128, 127).tolist()
    assert res.overflows["y_out"] == int(np.sum((exact < -128) | (exact > 127)))


def test_full_precision_formats_are_exact_ranges():
    # word growth (shared/references.md): a sum of N signed W-bit words needs
    # W + ceil(log2 N) bits; four taps of -32768 on a 16-bit input need 34 bits
    nodes = [
        Node("x", "input"),
        Node("x1", "delay", ("x",)),
        Node("x2", "delay", ("x1",)),
        Node("x3", "delay", ("x2",)),
    ]
    taps = ["x", "x1", "x2", "x3"]
    for i, t in enumerate(taps):
        nodes.append(Node(f"h{i}", "gain", (t,), coefficient=-1.0, group="h"))
    nodes += [
        Node("acc", "add", tuple(f"h{i}" for i in range(4)), (1, 1, 1, 1)),
        Node("y_out", "quantize", ("acc",), role="output"),
        Node("out", "output", ("y_out",)),
    ]
    g = quantize_coefficients(Graph("w", tuple(nodes)).check(), 16)
    assert g["h0"].value == -32768  # -1.0 exactly, Format(16, 15)
    g = set_quantizers(
        g, {"y_out": Format(34, 30)}, input_format=Format(16, 15), rounding="floor", overflow="wrap"
    )
    assert g["h0"].format.bits == 32  # (-1) x (-1) corner needs all 32 bits
    assert g["acc"].format.bits == 34
    res = simulate_integer(g, [-32768] * 6, engine="python")
    assert int(res.output[-1]) == 4 * 2**30 and res.total_overflows == 0


def test_narrowed_sum_wraps_to_its_word():
    # two's complement sums may wrap in the middle when the final result fits (common
    # practice): a + b - c with a narrowed 17-bit accumulator still gives the exact answer
    nodes = (
        Node("x", "input"),
        Node("x1", "delay", ("x",)),
        Node("acc", "add", ("x", "x1", "x"), (1, 1, -1)),
        Node("y_out", "quantize", ("acc",), role="output"),
        Node("out", "output", ("y_out",)),
    )
    g = Graph("n", nodes).check()
    g = set_quantizers(
        g, {"y_out": Format(16, 15)}, input_format=Format(16, 15), rounding="floor", overflow="wrap"
    )
    assert g["acc"].format.bits == 18
    narrowed = infer_formats(g.replace_nodes([g["acc"].replace(format=Format(16, 15))]))
    x = [30000, 30000, -30000, 5]
    r = simulate_integer(narrowed, x, engine="python")
    assert r.output.tolist() == [0, 30000, 30000, -30000]


def test_float_model_with_quantized_coefficients_matches_lfilter(rng):
    b, a = signal.butter(3, 0.2)
    g = quantize_coefficients(realize("q", b=b, a=a, form="direct-form-1"), 12)
    bq = [g[f"b{k}"].quantized_coefficient for k in range(4)]
    aq = [1.0] + [g[f"a{k}"].quantized_coefficient for k in range(1, 4)]
    x = rng.standard_normal(500)
    np.testing.assert_allclose(
        simulate_float(g, x, coefficients="quantized"), signal.lfilter(bq, aq, x), atol=1e-10
    )
