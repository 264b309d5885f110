"""Filter files (TOML) and the same model from Python.

A filter file::

    name = "vibration_bandpass"      # Verilog module name: a plain identifier
    sample_rate = 8000.0             # Hz; needed when frequencies are given in Hz
    device = "ecp5-25k"              # optional default device profile for estimates

    [filter]                         # exactly one way to give the filter:
    b = [...]                        #   b and a, powers of z^-1 (scipy lfilter)
    a = [...]
    # sections = [[b0, b1, b2, 1, a1, a2], ...]      scipy sos rows
    # zeros = [[re, im], ...]  poles = [...]  gain = 1.0
    # taps = [...]                                     FIR
    # design = { method = "elliptic", band = "bandpass", order = 4,
    #            edges = [300.0, 900.0], ripple = 0.5, attenuation = 60.0 }

    [realization]
    form = "cascade"                 # see FORMS
    section = "direct-form-2"        # for cascade and parallel
    pairing = "nearest"              # cascade pole-zero pairing: nearest, keep-odd
    order = "nearest-last"           # cascade section order
    gain = "first"                   # cascade gain spread: first, even, normalized

    [fixed]
    input = { bits = 16, frac = 15 }
    output = { bits = 16, frac = 15 }
    coefficient_bits = 18
    state_bits = 24
    rounding = "half-up"
    overflow = "saturate"
    scaling = "l1"
    round_products = false           # round every product to a state word
    section_gains = false            # power-of-two rescaling of cascade sections

    [fixed.nodes]                    # per-node overrides, by node name
    "s1.w" = { bits = 20, frac = 17 }

    [spec]                           # response the quantized filter must still meet
    passband = [[300.0, 900.0]]      # Hz
    stopband = [[0.0, 150.0], [1800.0, 4000.0]]
    passband_ripple = 1.0            # dB, peak to peak
    stopband_attenuation = 55.0      # dB below the passband peak

    [hardware]
    pipelining = "none"              # none, registered-products, registered-all-products

Every value is checked at load; an error names the file, the field and the problem.
"""

from __future__ import annotations

import difflib
import keyword
import math
import re
import tomllib
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy import signal

from .errors import FilterFileError, QuantizationWarning
from .fixed import OVERFLOW_RULES, ROUNDING_RULES, Format
from .graph import VERILOG_KEYWORDS
from .realize import FIR_FORMS, FORMS, GAIN_SPREADS, ORDERS, PAIRINGS, SECTION_FORMS

__all__ = [
    "FilterSpec",
    "FixedSpec",
    "NodeOverride",
    "RealizationSpec",
    "ResponseSpec",
    "HardwareSpec",
    "load",
    "loads",
    "from_dict",
    "make",
    "DESIGN_METHODS",
    "BANDS",
    "SCALINGS",
    "PIPELININGS",
]

IIR_METHODS = ("butterworth", "chebyshev-1", "chebyshev-2", "elliptic", "bessel")
FIR_METHODS = ("window", "equiripple")
DESIGN_METHODS = IIR_METHODS + FIR_METHODS
BANDS = ("lowpass", "highpass", "bandpass", "bandstop")
SCALINGS = ("l1", "l2", "linf", "none")
PIPELININGS = ("none", "registered-products", "registered-all-products")


@dataclass(frozen=True)
class NodeOverride:
    """A per-node choice from ``[fixed.nodes]`` that wins over the format pass."""

    format: Format | None = None
    rounding: str | None = None
    overflow: str | None = None


@dataclass(frozen=True)
class FixedSpec:
    input: Format = Format(16, 15)
    output: Format = Format(16, 15)
    coefficient_bits: int = 18
    state_bits: int = 24
    rounding: str = "half-up"
    overflow: str = "saturate"
    scaling: str = "l1"
    round_products: bool = False
    section_gains: bool = False
    nodes: dict = field(default_factory=dict)


@dataclass(frozen=True)
class RealizationSpec:
    form: str = "cascade"
    section: str = "direct-form-2"
    pairing: str = "nearest"
    order: str = "nearest-last"
    gain: str = "first"


@dataclass(frozen=True)
class ResponseSpec:
    """Bands in Hz; ripple peak to peak and attenuation below the passband peak, in dB."""

    passband: tuple = ()
    stopband: tuple = ()
    passband_ripple_db: float | None = None
    stopband_attenuation_db: float | None = None


