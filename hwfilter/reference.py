"""Simulation of a graph: bit-exact integer model and float model.

Both are generated as straight-line Python source from the graph (one statement per
node, in topological order, inside a loop over samples and channels) and compiled once.
The integer model runs under numba (int64) when every word of the graph fits in 62 bits,
and as plain Python on exact Python ints otherwise (any width, slower). The float model
runs under numba in float64.

Integer semantics follow :mod:`hwfilter.graph`: products and sums are exact, a sum
aligns fraction bits by left shifts, a narrowed sum wraps to its word, and quantize
nodes round and then wrap or saturate. Every wrap or saturation is counted per node.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from .fixed import Format
from .formats import node_ranges
from .graph import Graph

__all__ = ["IntegerResult", "simulate_integer", "simulate_float", "generate_source"]

#: widest word (bits) the int64 kernel accepts; wider graphs run on Python ints
INT64_SAFE_BITS = 62
#: below this many sample-channels, plain Python beats numba's compile time
_NUMBA_MIN_WORK = 20_000

_cache: dict = {}


def _var(name: str) -> str:
    return "v_" + re.sub(r"\W", "_", name)


def _state(name: str) -> str:
    return "d_" + re.sub(r"\W", "_", name)


def _round_lines(dst: str, src: str, k: int, rounding: str) -> list[str]:
    """Statements setting ``dst`` to ``src / 2**k`` rounded (k may be <= 0)."""
    if k <= 0:
        return [f"{dst} = {src} << {-k}" if k < 0 else f"{dst} = {src}"]
    h = 1 << (k - 1)
    if rounding == "floor":
        return [f"{dst} = {src} >> {k}"]
    if rounding == "half-up":
        return [f"{dst} = ({src} + {h}) >> {k}"]
    if rounding == "toward-zero":
        return [f"{dst} = ({src} >> {k}) if {src} >= 0 else -((-{src}) >> {k})"]
    if rounding == "half-away":
        return [f"{dst} = (({src} + {h}) >> {k}) if {src} >= 0 else -((-{src} + {h}) >> {k})"]
    assert rounding == "half-even", rounding
    return [
        f"{dst} = {src} >> {k}",
        f"_r = {src} - ({dst} << {k})",
        f"if _r > {h} or (_r == {h} and ({dst} & 1) == 1):",
        f"    {dst} = {dst} + 1",
    ]


def _overflow_lines(v: str, fmt: Format, overflow: str, counter: int) -> list[str]:
    lo, hi = fmt.min_int, fmt.max_int
    lines = [f"if {v} < {lo} or {v} > {hi}:", f"    ovf[{counter}] += 1"]
    if overflow == "saturate":
        lines += [f"    {v} = {lo} if {v} < {lo} else {hi}"]
    else:
        lines += [f"    {v} = (({v} - ({lo})) & {(1 << fmt.bits) - 1}) + ({lo})"]
    return lines


def generate_source(graph: Graph, mode: str, coefficients: str = "quantized") -> tuple[str, list]:
    """Python source of the kernel ``run(x, y, ovf)`` and the names of counted nodes.

    ``mode`` is ``"integer"`` (needs a quantized graph) or ``"float"``. In float mode,
    ``coefficients`` picks ``"design"`` or ``"quantized"`` gain values and quantize
    nodes pass values through unchanged.
    """
    assert mode in ("integer", "float")
    order = graph.topological_order()
    delays = graph.delays
    counted: list[str] = []
    body: list[str] = []
    for n in order:
        v = _var(n.name)
        if n.kind == "input":
            body.append(f"{v} = x[c, i]")
        elif n.kind == "delay":
            body.append(f"{v} = {_state(n.name)}")
        elif n.kind == "output":
            body.append(f"y[c, i] = {_var(n.inputs[0])}")
        elif n.kind == "gain":
            if mode == "integer":
                body.append(f"{v} = {_var(n.inputs[0])} * ({n.value})")
            else:
                c = n.coefficient if coefficients == "design" else n.quantized_coefficient
                body.append(f"{v} = {_var(n.inputs[0])} * ({float(c)!r})")
        elif n.kind == "add":
            terms = []
            for sign, s in zip(n.signs, n.inputs):
                t = _var(s)
                if mode == "integer":
                    shift = n.format.frac - graph[s].format.frac
                    if shift:
                        t = f"({t} << {shift})"
                terms.append(("+ " if sign > 0 else "- ") + t)
            expr = " ".join(terms)
            body.append(f"{v} = {expr[2:] if expr.startswith('+ ') else '-' + expr[2:]}")
        elif n.kind == "quantize":
            src = _var(n.inputs[0])
            if mode == "float":
                body.append(f"{v} = {src}")
            else:
                k = graph[n.inputs[0]].format.frac - n.format.frac
                body += _round_lines(v, src, k, n.rounding)
                body += _overflow_lines(v, n.format, n.overflow, len(counted))
                counted.append(n.name)
        else:  # pragma: no cover - Graph.check rejects unknown kinds
            raise ValueError(f"simulation does not know node kind {n.kind!r}")
    if mode == "integer":
        # sums narrowed by a pass below their full-precision range wrap to their word
        full = node_ranges(graph)
        extra = []
        for n in graph.of_kind("add"):
            lo, hi, _ = full[n.name]
            if lo < n.format.min_int or hi > n.format.max_int:
                idx = next(j for j, line in enumerate(body) if line.startswith(_var(n.name) + " ="))
                extra.append((idx, _overflow_lines(_var(n.name), n.format, "wrap", len(counted))))
                counted.append(n.name)
        for idx, lines in sorted(extra, reverse=True):
            body[idx + 1 : idx + 1] = lines
    zero = "0" if mode == "integer" else "0.0"
    src = ["def run(x, y, ovf):", "    for c in range(x.shape[0]):"]
    src += [f"        {_state(d.name)} = {zero}" for d in delays]
    src += ["        for i in range(x.shape[1]):"]
    src += ["            " + line for line in body]
    src += [f"            {_state(d.name)} = {_var(d.inputs[0])}" for d in delays]
    return "\n".join(src) + "\n", counted


def _compile(graph: Graph, mode: str, coefficients: str, use_numba: bool):
    key = (graph, mode, coefficients, use_numba)
    if key in _cache:
        return _cache[key]
    source, counted = generate_source(graph, mode, coefficients)
    namespace: dict = {}
    exec(compile(source, f"<hwfilter kernel {graph.name} {mode}>", "exec"), namespace)
    fn = namespace["run"]
    if use_numba:
        import numba

        fn = numba.njit(cache=False, nogil=True)(fn)
    _cache[key] = (fn, counted)
    return fn, counted


def max_word_bits(graph: Graph) -> int:
    """Widest word any node (or any full-precision sum) of the graph holds."""
    rng = node_ranges(graph)
    widest = max(n.format.bits for n in graph.nodes)
    for lo, hi, _ in rng.values():
        widest = max(widest, max(abs(lo), abs(hi) + 1).bit_length() + 1)
    return widest


@dataclass
class IntegerResult:
    """Output words of the bit-exact model and wrap/saturation counts per node."""

    output: np.ndarray
    overflows: dict[str, int]

    @property
    def total_overflows(self) -> int:
        return sum(self.overflows.values())


def _as_channels(x):
    x = np.asarray(x)
    single = x.ndim == 1
    return (x[None, :] if single else x), single


def simulate_integer(graph: Graph, x, *, engine: str = "auto") -> IntegerResult:
    """Run the bit-exact integer model on input words ``x``.

    ``x`` holds signed integer words of the input format, shape ``(samples,)`` or
    ``(channels, samples)``. ``engine`` is ``"auto"``, ``"numba"`` or ``"python"``;
    ``"auto"`` uses numba for large int64-safe runs.
    """
    if not graph.is_quantized:
        raise ValueError(f"graph {graph.name!r} must be quantized before integer simulation")
    xs, single = _as_channels(x)
    fmt = graph.input.format
    wide = max_word_bits(graph) > INT64_SAFE_BITS
    if engine == "auto":
        engine = "python" if wide or xs.size < _NUMBA_MIN_WORK else "numba"
    if engine == "numba" and wide:
        raise ValueError(f"graph {graph.name!r} has words over {INT64_SAFE_BITS} bits; use python")
    if engine == "numba":
        xi = np.ascontiguousarray(xs, dtype=np.int64)
        if xi.size and (xi.min() < fmt.min_int or xi.max() > fmt.max_int):
            raise ValueError(f"input words must fit the input format {fmt}")
        y = np.zeros_like(xi)
    else:
        xi = np.array([[int(v) for v in row] for row in xs], dtype=object).reshape(xs.shape)
        if xi.size and (min(xi.flat) < fmt.min_int or max(xi.flat) > fmt.max_int):
            raise ValueError(f"input words must fit the input format {fmt}")
        y = np.zeros(xs.shape, dtype=object)
    fn, counted = _compile(graph, "integer", "quantized", engine == "numba")
    ovf = np.zeros(max(1, len(counted)), dtype=np.int64)
    fn(xi, y, ovf)
    if engine == "python" and not wide:
        y = y.astype(np.int64)
    out = y[0] if single else y
    return IntegerResult(out, {name: int(ovf[j]) for j, name in enumerate(counted)})


def simulate_float(graph: Graph, x, *, coefficients: str = "design") -> np.ndarray:
    """Run the float model (quantize nodes pass through) on real input values ``x``.

    ``coefficients`` is ``"design"`` (the float design) or ``"quantized"`` (the rounded
    coefficients, exact arithmetic otherwise): the difference of the two isolates
    coefficient error from roundoff.
    """
    xs, single = _as_channels(np.asarray(x, dtype=np.float64))
    xs = np.ascontiguousarray(xs)
    use_numba = xs.size >= _NUMBA_MIN_WORK
    fn, _ = _compile(graph, "float", coefficients, use_numba)
    y = np.zeros_like(xs)
    fn(xs, y, np.zeros(1, dtype=np.int64))
    return y[0] if single else y
