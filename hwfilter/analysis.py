"""The numbers for reports: one call gathers every analysis of a quantized graph.

:func:`analyze` runs, on a quantized graph and its float design:

- the exact stability verdict and pole movement (:mod:`hwfilter.stability`);
- l1, L2 and L-infinity norms from the input to every node (:mod:`hwfilter.linear`);
- the overflow proof on the actual formats (:func:`hwfilter.scaling.overflow_nodes`);
- roundoff noise predicted per quantizer and measured against the float model
  (:mod:`hwfilter.noise`), with SQNR;
- zero-input limit cycles and overflow oscillations per section
  (:mod:`hwfilter.limitcycles`);
- the quantized-coefficient response against the design (:func:`response_deviation`),
  and whether a response spec is still met.

The result is a plain dict (JSON-ready apart from non-finite floats) shared by the
``analyze`` command, the report and the build.
"""

from __future__ import annotations

import math

import numpy as np

from .graph import Graph
from .limitcycles import limit_cycles, overflow_oscillations
from .linear import frequency_response, l1_parts, l2_norm, linear_model, linf_norm
from .noise import busy_input, measure_noise, predict_noise, sqnr_db
from .scaling import overflow_nodes
from .stability import stability

__all__ = ["response_deviation", "node_norms", "analyze"]

_FLOOR_DB = -400.0


