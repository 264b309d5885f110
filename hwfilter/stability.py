"""Exact stability verdict of a graph's quantized structure, and where its poles went.

The characteristic polynomial ``det(zI - A)`` is computed exactly in
``fractions.Fraction`` from the rational state matrix of :func:`hwfilter.linear.linear_model`
(quantized coefficients are dyadic rationals, so nothing is rounded). ``A`` is first split
into the strongly connected blocks of its nonzero pattern (one block per recursive loop
group, for example one per second-order section; loop-free delays are poles at zero), so
``det(zI - A)`` is the product of the blocks' polynomials; each is computed by the
Faddeev-LeVerrier recursion. Stability (every pole strictly inside the unit circle) is
decided by the Schur-Cohn step-down recursion (the Jury test) on the exact coefficients,
never from numerically computed roots, and the largest pole radius is bracketed exactly by
running the same test on ``p(r z)`` for rational ``r`` (bisection).

References
----------
I. Schur, "Ueber Potenzreihen, die im Innern des Einheitskreises beschraenkt sind",
J. reine angew. Math. 147, 1917; A. Cohn, Math. Z. 14, 1922 (the step-down test).
E. I. Jury, Theory and Application of the z-Transform Method, Wiley 1964 [M].
"""

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np
import scipy.optimize

from .graph import Graph, strongly_connected_components
from .linear import LinearModel, linear_model

__all__ = [
    "loop_blocks",
    "characteristic_polynomial",
    "block_polynomials",
    "schur_cohn_stable",
    "radius_bracket",
    "Stability",
    "stability",
]


def _exact_A(model: LinearModel) -> list[list[Fraction]]:
    n = model.n_states
    A = [[Fraction(0)] * n for _ in range(n)]
    for i, s in enumerate(model.states):
        for k, v in model.exact_next[s].items():
            if k < n:
                A[i][k] = v
    return A


def loop_blocks(model: LinearModel) -> list[list[int]]:
    """Strongly connected groups of states (Tarjan), each with a loop, in graph order.

    States in no loop are left out: each contributes a pole at ``z = 0``.
    """
    n = model.n_states
    succ = {i: [r for r in range(n) if model.A[r, i] != 0.0] for i in range(n)}
    return sorted(
        sorted(comp)
        for comp in strongly_connected_components(succ)
        if len(comp) > 1 or model.A[comp[0], comp[0]] != 0.0
    )


def _charpoly(A: list[list[Fraction]]) -> list[Fraction]:
    """``det(zI - A)`` as ``[1, c1, ..., cn]`` (descending powers), Faddeev-LeVerrier."""
    n = len(A)
    coeffs = [Fraction(1)]
    M = [[Fraction(0)] * n for _ in range(n)]  # M_0 = 0
    c_prev = Fraction(1)
    for k in range(1, n + 1):
        # M_k = A M_{k-1} + c_{k-1} I
        AM = [
            [sum(A[i][t] * M[t][j] for t in range(n) if A[i][t]) for j in range(n)]
            for i in range(n)
        ]
        for i in range(n):
            AM[i][i] += c_prev
        M = AM
        # c_k = -tr(A M_k) / k
        tr = sum(A[i][t] * M[t][i] for i in range(n) for t in range(n) if A[i][t])
        c_prev = -tr / k
        coeffs.append(c_prev)
    return coeffs


def _polymul(p: list, q: list) -> list:
    out = [Fraction(0)] * (len(p) + len(q) - 1)
    for i, a in enumerate(p):
        for j, b in enumerate(q):
            out[i + j] += a * b
    return out


def block_polynomials(model: LinearModel) -> list[tuple[list[str], list[Fraction]]]:
    """``(state names, det(zI - A_block))`` for every loop block of the model."""
    A = _exact_A(model)
    out = []
    for comp in loop_blocks(model):
        sub = [[A[i][j] for j in comp] for i in comp]
        out.append(([model.states[i] for i in comp], _charpoly(sub)))
    return out


def characteristic_polynomial(
    graph: Graph | LinearModel, *, coefficients: str = "quantized"
) -> list[Fraction]:
    """Exact ``det(zI - A)`` of the graph as ``[1, c1, ..., cn]`` (descending powers of z)."""
    model = (
        graph if isinstance(graph, LinearModel) else linear_model(graph, coefficients=coefficients)
    )
    poly = [Fraction(1)]
    looped = 0
    for names, p in block_polynomials(model):
        poly = _polymul(poly, p)
        looped += len(names)
    return poly + [Fraction(0)] * (model.n_states - looped)