@dataclass(frozen=True)
class HardwareSpec:
    pipelining: str = "none"


@dataclass(frozen=True, eq=False)
class FilterSpec:
    """A validated filter: coefficients in every form the realizations need.

    ``b``, ``a``: transfer function in powers of z^-1 (``a[0] == 1``); ``sos``: the
    sections as given (or None); ``zpk``: zeros, poles, gain when known exactly from the
    source (or None); ``is_fir``: ``a == [1]``.
    """

    name: str
    b: np.ndarray
    a: np.ndarray
    sos: np.ndarray | None = None
    zpk: tuple | None = None
    sample_rate: float | None = None
    realization: RealizationSpec = RealizationSpec()
    fixed: FixedSpec = FixedSpec()
    response: ResponseSpec | None = None
    hardware: HardwareSpec = HardwareSpec()
    device: str | None = None
    source: str = "<python>"

    @property
    def is_fir(self) -> bool:
        return len(np.trim_zeros(self.a, "b")) == 1

    @property
    def order(self) -> int:
        return max(len(np.trim_zeros(self.a, "b")), len(np.trim_zeros(self.b, "b"))) - 1


# -- reading helpers -------------------------------------------------------------------


class _Reader:
    """Checks one table: known keys, types, ranges; errors carry file and field."""

    def __init__(self, source: str, prefix: str, table, allowed: tuple[str, ...]):
        self.source = source
        self.prefix = prefix
        if not isinstance(table, dict):
            raise FilterFileError(
                f"must be a table, not {table!r}", source=source, field=prefix or None
            )
        self.table = table
        for key in table:
            if key not in allowed:
                close = difflib.get_close_matches(str(key), allowed, n=1)
                hint = f" (did you mean {close[0]!r}?)" if close else ""
                allowed_list = ", ".join(allowed)
                raise FilterFileError(
                    f"unknown key{hint}; known keys here: {allowed_list}",
                    source=source,
                    field=self.field(key),
                )

    def field(self, key: str) -> str:
        return f"{self.prefix}.{key}" if self.prefix else key

    def error(self, key: str, problem: str) -> FilterFileError:
        return FilterFileError(problem, source=self.source, field=self.field(key))

    def has(self, key: str) -> bool:
        return key in self.table

    def get(self, key, default=None):
        return self.table.get(key, default)

    def choice(self, key: str, choices: tuple[str, ...], default: str) -> str:
        v = self.table.get(key, default)
        if v not in choices:
            close = difflib.get_close_matches(str(v), choices, n=1)
            hint = f" (did you mean {close[0]!r}?)" if close else ""
            raise self.error(key, f"must be one of {', '.join(choices)}, not {v!r}{hint}")
        return v

    def integer(self, key: str, default: int, minimum: int = 1) -> int:
        v = self.table.get(key, default)
        if not isinstance(v, int) or isinstance(v, bool):
            raise self.error(key, f"must be an integer, not {v!r}")
        if v < minimum:
            raise self.error(key, f"must be at least {minimum}, not {v!r}")
        return v

    def boolean(self, key: str, default: bool) -> bool:
        v = self.table.get(key, default)
        if not isinstance(v, bool):
            raise self.error(key, f"must be true or false, not {v!r}")
        return v

    def number(self, key: str, default=None, *, positive: bool = False):
        v = self.table.get(key, default)
        if v is None:
            return None
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            raise self.error(key, f"must be a number, not {v!r}")
        if not math.isfinite(v):
            raise self.error(key, f"must be finite, not {v!r}")
        if positive and v <= 0:
            raise self.error(key, f"must be positive, not {v!r}")
        return float(v)

    def vector(self, key: str, *, allow_empty: bool = False) -> np.ndarray:
        v = self.table[key]
        if not isinstance(v, list) or (not v and not allow_empty):
            raise self.error(key, f"must be a non-empty list of numbers, not {v!r}")
        for i, e in enumerate(v):
            if isinstance(e, bool) or not isinstance(e, (int, float)):
                raise self.error(key, f"item {i} must be a number, not {e!r}")
            if not math.isfinite(e):
                raise self.error(key, f"item {i} must be finite, not {e!r}")
        return np.array(v, dtype=float)

    def complex_vector(self, key: str) -> np.ndarray:
        v = self.table[key]
        if not isinstance(v, list):
            raise self.error(key, f"must be a list of numbers or [re, im] pairs, not {v!r}")
        out = []
        for i, e in enumerate(v):
            if isinstance(e, list):
                if len(e) != 2 or any(
                    isinstance(t, bool) or not isinstance(t, (int, float)) for t in e
                ):
                    raise self.error(key, f"item {i} must be a number or [re, im], not {e!r}")
                c = complex(e[0], e[1])
            elif isinstance(e, (int, float)) and not isinstance(e, bool):
                c = complex(e)
            else:
                raise self.error(key, f"item {i} must be a number or [re, im], not {e!r}")
            if not (math.isfinite(c.real) and math.isfinite(c.imag)):
                raise self.error(key, f"item {i} must be finite, not {e!r}")
            out.append(c)
        return np.array(out, dtype=complex)

    def format(self, key: str, default: Format | None) -> Format | None:
        if key not in self.table:
            return default
        return _format(self.source, self.field(key), self.table[key])