def _db(h: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore"):
        return np.maximum(20.0 * np.log10(np.abs(h)), _FLOOR_DB)


def _band_grid(bands, fs: float, points: int) -> list[np.ndarray]:
    grids = []
    for lo, hi in bands:
        lo, hi = float(lo), float(hi)
        if not (0.0 <= lo <= hi <= fs / 2):
            raise ValueError(
                f"band edges must satisfy 0 <= low <= high <= sample_rate / 2, not {(lo, hi)!r}"
            )
        grids.append(np.linspace(lo, hi, points) * (2 * np.pi / fs))
    return grids


def response_deviation(
    graph: Graph,
    float_graph: Graph | None = None,
    *,
    passband=(),
    stopband=(),
    passband_ripple_db: float | None = None,
    stopband_attenuation_db: float | None = None,
    sample_rate: float | None = None,
    points: int = 2048,
) -> dict:
    """Quantized-coefficient response against the design, and the spec verdict.

    Parameters
    ----------
    graph : Graph
        The graph with quantized coefficients.
    float_graph : Graph, optional
        The design (default: ``graph`` with its design coefficient values).
    passband, stopband : sequence of (f_lo, f_hi)
        Bands in Hz (``sample_rate`` must be given with them).
    passband_ripple_db : float, optional
        Largest peak-to-peak variation of the gain over all passbands, dB.
    stopband_attenuation_db : float, optional
        Least attenuation of every stopband below the passband peak (below 0 dB when no
        passband is given), dB.
    points : int
        Frequencies per band (and on the whole band ``[0, fs/2]``).

    Returns
    -------
    dict
        ``max_deviation`` (largest ``|Hq - Hd|`` over ``[0, pi]``, linear) and
        ``max_deviation_db`` (the same relative to the design's peak gain);
        ``passband_deviation_db`` (largest ``|dB_q - dB_d|`` over the passbands);
        ``stopband_deviation_db`` (change of the stopband peak level, dB: positive means
        less attenuation); ripple and attenuation of design and quantized response;
        ``design_meets_spec``, ``quantized_meets_spec`` (None without a spec) and
        ``spec_met`` (the quantized verdict).
    """
    mq = linear_model(graph, coefficients="quantized")
    md = linear_model(float_graph or graph, coefficients="design")
    x = mq.sources[0]
    w = np.linspace(0.0, np.pi, points)
    hq = frequency_response(mq, x, mq.output, w)
    hd = frequency_response(md, md.sources[0], md.output, w)
    peak_d = float(np.max(np.abs(hd)))
    dev = float(np.max(np.abs(hq - hd)))
    out = {
        "max_deviation": dev,
        "max_deviation_db": float(_db(np.array([dev / peak_d]))[0]) if peak_d > 0 else None,
        "passband_deviation_db": None,
        "stopband_deviation_db": None,
        "design_ripple_db": None,
        "quantized_ripple_db": None,
        "design_attenuation_db": None,
        "quantized_attenuation_db": None,
        "design_meets_spec": None,
        "quantized_meets_spec": None,
        "spec_met": None,
    }
    if not passband and not stopband:
        return out
    if not sample_rate or sample_rate <= 0:
        raise ValueError(f"sample_rate must be a positive number of Hz, not {sample_rate!r}")
    pass_w = _band_grid(passband, sample_rate, points)
    stop_w = _band_grid(stopband, sample_rate, points)

    def resp(model, ws):
        if not ws:
            return np.zeros(0), np.zeros(0)
        ww = np.concatenate(ws)
        return ww, _db(frequency_response(model, model.sources[0], model.output, ww))

    _, pq = resp(mq, pass_w)
    _, pd = resp(md, pass_w)
    _, sq = resp(mq, stop_w)
    _, sd = resp(md, stop_w)
    verdict = {}
    for tag, p, s in (("design", pd, sd), ("quantized", pq, sq)):
        ripple = float(np.max(p) - np.min(p)) if len(p) else None
        ref = float(np.max(p)) if len(p) else 0.0
        atten = float(ref - np.max(s)) if len(s) else None
        out[f"{tag}_ripple_db"] = ripple
        out[f"{tag}_attenuation_db"] = atten
        checks = []
        if passband_ripple_db is not None and ripple is not None:
            checks.append(ripple <= passband_ripple_db + 1e-9)
        if stopband_attenuation_db is not None and atten is not None:
            checks.append(atten >= stopband_attenuation_db - 1e-9)
        verdict[tag] = all(checks) if checks else None
    if len(pq):
        out["passband_deviation_db"] = float(np.max(np.abs(pq - pd)))
    if len(sq):
        out["stopband_deviation_db"] = float(np.max(sq) - np.max(sd))
    out["design_meets_spec"] = verdict["design"]
    out["quantized_meets_spec"] = verdict["quantized"]
    out["spec_met"] = verdict["quantized"]
    return out


def node_norms(graph: Graph, model=None) -> dict[str, dict]:
    """l1 (upper bound), L2 and L-infinity of the response from the input to every node."""
    model = model or linear_model(graph, coefficients="quantized")
    x = model.sources[0]
    names = [n.name for n in graph.nodes if n.kind != "input"]
    l1 = l1_parts(model, x, names).l1
    l2 = l2_norm(model, x, names)
    li, _ = linf_norm(model, x, names, points=2048)
    out = {graph.input.name: {"l1": 1.0, "l2": 1.0, "linf": 1.0}}
    for i, name in enumerate(names):
        out[name] = {"l1": float(l1[i]), "l2": float(l2[i]), "linf": float(li[i])}
    return out


def _measure(graph: Graph, samples: int, rms: float, seed: int):
    """Measured noise on a busy input; the level halves until nothing overflows."""
    for _ in range(8):
        x = busy_input(graph, samples, rms=rms, seed=seed)
        m = measure_noise(graph, x)
        if sum(m.overflows.values()) == 0:
            return m, rms
        rms /= 2
    return m, rms


def analyze(
    graph: Graph,
    float_graph: Graph | None = None,
    *,
    passband=(),
    stopband=(),
    passband_ripple_db: float | None = None,
    stopband_attenuation_db: float | None = None,
    sample_rate: float | None = None,
    scaling: str | None = None,
    overridden=(),
    measure: bool = True,
    measure_samples: int = 1 << 17,
    input_rms: float | None = None,
    seed: int = 0,
    limit_cycle_points: int = 1 << 20,
) -> dict:
    """Every analysis of a quantized graph, as one dict (see the module docstring).

    Parameters
    ----------
    graph : Graph
        The quantized graph (formats on every node).
    float_graph : Graph, optional
        The float design of the same realization (for design poles and response).
    passband, stopband, passband_ripple_db, stopband_attenuation_db, sample_rate
        The response spec, see :func:`response_deviation`.
    scaling : str, optional
        The scaling rule that chose the formats (the node table then shows its norm).
    overridden : iterable of str
        Nodes whose format was set by hand (marked in the node table).
    measure : bool
        Also simulate the bit-exact and float models on a busy input and report the
        measured noise (skipped for an unstable structure).
    measure_samples, input_rms, seed
        Length, rms (real units; default a quarter of the input's full scale) and seed
        of that input; the rms also sets the predicted SQNR.
    limit_cycle_points : int
        Largest state set searched exhaustively per section.

    Returns
    -------
    dict
        Keys ``stable``, ``max_pole_radius``, ``stability``, ``nodes`` (one row per node:
        name, kind, bits, frac, int_bits, role, section, l1, l2, linf, norm,
        overridden, and for quantize nodes bits_dropped, noise_gain, noise_power_lsb2,
        noise_dc_lsb), ``overflow_possible``, ``overflow_nodes``, ``noise``
        (predicted_power_lsb2, predicted_db, predicted_dc_lsb, sources, and the
        measured_* figures), ``sqnr``, ``limit_cycle_lsb``, ``limit_cycles``,
        ``overflow_oscillation``, ``overflow_oscillations``, ``response``.
    """
    if not graph.is_quantized:
        raise ValueError(f"graph {graph.name!r} must be quantized before analysis")
    model = linear_model(graph, coefficients="quantized")
    st = stability(graph, float_graph)
    norms = node_norms(graph, model)
    bad = overflow_nodes(graph) if st.stable else [q.name for q in graph.of_kind("quantize")]
    pred = predict_noise(graph, model)
    fin = graph.input.format
    full_scale = float(abs(fin.min_value))
    rms = input_rms if input_rms is not None else 0.25 * full_scale
    noise = pred.as_dict()
    sq = sqnr_db(graph, pred, rms, model=model)
    sqnr = {
        "input": f"white noise, rms {rms:.6g}",
        "input_rms": rms,
        "predicted_db": sq["white_db"],
        "measured_db": None,
        "full_scale_sine_db": sqnr_db(graph, pred, full_scale / math.sqrt(2), model=model)[
            "sine_db"
        ],
    }
    if measure and st.stable:
        m, used = _measure(graph, measure_samples, rms, seed)
        noise.update(m.as_dict())
        noise["measured_input_rms"] = used
        x = busy_input(graph, measure_samples, rms=used, seed=seed)
        from .reference import simulate_float

        yf = simulate_float(graph, x * 2.0**-fin.frac, coefficients="quantized")
        sig = float(np.var(yf[min(len(yf) // 10, 2000) :])) / pred.output_lsb**2
        if used != rms:
            sqnr["input"] = f"white noise, rms {used:.6g}"
            sqnr["input_rms"] = used
            sqnr["predicted_db"] = sqnr_db(graph, pred, used, model=model)["white_db"]
        sqnr["measured_db"] = 10 * math.log10(sig / m.power_lsb2) if m.power_lsb2 > 0 else None
    by_src = {s.name: s for s in pred.sources}
    rows = []
    over = set(overridden)
    for n in graph.nodes:
        nn = norms[n.name]
        row = {
            "name": n.name,
            "kind": n.kind,
            "bits": n.format.bits,
            "frac": n.format.frac,
            "int_bits": n.format.int_bits,
            "role": n.role,
            "section": n.section,
            "l1": nn["l1"],
            "l2": nn["l2"],
            "linf": nn["linf"],
            "norm": nn.get(scaling, nn["l1"]) if scaling in ("l1", "l2", "linf") else nn["l1"],
            "overridden": n.name in over,
        }
        if n.kind == "quantize":
            s = by_src[n.name]
            row.update(
                rounding=n.rounding,
                overflow=n.overflow,
                bits_dropped=s.dropped_bits,
                noise_gain=s.noise_gain,
                noise_power_lsb2=s.power_lsb2,
                noise_dc_lsb=s.dc_lsb,
                overflow_possible=n.name in bad,
            )
        rows.append(row)
    cycles = limit_cycles(graph, max_points=limit_cycle_points, seed=seed)
    osc = overflow_oscillations(graph, seed=seed)
    resp = response_deviation(
        graph,
        float_graph,
        passband=passband,
        stopband=stopband,
        passband_ripple_db=passband_ripple_db,
        stopband_attenuation_db=stopband_attenuation_db,
        sample_rate=sample_rate,
    )
    return {
        "name": graph.name,
        "realization": graph.form + (f" of {graph.section_form}" if graph.section_form else ""),
        "stable": bool(st.stable),
        "max_pole_radius": float(st.max_pole_radius),
        "stability": st.as_dict(),
        "scaling": scaling,
        "nodes": rows,
        "overflow_possible": bool(bad),
        "overflow_nodes": bad,
        "noise": noise,
        "sqnr": sqnr,
        "limit_cycle_lsb": max((c.amplitude_lsb for c in cycles), default=0),
        "limit_cycles": [c.as_dict() for c in cycles],
        "overflow_oscillation": any(o.found for o in osc),
        "overflow_oscillations": [o.as_dict() for o in osc],
        "response": resp,
    }