def schur_cohn_stable(poly) -> bool:
    """True when every root of ``poly`` (descending powers, exact) is inside ``|z| < 1``.

    Step-down recursion: for ``a = [1, a1, ..., an]`` take ``k = an``; all roots are
    inside the unit circle iff ``|k| < 1`` and the reduced polynomial
    ``a'_i = (a_i - k a_{n-i}) / (1 - k^2)`` (degree n - 1) has the same property.
    """
    a = [Fraction(v) for v in poly]
    if not a or a[0] == 0:
        raise ValueError(f"polynomial must have a nonzero leading coefficient, not {poly!r}")
    a = [v / a[0] for v in a]
    while len(a) > 1:
        k = a[-1]
        if abs(k) >= 1:
            return False
        n = len(a) - 1
        den = 1 - k * k
        a = [(a[i] - k * a[n - i]) / den for i in range(n)]
    return True


def _scaled(poly, r: Fraction) -> list[Fraction]:
    """Coefficients of ``p(r w) / r^n``: roots divided by ``r``."""
    return [Fraction(c) / r**k for k, c in enumerate(poly)]


def radius_bracket(poly, estimate: float, *, rtol: float = 1e-9) -> tuple[float, float]:
    """Exact bracket ``lo <= max |root| <= hi`` with ``hi - lo <= rtol * hi``.

    Every ``|root| < r`` test is the Schur-Cohn test on ``p(r w)``; ``estimate`` (from
    eigenvalues) only seeds the bisection.
    """
    poly = list(poly)
    while len(poly) > 1 and poly[-1] == 0:
        poly.pop()  # roots at zero
    if len(poly) == 1:
        return 0.0, 0.0

    def inside(r: Fraction) -> bool:
        return schur_cohn_stable(_scaled(poly, r))

    est = Fraction(max(estimate, 1e-300)).limit_denominator(1 << 40)
    hi = est * (1 + Fraction(1, 10**6))
    while not inside(hi):
        hi *= 2
    lo = est * (1 - Fraction(1, 10**6))
    while lo > 0 and inside(lo):
        lo /= 2
    # bisection on dyadic-ish rationals (keep denominators small)
    while hi - lo > Fraction(rtol) * hi:
        mid = Fraction((lo + hi) / 2).limit_denominator(1 << 60)
        if mid <= lo or mid >= hi:
            mid = (lo + hi) / 2
        if inside(mid):
            hi = mid
        else:
            lo = mid
    return float(lo), float(hi)


@dataclass
class Stability:
    """Stability verdict of a quantized structure.

    ``stable`` comes from the exact Schur-Cohn test of every loop block; ``max_pole_radius``
    is the upper end of an exact bracket (within ``1e-9`` relative). ``pole_displacement``
    is the largest ``|p_quantized - p_design|`` over poles paired by an optimal assignment.
    """

    stable: bool
    max_pole_radius: float
    poles: np.ndarray
    design_poles: np.ndarray | None = None
    design_max_pole_radius: float | None = None
    pole_displacement: float | None = None
    blocks: list = field(default_factory=list)

    def as_dict(self) -> dict:
        out = {
            "stable": bool(self.stable),
            "max_pole_radius": float(self.max_pole_radius),
            "poles": [[float(p.real), float(p.imag)] for p in self.poles],
            "blocks": self.blocks,
        }
        if self.design_poles is not None:
            out["design_poles"] = [[float(p.real), float(p.imag)] for p in self.design_poles]
            out["design_max_pole_radius"] = self.design_max_pole_radius
            out["pole_displacement"] = self.pole_displacement
        return out


def _block_report(model: LinearModel):
    stable = True
    radius = 0.0
    blocks = []
    for names, poly in block_polynomials(model):
        idx = [model.states.index(s) for s in names]
        est = float(np.max(np.abs(np.linalg.eigvals(model.A[np.ix_(idx, idx)]))))
        ok = schur_cohn_stable(poly)
        lo, hi = radius_bracket(poly, est)
        stable &= ok
        radius = max(radius, hi)
        blocks.append(
            {
                "states": names,
                "stable": ok,
                "max_pole_radius": hi,
                "characteristic_polynomial": [float(c) for c in poly],
            }
        )
    return stable, radius, blocks


def _match(p: np.ndarray, q: np.ndarray) -> float:
    if len(p) == 0 or len(q) == 0:
        return 0.0
    cost = np.abs(p[:, None] - q[None, :])
    r, c = scipy.optimize.linear_sum_assignment(cost)
    return float(cost[r, c].max())


def stability(graph: Graph, float_graph: Graph | None = None) -> Stability:
    """Exact stability of ``graph`` with its quantized coefficients; compare to the design.

    Parameters
    ----------
    graph : Graph
        Graph with quantized coefficients (gains not yet quantized use design values).
    float_graph : Graph, optional
        The design; default: ``graph`` itself with its design coefficient values.
    """
    model = linear_model(graph, coefficients="quantized")
    stable, radius, blocks = _block_report(model)
    p = np.linalg.eigvals(model.A) if model.n_states else np.zeros(0, complex)
    design = linear_model(float_graph or graph, coefficients="design")
    dp = np.linalg.eigvals(design.A) if design.n_states else np.zeros(0, complex)
    _, dradius, _ = _block_report(design)
    return Stability(stable, radius, p, dp, dradius, _match(p, dp), blocks)