def _format(source: str, fieldname: str, v) -> Format:
    r = _Reader(source, fieldname, v, ("bits", "frac"))
    if "bits" not in v or "frac" not in v:
        raise FilterFileError(
            f"must give both bits and frac, not {v!r}", source=source, field=fieldname
        )
    bits = r.integer("bits", 16, minimum=1)
    frac = r.get("frac")
    if not isinstance(frac, int) or isinstance(frac, bool):
        raise r.error("frac", f"must be an integer, not {frac!r}")
    if frac > bits:
        raise FilterFileError(
            f"frac ({frac}) must not exceed bits ({bits})", source=source, field=fieldname
        )
    return Format(bits, frac)


def _check_name(source: str, name) -> str:
    if not isinstance(name, str) or not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", name):
        raise FilterFileError(
            f"must be an identifier (letters, digits, underscores; not starting with a "
            f"digit), not {name!r}",
            source=source,
            field="name",
        )
    if name in VERILOG_KEYWORDS or keyword.iskeyword(name):
        raise FilterFileError(
            f"must not be a reserved word, not {name!r}", source=source, field="name"
        )
    return name


# -- the filter table ------------------------------------------------------------------

_FILTER_KEYS = ("b", "a", "sections", "zeros", "poles", "gain", "taps", "design")
_DESIGN_KEYS = ("method", "band", "order", "edges", "ripple", "attenuation", "window")


