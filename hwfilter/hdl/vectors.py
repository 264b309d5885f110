"""Test vectors for the generated design, and the hex files the testbench reads.

The vector set, in this order (each segment starts from the state the last one left):

==========================  ============================================================
segment                     samples
==========================  ============================================================
``impulse``                 the largest word, then zeros
``negative-impulse``        the smallest word (-2**(bits-1)), then zeros
``step``                    the largest word throughout
``negative-step``           the smallest word throughout
``full-scale-alternating``  largest, smallest, largest, ... (full scale at Nyquist)
``worst-case``              largest or smallest word by the sign of the reversed impulse
                            response: drives the output to its peak (the l1 norm of the
                            impulse response, times full scale) at the segment's end
``random``                  uniform over every input word (seeded), the rest
==========================  ============================================================
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..graph import Graph
from ..reference import simulate_float

__all__ = ["Vectors", "vector_set", "hex_lines", "SEGMENTS", "MAX_SEGMENT"]

SEGMENTS = (
    "impulse",
    "negative-impulse",
    "step",
    "negative-step",
    "full-scale-alternating",
    "worst-case",
    "random",
)


@dataclass(frozen=True)
class Vectors:
    """Input words and the segments they are made of: ``(name, start, length)``."""

    words: np.ndarray
    segments: tuple

    def as_dicts(self) -> list[dict]:
        return [{"name": n, "start": s, "length": k} for n, s, k in self.segments]


#: longest fixed segment (long runs are mostly random words)
MAX_SEGMENT = 1024


def vector_set(graph: Graph, samples: int = 2048, *, seed: int = 1) -> Vectors:
    """The vector set for ``graph`` (see the module docstring), ``samples`` words long.

    Each fixed segment takes ``samples // 8`` words (at least one, at most
    :data:`MAX_SEGMENT`); ``random`` takes the rest. Words are of the graph's input
    format.
    """
    if not isinstance(samples, int) or isinstance(samples, bool) or samples < 1:
        raise ValueError(f"samples must be a positive integer, not {samples!r}")
    fmt = graph.input.format
    if fmt.bits > 63:
        raise ValueError(f"input word must be at most 63 bits for test vectors, not {fmt.bits}")
    lo, hi = fmt.min_int, fmt.max_int
    seg = max(1, min(samples // 8, MAX_SEGMENT))
    parts: list[tuple[str, np.ndarray]] = []
    impulse = np.zeros(seg, np.int64)
    impulse[0] = hi
    parts.append(("impulse", impulse))
    neg = np.zeros(seg, np.int64)
    neg[0] = lo
    parts.append(("negative-impulse", neg))
    parts.append(("step", np.full(seg, hi, np.int64)))
    parts.append(("negative-step", np.full(seg, lo, np.int64)))
    parts.append(("full-scale-alternating", np.where(np.arange(seg) % 2 == 0, hi, lo)))
    # the float impulse response (design coefficients) gives the worst-case signs
    h = simulate_float(graph, np.eye(1, seg, 0).ravel())
    parts.append(("worst-case", np.where(h[::-1] >= 0, hi, lo).astype(np.int64)))
    used = 0
    kept: list[tuple[str, np.ndarray]] = []
    for name, words in parts:
        if used + len(words) > samples:
            break
        kept.append((name, words))
        used += len(words)
    rng = np.random.default_rng(seed)
    kept.append(("random", rng.integers(lo, hi, size=samples - used, endpoint=True)))
    segments = []
    start = 0
    for name, words in kept:
        if len(words):
            segments.append((name, start, len(words)))
        start += len(words)
    words = np.concatenate([w.astype(np.int64) for _, w in kept])
    assert len(words) == samples
    return Vectors(words, tuple(segments))


def hex_lines(words, bits: int) -> str:
    """Two's complement words as ``$readmemh`` text: one zero-padded hex word a line."""
    digits = (bits + 3) // 4
    mask = (1 << bits) - 1
    return "".join(f"{int(v) & mask:0{digits}x}\n" for v in words)
