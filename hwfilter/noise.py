"""Roundoff noise: prediction from the linear model, and measurement against it.

Every quantize node that drops ``k > 0`` fraction bits adds an error ``e`` to its value.
For a busy signal the dropped bits are taken as uniformly distributed over their ``2^k``
patterns, which gives the error's exact mean and variance for each rounding rule
(:func:`rounding_error_stats`). The error then reaches the output through the impulse
response ``g`` from the quantize node's output (the injection point of
:mod:`hwfilter.linear`): it adds ``var * sum g^2`` to the output noise power and
``mean * sum g`` to its DC offset (Jackson 1970; Oppenheim & Schafer, Discrete-Time Signal
Processing, 3rd ed., sections 6.7-6.9 [M]).

Bits that are provably zero do not count as dropped: a product by an even coefficient, or
a sum whose inputs are all shifted left, has trailing zero bits (:func:`trailing_zero_bits`),
so the effective ``k`` is smaller and so is the noise.

:func:`measure_noise` runs the bit-exact model (:func:`hwfilter.reference.simulate_integer`)
and the float model with the same quantized coefficients on the same input; the
difference is the roundoff noise actually produced.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np

from .graph import Graph
from .linear import LinearModel, dc_gains, l2_norm, linear_model, noise_gains
from .reference import simulate_float, simulate_integer

__all__ = [
    "rounding_error_stats",
    "rounding_error_interval",
    "trailing_zero_bits",
    "NoiseSource",
    "NoisePrediction",
    "predict_noise",
    "sqnr_db",
    "busy_input",
    "MeasuredNoise",
    "measure_noise",
]


def rounding_error_stats(rounding: str, dropped_bits: int) -> tuple[Fraction, Fraction]:
    """Exact mean and variance of ``Q(v) - v`` in units of the result's LSB.

    The ``k = dropped_bits`` dropped bits are uniform over their ``2^k`` patterns; for
    the sign-symmetric rules (``toward-zero``, ``half-away``) positive and negative
    values are equally likely. ``k <= 0`` drops nothing: no error.

    ===========  ========================  ===========================================
    rule         mean                      variance
    ===========  ========================  ===========================================
    floor        -(1 - 2^-k) / 2           (1 - 2^-2k) / 12
    half-up      2^-(k+1)                  (1 - 2^-2k) / 12
    half-even    0                         (1 + 2^(1-2k)) / 12
    half-away    0                         (1 + 2^(1-2k)) / 12
    toward-zero  0                         (1 - 2^-k) (2 - 2^-k) / 6
    ===========  ========================  ===========================================

    Notes
    -----
    With ``M = 2^k`` the error takes the values ``j/M``: floor ``j = -(M-1)..0``;
    half-up ``j = -(M/2-1)..M/2`` (M consecutive values, so the same variance as floor);
    half-even ``j = -(M/2-1)..(M/2-1)`` plus the tie ``+-1/2`` (each with probability
    ``1/(2M)``); half-away the same set (the tie's sign follows the value's);
    toward-zero ``j = -(M-1)..0`` for positive and ``0..M-1`` for negative values. For the
    last two the error's sign follows the signal's, so it is less white than the others.
    """
    if dropped_bits <= 0:
        return Fraction(0), Fraction(0)
    k = dropped_bits
    u = Fraction(1, 2**k)
    if rounding == "floor":
        return -(1 - u) / 2, (1 - u * u) / 12
    if rounding == "half-up":
        return u / 2, (1 - u * u) / 12
    if rounding in ("half-even", "half-away"):
        return Fraction(0), (1 + 2 * u * u) / 12
    if rounding == "toward-zero":
        return Fraction(0), (1 - u) * (2 - u) / 6
    raise ValueError(
        "rounding must be one of floor, half-up, half-even, toward-zero, half-away, "
        f"not {rounding!r}"
    )


def rounding_error_interval(rounding: str | None, dropped_bits: int | None = None):
    """``(emin, emax)`` of ``Q(v) - v`` in result LSBs (Fractions), for worst-case bounds.

    With ``dropped_bits = k`` the interval is exact; without it (``None``) it holds for any
    ``k``. ``rounding=None`` means any rule: ``(-1, 1)``.
    """
    if dropped_bits is not None and dropped_bits <= 0:
        return Fraction(0), Fraction(0)
    u = Fraction(0) if dropped_bits is None else Fraction(1, 2**dropped_bits)
    half = Fraction(1, 2)
    if rounding is None:
        return Fraction(-1), Fraction(1)
    if rounding == "floor":
        return -(1 - u), Fraction(0)
    if rounding == "half-up":
        return -(half - u), half
    if rounding in ("half-even", "half-away"):
        return -half, half
    if rounding == "toward-zero":
        return -(1 - u), 1 - u
    raise ValueError(
        "rounding must be one of floor, half-up, half-even, toward-zero, half-away, "
        f"not {rounding!r}"
    )


def _tz(v: int) -> float:
    v = abs(int(v))
    return math.inf if v == 0 else (v & -v).bit_length() - 1


def trailing_zero_bits(graph: Graph) -> dict[str, float]:
    """Trailing bits of each node's integer word that are zero for every input.

    ``inf`` for a node that is identically zero. Needs a graph with formats. Loops are
    solved by iterating from "all zero" downwards to the fixed point.
    """
    order = graph.topological_order()
    tz: dict[str, float] = {n.name: math.inf for n in graph.nodes}
    changed = True
    while changed:
        changed = False
        for n in order:
            if n.kind == "input":
                t = 0
            elif n.kind in ("delay", "output"):
                t = tz[n.inputs[0]]
            elif n.kind == "gain":
                t = tz[n.inputs[0]] + _tz(n.value)
            elif n.kind == "add":
                t = min(tz[s] + (n.format.frac - graph[s].format.frac) for s in n.inputs)
            elif n.kind == "quantize":
                k = graph[n.inputs[0]].format.frac - n.format.frac
                t = tz[n.inputs[0]] - k
                t = 0 if t < 0 else t
            else:  # pragma: no cover - Graph.check rejects unknown kinds
                raise ValueError(f"noise analysis does not know node kind {n.kind!r}")
            if t < tz[n.name]:
                tz[n.name] = t
                changed = True
    return tz


@dataclass
class NoiseSource:
    """One quantize node's error and its contribution at the output.

    ``mean``/``variance`` are in the node's own LSB (and LSB^2); ``noise_gain`` is
    ``sum g^2`` and ``dc_gain`` is ``sum g`` from the node to the output; ``power_lsb2``
    and ``dc_lsb`` are the contributions in output LSB^2 and output LSB.
    ``signal_correlated`` marks rules whose error follows the sign of the signal
    (``toward-zero``, and slightly ``half-away``): the white-error model then misjudges
    the spectrum, and the prediction can be off by a factor of several (measure instead).
    """

    name: str
    rounding: str
    dropped_bits: int
    mean: float
    variance: float
    noise_gain: float
    dc_gain: float
    power_lsb2: float
    dc_lsb: float

    @property
    def signal_correlated(self) -> bool:
        return self.dropped_bits > 0 and self.rounding in ("toward-zero", "half-away")

    def as_dict(self) -> dict:
        return {**self.__dict__, "signal_correlated": self.signal_correlated}


def _db(p: float) -> float:
    return 10.0 * math.log10(p) if p > 0 else -math.inf


@dataclass
class NoisePrediction:
    """Predicted output roundoff noise, per quantize node and in total.

    ``power_lsb2`` is the noise variance at the output in output LSB^2 (the output
    format's LSB); ``dc_lsb`` the DC offset in output LSB; ``mean_square_lsb2`` both
    together. ``power_db`` is ``10 log10(power_lsb2)``: the noise relative to one output
    LSB^2 (a single rounding of the output alone gives 1/12, -10.79 dB).
    """

    sources: list[NoiseSource]
    power_lsb2: float
    dc_lsb: float
    output_lsb: float
    extra: dict = field(default_factory=dict)

    @property
    def mean_square_lsb2(self) -> float:
        return self.power_lsb2 + self.dc_lsb**2

    @property
    def power_db(self) -> float:
        return _db(self.power_lsb2)

    def as_dict(self) -> dict:
        return {
            "predicted_power_lsb2": self.power_lsb2,
            "predicted_db": self.power_db,
            "predicted_dc_lsb": self.dc_lsb,
            "predicted_mean_square_lsb2": self.mean_square_lsb2,
            "output_lsb": self.output_lsb,
            "sources": [s.as_dict() for s in self.sources],
            **self.extra,
        }


def predict_noise(graph: Graph, model: LinearModel | None = None) -> NoisePrediction:
    """Predict the output noise of a quantized graph (formats on every node).

    Parameters
    ----------
    graph : Graph
        Quantized graph (after :func:`hwfilter.formats.set_quantizers`).
    model : LinearModel, optional
        Its linear model with quantized coefficients (computed when not given).
    """
    if not graph.is_quantized:
        raise ValueError(f"graph {graph.name!r} must be quantized before noise prediction")
    model = model or linear_model(graph, coefficients="quantized")
    tz = trailing_zero_bits(graph)
    out_fmt = graph.output.format
    q_out = 2.0**-out_fmt.frac
    names = [q.name for q in graph.of_kind("quantize")]
    gains = noise_gains(model, names)
    dcs = dc_gains(model, names)
    sources = []
    for name in names:
        q = graph[name]
        src = graph[q.inputs[0]]
        k = src.format.frac - q.format.frac
        t = tz[src.name]
        k_eff = 0 if t == math.inf else max(0, int(k - t))
        mean, var = rounding_error_stats(q.rounding, k_eff)
        scale = 2.0 ** (out_fmt.frac - q.format.frac)  # node LSB in output LSBs
        power = float(var) * scale**2 * gains[name]
        dc = float(mean) * scale * dcs[name]
        sources.append(
            NoiseSource(
                name, q.rounding, k_eff, float(mean), float(var), gains[name], dcs[name], power, dc
            )
        )
    total = sum(s.power_lsb2 for s in sources)
    dc = sum(s.dc_lsb for s in sources)
    return NoisePrediction(sources, total, dc, q_out)


def sqnr_db(graph: Graph, prediction: NoisePrediction, input_rms: float, *, model=None) -> dict:
    """Predicted signal-to-quantization-noise ratios for an input of rms ``input_rms``.

    ``input_rms`` is in the input's real units (1.0 = the value ``1.0``; full scale of a
    format with one integer bit). Two figures: a white input (output signal power
    ``input_rms^2 * ||H||_2^2``) and a sine at the frequency of largest gain (power
    ``input_rms^2 * ||H||_inf^2``). Noise is the predicted output variance.
    """
    from .linear import linf_norm

    model = model or linear_model(graph, coefficients="quantized")
    l2 = l2_norm(model, model.sources[0], model.output)
    li, _ = linf_norm(model, model.sources[0], model.output)
    noise = prediction.power_lsb2 * prediction.output_lsb**2
    if noise <= 0:
        return {"input_rms": input_rms, "white_db": math.inf, "sine_db": math.inf}
    return {
        "input_rms": input_rms,
        "white_db": _db(input_rms**2 * l2**2 / noise),
        "sine_db": _db(input_rms**2 * li**2 / noise),
    }


def busy_input(graph: Graph, samples: int, *, rms: float = 0.125, seed: int = 0) -> np.ndarray:
    """Input words of white Gaussian noise with ``rms`` in real units, clipped to the format."""
    fmt = graph.input.format
    rng = np.random.default_rng(seed)
    x = rng.standard_normal(samples) * rms * 2.0**fmt.frac
    return np.clip(np.round(x), fmt.min_int, fmt.max_int).astype(np.int64)


@dataclass
class MeasuredNoise:
    """Measured roundoff noise at the output: variance and mean in output LSB units."""

    power_lsb2: float
    dc_lsb: float
    samples: int
    input_rms_lsb: float
    overflows: dict

    @property
    def power_db(self) -> float:
        return _db(self.power_lsb2)

    def as_dict(self) -> dict:
        return {
            "measured_power_lsb2": self.power_lsb2,
            "measured_db": self.power_db,
            "measured_dc_lsb": self.dc_lsb,
            "measured_samples": self.samples,
            "measured_input_rms_lsb": self.input_rms_lsb,
            "measured_overflows": sum(self.overflows.values()),
        }


def measure_noise(graph: Graph, x_words, *, settle: int | None = None) -> MeasuredNoise:
    """Run the bit-exact and the float (quantized coefficients) models on ``x_words``.

    The error ``y_integer - y_float`` in output LSBs, after ``settle`` samples (default
    a tenth of the run, at most 2000), gives the measured noise variance and DC offset.
    """
    x_words = np.asarray(x_words, dtype=np.int64)
    res = simulate_integer(graph, x_words)
    fin = graph.input.format
    xf = x_words.astype(np.float64) * 2.0**-fin.frac
    yf = simulate_float(graph, xf, coefficients="quantized")
    q_out = 2.0**-graph.output.format.frac
    err = np.asarray(res.output, dtype=np.float64) - yf / q_out
    settle = min(len(err) // 10, 2000) if settle is None else settle
    err = err[settle:]
    return MeasuredNoise(
        float(np.var(err)),
        float(np.mean(err)),
        len(err),
        float(np.std(x_words)),
        dict(res.overflows),
    )