def _design(source: str, table, sample_rate):
    r = _Reader(source, "filter.design", table, _DESIGN_KEYS)
    for key in ("method", "band", "order", "edges"):
        if not r.has(key):
            raise r.error(key, "is required for a design")
    method = r.choice("method", DESIGN_METHODS, "butterworth")
    band = r.choice("band", BANDS, "lowpass")
    order = r.integer("order", 2, minimum=1)
    if sample_rate is None:
        raise FilterFileError(
            "sample_rate must be given for a design (band edges are in Hz)",
            source=source,
            field="sample_rate",
        )
    edges = r.vector("edges")
    nyq = sample_rate / 2
    for i, e in enumerate(edges):
        if not 0 < e < nyq:
            raise r.error("edges", f"item {i} ({e} Hz) must lie between 0 and Nyquist ({nyq} Hz)")
    if np.any(np.diff(edges) <= 0):
        raise r.error("edges", f"must increase, not {list(edges)!r}")
    ripple = r.number("ripple", positive=True)
    atten = r.number("attenuation", positive=True)
    if method in ("chebyshev-1", "elliptic") and ripple is None:
        raise r.error("ripple", f"passband ripple (dB) must be given for method {method!r}")
    if method in ("chebyshev-2", "elliptic") and atten is None:
        raise r.error(
            "attenuation", f"stopband attenuation (dB) must be given for method {method!r}"
        )
    if method in IIR_METHODS:
        want = 2 if band in ("bandpass", "bandstop") else 1
        if len(edges) != want:
            raise r.error("edges", f"must have {want} edge(s) for a {band}, not {len(edges)}")
        wn = edges / nyq if want == 2 else edges[0] / nyq
        kind = {
            "butterworth": lambda: signal.butter(order, wn, band, output="zpk"),
            "chebyshev-1": lambda: signal.cheby1(order, ripple, wn, band, output="zpk"),
            "chebyshev-2": lambda: signal.cheby2(order, atten, wn, band, output="zpk"),
            "elliptic": lambda: signal.ellip(order, ripple, atten, wn, band, output="zpk"),
            "bessel": lambda: signal.bessel(order, wn, band, output="zpk", norm="phase"),
        }[method]
        z, p, k = kind()
        b, a = signal.zpk2tf(z, p, k)
        return b, a, None, (z, p, k)
    numtaps = order + 1
    if method == "window":
        want = 2 if band in ("bandpass", "bandstop") else 1
        if len(edges) != want:
            raise r.error("edges", f"must have {want} cutoff(s) for a {band}, not {len(edges)}")
        if band in ("highpass", "bandstop") and numtaps % 2 == 0:
            raise r.error("order", f"must be even for a {band} window design, not {order}")
        window = r.get("window", "hamming")
        try:
            taps = signal.firwin(numtaps, edges, window=window, pass_zero=band, fs=sample_rate)
        except ValueError as e:
            raise r.error("window", str(e)) from e
        return taps, np.array([1.0]), None, None
    # equiripple: edges are the band edges (pass/stop pairs)
    want = 4 if band in ("bandpass", "bandstop") else 2
    if len(edges) != want:
        raise r.error(
            "edges", f"must have {want} band edges for an equiripple {band}, not {len(edges)}"
        )
    full = np.concatenate([[0.0], edges, [nyq]])
    desired = {
        "lowpass": [1, 0],
        "highpass": [0, 1],
        "bandpass": [0, 1, 0],
        "bandstop": [1, 0, 1],
    }[band]
    if band in ("highpass", "bandstop") and numtaps % 2 == 0:
        raise r.error("order", f"must be even for an equiripple {band}, not {order}")
    try:
        taps = signal.remez(numtaps, full, desired, fs=sample_rate)
    except ValueError as e:
        raise r.error("edges", str(e)) from e
    return taps, np.array([1.0]), None, None


def _filter(source: str, table, sample_rate):
    r = _Reader(source, "filter", table, _FILTER_KEYS)
    ways = {
        "b + a": r.has("b") or r.has("a"),
        "sections": r.has("sections"),
        "zeros + poles + gain": r.has("zeros") or r.has("poles") or r.has("gain"),
        "taps": r.has("taps"),
        "design": r.has("design"),
    }
    given = [k for k, v in ways.items() if v]
    if len(given) != 1:
        raise FilterFileError(
            "must give exactly one of: b + a, sections, zeros + poles + gain, taps, design; "
            f"{'found ' + ', '.join(given) if given else 'found none'}",
            source=source,
            field="filter",
        )
    way = given[0]
    sos = zpk = None
    if way == "b + a":
        for key in ("b", "a"):
            if not r.has(key):
                raise r.error(key, "is required with " + ("a" if key == "b" else "b"))
        b, a = r.vector("b"), r.vector("a")
        if a[0] == 0:
            raise r.error("a", "a[0] must not be zero")
        b, a = b / a[0], a / a[0]
    elif way == "sections":
        rows = r.get("sections")
        if not isinstance(rows, list) or not rows:
            raise r.error("sections", f"must be a non-empty list of rows, not {rows!r}")
        sos = []
        for i, row in enumerate(rows):
            if (
                not isinstance(row, list)
                or len(row) != 6
                or any(isinstance(v, bool) or not isinstance(v, (int, float)) for v in row)
            ):
                raise r.error(
                    "sections", f"row {i} must be 6 numbers [b0, b1, b2, 1, a1, a2], not {row!r}"
                )
            if not all(math.isfinite(v) for v in row):
                raise r.error("sections", f"row {i} must be finite, not {row!r}")
            if row[3] != 1:
                raise r.error("sections", f"row {i}: a0 (the 4th value) must be 1, not {row[3]!r}")
            sos.append([float(v) for v in row])
        sos = np.array(sos)
        b, a = signal.sos2tf(sos)
        zpk = signal.sos2zpk(sos)
    elif way == "zeros + poles + gain":
        for key in ("zeros", "poles", "gain"):
            if not r.has(key):
                raise r.error(key, "is required with zeros, poles and gain")
        z, p = r.complex_vector("zeros"), r.complex_vector("poles")
        k = r.number("gain")
        for key, roots in (("zeros", z), ("poles", p)):
            if np.any(np.abs(np.sort_complex(roots) - np.sort_complex(np.conj(roots))) > 1e-9):
                raise r.error(key, "complex values must come in conjugate pairs")
        zpk = (z, p, k)
        b, a = signal.zpk2tf(z, p, k)
        b, a = np.real(b), np.real(a)
    elif way == "taps":
        b, a = r.vector("taps"), np.array([1.0])
    else:
        b, a, sos, zpk = _design(source, r.get("design"), sample_rate)
    if not np.any(b != 0):
        raise r.error("b" if way == "b + a" else way.split()[0], "the numerator is all zero")
    poles = zpk[1] if zpk is not None else np.roots(np.trim_zeros(a, "b"))
    if len(poles):
        radius = float(np.max(np.abs(poles)))
        if radius > 1 + 1e-9:
            raise FilterFileError(
                f"the filter is unstable: a pole has |p| = {radius:.6g} > 1",
                source=source,
                field="filter",
            )
        if radius > 1 - 1e-9:
            warnings.warn(
                f"{source}: filter: a pole lies on the unit circle (|p| = {radius:.9g}); "
                "the filter is marginally stable",
                QuantizationWarning,
                stacklevel=3,
            )
    return np.asarray(b, float), np.asarray(a, float), sos, zpk


def _realization(source: str, table) -> RealizationSpec:
    r = _Reader(source, "realization", table, ("form", "section", "pairing", "order", "gain"))
    return RealizationSpec(
        form=r.choice("form", FORMS, "cascade"),
        section=r.choice("section", SECTION_FORMS, "direct-form-2"),
        pairing=r.choice("pairing", PAIRINGS, "nearest"),
        order=r.choice("order", ORDERS, "nearest-last"),
        gain=r.choice("gain", GAIN_SPREADS, "first"),
    )


_FIXED_KEYS = (
    "input",
    "output",
    "coefficient_bits",
    "state_bits",
    "rounding",
    "overflow",
    "scaling",
    "round_products",
    "section_gains",
    "nodes",
)


def _fixed(source: str, table) -> FixedSpec:
    r = _Reader(source, "fixed", table, _FIXED_KEYS)
    d = FixedSpec()
    nodes = {}
    raw_nodes = r.get("nodes", {})
    if not isinstance(raw_nodes, dict):
        raise r.error("nodes", f"must be a table of node names, not {raw_nodes!r}")
    for name, v in raw_nodes.items():
        fname = f"fixed.nodes.{name}"
        nr = _Reader(source, fname, v, ("bits", "frac", "rounding", "overflow"))
        fmt = None
        if nr.has("bits") or nr.has("frac"):
            fmt = _format(source, fname, {k: v[k] for k in ("bits", "frac") if k in v})
        nodes[name] = NodeOverride(
            format=fmt,
            rounding=nr.choice("rounding", ROUNDING_RULES, d.rounding)
            if nr.has("rounding")
            else None,
            overflow=nr.choice("overflow", OVERFLOW_RULES, d.overflow)
            if nr.has("overflow")
            else None,
        )
    return FixedSpec(
        input=r.format("input", d.input),
        output=r.format("output", d.output),
        coefficient_bits=r.integer("coefficient_bits", d.coefficient_bits, minimum=2),
        state_bits=r.integer("state_bits", d.state_bits, minimum=2),
        rounding=r.choice("rounding", ROUNDING_RULES, d.rounding),
        overflow=r.choice("overflow", OVERFLOW_RULES, d.overflow),
        scaling=r.choice("scaling", SCALINGS, d.scaling),
        round_products=r.boolean("round_products", d.round_products),
        section_gains=r.boolean("section_gains", d.section_gains),
        nodes=nodes,
    )


def _bands(r: _Reader, key: str, nyq: float | None) -> tuple:
    v = r.get(key, [])
    if not isinstance(v, list):
        raise r.error(key, f"must be a list of [low, high] pairs in Hz, not {v!r}")
    out = []
    for i, pair in enumerate(v):
        if (
            not isinstance(pair, list)
            or len(pair) != 2
            or any(isinstance(t, bool) or not isinstance(t, (int, float)) for t in pair)
        ):
            raise r.error(key, f"item {i} must be a [low, high] pair in Hz, not {pair!r}")
        lo, hi = float(pair[0]), float(pair[1])
        if not (math.isfinite(lo) and math.isfinite(hi)) or lo < 0 or hi <= lo:
            raise r.error(key, f"item {i} must have 0 <= low < high, not {pair!r}")
        if nyq is not None and hi > nyq * (1 + 1e-12):
            raise r.error(key, f"item {i} ({hi} Hz) lies beyond Nyquist ({nyq} Hz)")
        out.append((lo, hi))
    return tuple(out)


def _response(source: str, table, sample_rate) -> ResponseSpec:
    r = _Reader(
        source, "spec", table, ("passband", "stopband", "passband_ripple", "stopband_attenuation")
    )
    if sample_rate is None:
        raise FilterFileError(
            "sample_rate must be given with a [spec] table (band edges are in Hz)",
            source=source,
            field="sample_rate",
        )
    spec = ResponseSpec(
        passband=_bands(r, "passband", sample_rate / 2),
        stopband=_bands(r, "stopband", sample_rate / 2),
        passband_ripple_db=r.number("passband_ripple", positive=True),
        stopband_attenuation_db=r.number("stopband_attenuation", positive=True),
    )
    if spec.passband_ripple_db is not None and not spec.passband:
        raise r.error("passband", "must be given with passband_ripple")
    if spec.stopband_attenuation_db is not None and not spec.stopband:
        raise r.error("stopband", "must be given with stopband_attenuation")
    return spec


_TOP_KEYS = ("name", "sample_rate", "device", "filter", "realization", "fixed", "spec", "hardware")


def from_dict(data: dict, source: str = "<python>") -> FilterSpec:
    """Validate a filter description (the parsed TOML, or a dict built in Python)."""
    top = _Reader(source, "", data, _TOP_KEYS)
    if "name" not in data:
        raise FilterFileError("is required", source=source, field="name")
    name = _check_name(source, data["name"])
    sample_rate = top.number("sample_rate", positive=True)
    device = data.get("device")
    if device is not None and not isinstance(device, str):
        raise top.error("device", f"must be a profile name or path, not {device!r}")
    if "filter" not in data:
        raise FilterFileError("table is required", source=source, field="filter")
    b, a, sos, zpk = _filter(source, data["filter"], sample_rate)
    realization = _realization(source, data.get("realization", {}))
    fir = len(np.trim_zeros(a, "b")) == 1
    if realization.form in FIR_FORMS and not fir:
        raise FilterFileError(
            f"form {realization.form!r} needs an FIR filter (taps, or a = [1]); this one has poles",
            source=source,
            field="realization.form",
        )
    if realization.form == "fir-symmetric":
        from .realize import folding

        problem = folding(b)[2]
        if problem:
            raise FilterFileError(problem, source=source, field="realization.form")
    hw = _Reader(source, "hardware", data.get("hardware", {}), ("pipelining",))
    response = _response(source, data["spec"], sample_rate) if "spec" in data else None
    return FilterSpec(
        name=name,
        b=b,
        a=a,
        sos=sos,
        zpk=zpk,
        sample_rate=sample_rate,
        realization=realization,
        fixed=_fixed(source, data.get("fixed", {})),
        response=response,
        hardware=HardwareSpec(pipelining=hw.choice("pipelining", PIPELININGS, "none")),
        device=device,
        source=source,
    )


def make(**kwargs) -> FilterSpec:
    """Build a filter from keyword arguments named like the file's keys and tables.

    >>> spec = make(name="demo", filter={"taps": [0.25, 0.5, 0.25]},
    ...             realization={"form": "fir-symmetric"})
    >>> spec.is_fir
    True
    """
    return from_dict(kwargs)


def loads(text: str, source: str = "<string>") -> FilterSpec:
    """Validate a filter file's text."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        raise FilterFileError(f"is not valid TOML: {e}", source=source) from e
    return from_dict(data, source)


def load(path) -> FilterSpec:
    """Read and validate a filter file."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError as e:
        raise FilterFileError("file not found", source=str(path)) from e
    except (OSError, UnicodeDecodeError) as e:
        raise FilterFileError(f"cannot be read: {e}", source=str(path)) from e
    return loads(text, str(path))
