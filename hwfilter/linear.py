"""Linear analysis of any signal-flow graph: one state-space model, then norms and responses.

The graph without its quantization is linear and time invariant; its delays are the
states. One walk over :meth:`Graph.topological_order` writes every node's value as a
linear combination of the states and the *sources*: the filter input and one injection
point per quantize node (a rounding error is added at the quantize node's output, and
quantize nodes are otherwise the identity). Delays' next values give the rows of ``A``
and ``B``; any node's value gives a row ``c`` of ``C`` and ``d`` of ``D``::

    s[n+1] = A s[n] + B u[n]          u = (x, e_1, ..., e_m)
    v_k[n] = c_k s[n] + d_k u[n]       for every node k

The walk is exact (``fractions.Fraction``; coefficients are the design values or the
quantized words), so the model also serves exact passes (the stability test of
:mod:`hwfilter.stability`, the worst-case bounds of :mod:`hwfilter.scaling`).

From the model, for any source ``j`` and any nodes: impulse responses, frequency
responses, and the norms used for scaling and noise:

- l1 = sum |h[n]| from the impulse response; the tail past the last sample computed is
  bounded rigorously with a Lyapunov weighting (see :func:`l1_parts`); finite responses
  (no loop reachable) are summed exactly;
- L2 = sqrt(sum h[n]^2) exactly from the discrete Lyapunov equation
  (``scipy.linalg.solve_discrete_lyapunov``);
- L-infinity = max |H(e^jw)| on a dense grid (plus the pole angles) refined near the peak.

No formula depends on the realization.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np
import scipy.linalg
import scipy.optimize

from .graph import Graph

__all__ = [
    "COEFFICIENT_CHOICES",
    "LinearModel",
    "linear_model",
    "state_space",
    "impulse_response",
    "frequency_response",
    "transfer_function",
    "L1Parts",
    "l1_parts",
    "l1_norm",
    "l2_norm",
    "linf_norm",
    "noise_gains",
    "dc_gains",
    "poles",
]

#: which gain values a linear model uses: the float design or the quantized words
COEFFICIENT_CHOICES = ("quantized", "design")

_Comb = dict  # sparse linear combination: column index -> Fraction


def _coefficient(node, coefficients: str) -> Fraction:
    if coefficients == "quantized" and node.value is not None:
        return Fraction(node.value, 1) / Fraction(2) ** node.coefficient_format.frac
    return Fraction(float(node.coefficient))


@dataclass(frozen=True, eq=False)
class LinearModel:
    """State-space model of a graph with one column of ``B``/``D`` per source.

    Attributes
    ----------
    states : tuple of str
        Delay node names, in graph order (the state vector).
    sources : tuple of str
        The input node name, then every modelled quantize node (its injection point).
    A, B : ndarray
        ``(n, n)`` and ``(n, m)`` float matrices.
    rows : dict
        Node name -> ``(c, d)`` float rows, ``c`` of shape ``(n,)``, ``d`` of ``(m,)``.
    exact_next, exact_rows : dict
        The same, exactly: sparse ``{column: Fraction}`` maps; columns ``< n`` are
        states, columns ``n + j`` are sources.
    output : str
        Name of the output node.
    """

    graph_name: str
    states: tuple[str, ...]
    sources: tuple[str, ...]
    A: np.ndarray
    B: np.ndarray
    rows: dict
    exact_next: dict
    exact_rows: dict
    output: str
    coefficients: str
    cache: dict = field(default_factory=dict, repr=False)

    @property
    def n_states(self) -> int:
        return len(self.states)

    def source_index(self, source: str) -> int:
        try:
            return self.sources.index(source)
        except ValueError:
            raise ValueError(
                f"source must be the input or a quantize node of graph {self.graph_name!r}, "
                f"not {source!r}"
            ) from None

    def row(self, node: str) -> tuple[np.ndarray, np.ndarray]:
        try:
            return self.rows[node]
        except KeyError:
            raise ValueError(f"node must be in graph {self.graph_name!r}, not {node!r}") from None

    @property
    def C(self) -> np.ndarray:
        """Output row of ``C`` as a ``(1, n)`` matrix."""
        return self.rows[self.output][0][None, :]

    @property
    def D(self) -> np.ndarray:
        """Output row of ``D`` as a ``(1, m)`` matrix."""
        return self.rows[self.output][1][None, :]

    def system(self, source: str, node: str) -> tuple[np.ndarray, np.ndarray, np.ndarray, float]:
        """``(A, b, c, d)`` of the single-input single-output path ``source -> node``."""
        j = self.source_index(source)
        c, d = self.row(node)
        return self.A, self.B[:, j], c, float(d[j])


def linear_model(graph: Graph, *, coefficients: str = "quantized", nodes=None) -> LinearModel:
    """Extract the state-space model of ``graph`` (see the module docstring).

    Parameters
    ----------
    graph : Graph
        A float or quantized-coefficient graph (quantize formats are not needed).
    coefficients : {"quantized", "design"}
        Gain values: the quantized words (design values for gains not quantized yet) or
        the float design values.
    nodes : iterable of str, optional
        Model only these nodes (for example one section); values read from other nodes
        are taken as zero. Default: the whole graph.
    """
    if coefficients not in COEFFICIENT_CHOICES:
        raise ValueError(
            f"coefficients must be one of {', '.join(COEFFICIENT_CHOICES)}, not {coefficients!r}"
        )
    keep = None if nodes is None else set(nodes)
    inside = (lambda name: True) if keep is None else (lambda name: name in keep)
    states = tuple(d.name for d in graph.delays if inside(d.name))
    sources = (graph.input.name,) + tuple(
        q.name for q in graph.of_kind("quantize") if inside(q.name)
    )
    n = len(states)
    sidx = {s: i for i, s in enumerate(states)}
    qidx = {s: n + j for j, s in enumerate(sources)}
    comb: dict[str, _Comb] = {}
    for node in graph.topological_order():
        if not inside(node.name):
            comb[node.name] = {}
            continue
        kind = node.kind
        if kind == "input":
            v = {qidx[node.name]: Fraction(1)}
        elif kind == "delay":
            v = {sidx[node.name]: Fraction(1)}
        elif kind == "gain":
            c = _coefficient(node, coefficients)
            v = {k: c * x for k, x in comb[node.inputs[0]].items()} if c else {}
        elif kind == "add":
            v = {}
            for sign, src in zip(node.signs, node.inputs, strict=True):
                for k, x in comb[src].items():
                    v[k] = v.get(k, 0) + sign * x
            v = {k: x for k, x in v.items() if x}
        elif kind == "quantize":
            v = dict(comb[node.inputs[0]])
            v[qidx[node.name]] = v.get(qidx[node.name], 0) + 1
        elif kind == "output":
            v = dict(comb[node.inputs[0]])
        else:  # pragma: no cover - Graph.check rejects unknown kinds
            raise ValueError(f"linear analysis does not know node kind {kind!r}")
        comb[node.name] = v
    m = len(sources)
    exact_next = {s: comb[graph[s].inputs[0]] for s in states}
    A = np.zeros((n, n))
    B = np.zeros((n, m))
    for i, s in enumerate(states):
        for k, x in exact_next[s].items():
            if k < n:
                A[i, k] = float(x)
            else:
                B[i, k - n] = float(x)
    rows = {}
    for name, v in comb.items():
        c, d = np.zeros(n), np.zeros(m)
        for k, x in v.items():
            if k < n:
                c[k] = float(x)
            else:
                d[k - n] = float(x)
        rows[name] = (c, d)
    return LinearModel(
        graph.name,
        states,
        sources,
        A,
        B,
        rows,
        exact_next,
        comb,
        graph.output.name,
        coefficients,
    )


def state_space(graph: Graph, *, coefficients: str = "quantized"):
    """``(A, B, C, D)`` from the filter input to the output (float arrays).

    ``B`` is ``(n, 1)``, ``C`` is ``(1, n)``, ``D`` is ``(1, 1)``, as
    ``scipy.signal.StateSpace`` takes them.
    """
    model = linear_model(graph, coefficients=coefficients)
    c, d = model.rows[model.output]
    return model.A, model.B[:, :1].copy(), c[None, :].copy(), np.array([[d[0]]])


# -- structure ----------------------------------------------------------------------


def _closure(adj: np.ndarray, start: np.ndarray, forward: bool) -> np.ndarray:
    """Mask of states reached from ``start`` along ``adj[r, i] != 0`` (i -> r), or back."""
    seen = start.copy()
    frontier = start.copy()
    while frontier.any():
        nxt = adj[:, frontier].any(axis=1) if forward else adj[frontier, :].any(axis=0)
        nxt &= ~seen
        seen |= nxt
        frontier = nxt
    return seen


def _reachable(model: LinearModel, j: int) -> np.ndarray:
    """Mask of states reachable from source ``j`` (structurally, nonzero entries)."""
    key = ("reach", j)
    if key not in model.cache:
        model.cache[key] = _closure(model.A != 0.0, model.B[:, j] != 0.0, True)
    return model.cache[key]


def _observable(model: LinearModel, dsts) -> np.ndarray:
    """Mask of states that reach any of the nodes ``dsts`` (structurally)."""
    key = ("observe", tuple(dsts))
    if key not in model.cache:
        start = np.zeros(model.n_states, dtype=bool)
        for name in dsts:
            start |= model.row(name)[0] != 0.0
        model.cache[key] = _closure(model.A != 0.0, start, False)
    return model.cache[key]


def _has_loop(A: np.ndarray) -> bool:
    """Whether the nonzero pattern of ``A`` has a cycle (else A is nilpotent)."""
    adj = A != 0.0
    alive = np.ones(len(A), dtype=bool)
    while alive.any():
        # states with no dependency among the living ones can be evaluated: peel them off
        free = alive & ~(adj[:, alive].any(axis=1))
        if not free.any():
            return True
        alive &= ~free
    return False


def _subsystem(model: LinearModel, source: str, dsts):
    """Minimal structural subsystem ``(A, b, C, d, idx)`` for ``source -> dsts``."""
    dsts = list(dsts)
    j = model.source_index(source)
    keep = list(np.flatnonzero(_reachable(model, j) & _observable(model, dsts)))
    A = model.A[np.ix_(keep, keep)]
    b = model.B[keep, j]
    C = np.array([model.row(k)[0][keep] for k in dsts]).reshape(len(dsts), len(keep))
    d = np.array([model.row(k)[1][j] for k in dsts])
    return A, b, C, d, keep


def _spectral_radius(A: np.ndarray) -> float:
    return float(np.max(np.abs(np.linalg.eigvals(A)))) if len(A) else 0.0


# -- impulse and frequency responses --------------------------------------------------


def impulse_response(model: LinearModel, source: str, dsts, length: int) -> np.ndarray:
    """Impulse responses ``h[0..length-1]`` from ``source`` to each node in ``dsts``.

    Returns an array of shape ``(len(dsts), length)`` (``dsts`` may be one name).
    """
    single = isinstance(dsts, str)
    dsts = [dsts] if single else list(dsts)
    h = _impulse_sub(*_subsystem(model, source, dsts)[:4], length)
    return h[0] if single else h


def _exact_impulse(model: LinearModel, source: str, dsts, limit: int):
    """Exact finite impulse responses as lists of Fractions, or None if not finite.

    Finite means no loop is reachable from ``source`` on the way to ``dsts``.
    """
    A, _, _, _, keep = _subsystem(model, source, dsts)
    if _has_loop(A):
        return None
    n = model.n_states
    j = model.source_index(source)
    keep_set = set(keep)
    rows = [model.exact_rows[k] for k in dsts]
    out = [[r.get(n + j, Fraction(0))] for r in rows]
    # state after the impulse: s[1] = B[:, j]
    s = {}
    for i in keep:
        v = model.exact_next[model.states[i]].get(n + j)
        if v:
            s[i] = v
    steps = 0
    while s and steps <= limit:
        for r, h in zip(rows, out, strict=True):
            h.append(sum((r[i] * x for i, x in s.items() if i in r), Fraction(0)))
        nxt = {}
        for i in keep:
            row = model.exact_next[model.states[i]]
            v = sum((row[k] * x for k, x in s.items() if k in row), Fraction(0))
            if v:
                nxt[i] = v
        s = {i: v for i, v in nxt.items() if i in keep_set}
        steps += 1
    assert not s, "a loop-free subsystem must flush in at most n steps"
    return out


def _eval_polynomial(h: np.ndarray, w: np.ndarray) -> np.ndarray:
    """``sum_k h[..., k] e^{-jwk}`` for rows of ``h``."""
    z = np.exp(-1j * np.outer(np.arange(h.shape[-1]), w))
    return h @ z


def _impulse_sub(A, b, C, d, length: int) -> np.ndarray:
    h = np.zeros((len(C), length))
    if length:
        h[:, 0] = d
    s = b.copy()
    for k in range(1, length):
        h[:, k] = C @ s
        s = A @ s
    return h


def _response_sub(A, b, C, d, w: np.ndarray, loop: bool | None = None) -> np.ndarray:
    """``C (zI - A)^-1 b + d`` at ``z = e^{jw}`` for a subsystem (rows of ``C``)."""
    n = len(A)
    if loop is None:
        loop = _has_loop(A)
    if not loop:
        return _eval_polynomial(_impulse_sub(A, b, C, d, n + 1), w)
    H = np.empty((len(C), len(w)), dtype=complex)
    eye = np.eye(n)
    chunk = max(1, int(4e6 // max(1, n * n)))
    for lo in range(0, len(w), chunk):
        z = np.exp(1j * w[lo : lo + chunk])
        M = z[:, None, None] * eye[None] - A[None]
        X = np.linalg.solve(M, np.broadcast_to(b, (len(z), n))[..., None])[..., 0]
        H[:, lo : lo + chunk] = (X @ C.T).T + d[:, None]
    return H


def frequency_response(model: LinearModel, source: str, dsts, w) -> np.ndarray:
    """``H(e^{jw})`` from ``source`` to each node of ``dsts`` at angular frequencies ``w``.

    ``w`` in radians per sample. Returns shape ``(len(dsts), len(w))`` (or ``(len(w),)``
    for a single name). Loop-free paths are evaluated from their finite impulse
    response; others by solving ``(zI - A) X = b`` at every frequency.
    """
    single = isinstance(dsts, str)
    dsts = [dsts] if single else list(dsts)
    w = np.atleast_1d(np.asarray(w, dtype=float))
    H = _response_sub(*_subsystem(model, source, dsts)[:4], w)
    return H[0] if single else H


# -- norms ------------------------------------------------------------------------------


@dataclass(frozen=True)
class L1Parts:
    """Signed parts of ``sum h[n]`` for worst-case bounds, per destination node.

    ``positive = sum max(h, 0)`` and ``negative = sum min(h, 0)`` over the samples
    computed; ``tail`` bounds ``sum |h[n]|`` over the samples not computed (0 when the
    response is finite and summed exactly, ``inf`` for an unstable path). ``exact`` is
    True when ``positive``/``negative`` are exact Fractions.
    """

    positive: list
    negative: list
    tail: list
    exact: bool
    samples: int

    @property
    def l1(self) -> np.ndarray:
        """Upper bound of ``sum |h|`` per destination (float)."""
        return np.array(
            [
                float(p) - float(q) + t
                for p, q, t in zip(self.positive, self.negative, self.tail, strict=True)
            ]
        )


def l1_parts(
    model: LinearModel,
    source: str,
    dsts,
    *,
    rtol: float = 1e-10,
    max_samples: int = 1 << 21,
    block: int = 512,
) -> L1Parts:
    """Positive and negative sums of the impulse responses ``source -> dsts``.

    Notes
    -----
    Finite responses (no loop reachable) are summed exactly in Fractions. Otherwise the
    response is summed in blocks until a rigorous bound of the remaining tail is below
    ``rtol`` times the sum: with ``P`` solving ``A^T P A - P = -I`` (stable ``A``),
    ``||A v||_P <= rho ||v||_P`` with ``rho = sqrt(1 - 1/lambda_max(P))``, so for the state
    ``s`` after the last sample ``sum_k |c A^k s| <= sqrt(c P^-1 c^T) ||s||_P / (1 - rho)``.
    The bound is returned in ``tail`` (it is never dropped).
    """
    dsts = list(dsts)
    n_out = len(dsts)
    exact = _exact_impulse(model, source, dsts, model.n_states + 1)
    if exact is not None:
        pos = [sum((v for v in h if v > 0), Fraction(0)) for h in exact]
        neg = [sum((v for v in h if v < 0), Fraction(0)) for h in exact]
        return L1Parts(pos, neg, [0.0] * n_out, True, max(len(h) for h in exact))
    A, b, C, d, _ = _subsystem(model, source, dsts)
    pos = np.maximum(d, 0.0)
    neg = np.minimum(d, 0.0)
    if _spectral_radius(A) >= 1.0 - 1e-13:
        return L1Parts(list(pos), list(neg), [np.inf] * n_out, False, 1)
    n = len(A)
    P = scipy.linalg.solve_discrete_lyapunov(A.T, np.eye(n))
    P = 0.5 * (P + P.T)
    lam = np.linalg.eigvalsh(P)
    if lam[0] <= 0 or not np.all(np.isfinite(lam)):
        return L1Parts(list(pos), list(neg), [np.inf] * n_out, False, 1)
    rho = np.sqrt(max(0.0, 1.0 - 1.0 / lam[-1]))
    cnorm = np.sqrt(np.maximum(0.0, np.einsum("ij,ij->i", C @ np.linalg.inv(P), C)))
    s = b.copy()
    samples = 1
    S = np.empty((n, block))
    while True:
        for k in range(block):
            S[:, k] = s
            s = A @ s
        H = C @ S
        pos = pos + np.maximum(H, 0.0).sum(axis=1)
        neg = neg + np.minimum(H, 0.0).sum(axis=1)
        samples += block
        snorm = np.sqrt(max(0.0, float(s @ P @ s)))
        tail = cnorm * snorm / (1.0 - rho)
        if np.all(tail <= rtol * (pos - neg) + 1e-300) or samples >= max_samples:
            break
        if snorm == 0.0:
            break
    return L1Parts(list(pos), list(neg), list(tail), False, samples)


def l1_norm(model: LinearModel, source: str, dst: str, **kw) -> float:
    """``sum |h[n]|`` from ``source`` to ``dst`` (an upper bound within ``rtol``)."""
    return float(l1_parts(model, source, [dst], **kw).l1[0])


def l2_norm(model: LinearModel, source: str, dsts) -> np.ndarray | float:
    """``sqrt(sum h[n]^2)`` exactly from the discrete Lyapunov equation.

    With ``P = A P A^T + b b^T`` (controllability Gramian), ``sum h^2 = d^2 + c P c^T``.
    Returns ``inf`` for a path through an unstable loop.
    """
    single = isinstance(dsts, str)
    dsts = [dsts] if single else list(dsts)
    A, b, C, d, _ = _subsystem(model, source, dsts)
    if len(A) == 0:
        out = np.abs(d)
    elif _spectral_radius(A) >= 1.0:
        out = np.full(len(dsts), np.inf)
    else:
        P = scipy.linalg.solve_discrete_lyapunov(A, np.outer(b, b))
        out = np.sqrt(np.maximum(0.0, d**2 + np.einsum("ij,jk,ik->i", C, P, C)))
    return float(out[0]) if single else out


def _grid(model_A: np.ndarray, points: int) -> np.ndarray:
    w = np.linspace(0.0, np.pi, points)
    if len(model_A):
        ang = np.abs(np.angle(np.linalg.eigvals(model_A)))
        w = np.union1d(w, ang[(ang >= 0) & (ang <= np.pi)])
    return w


def linf_norm(
    model: LinearModel, source: str, dsts, *, points: int = 4096
) -> tuple[np.ndarray, np.ndarray] | tuple[float, float]:
    """``max_w |H(e^jw)|`` and the angular frequency where it is reached.

    A grid of ``points`` frequencies on ``[0, pi]`` plus the pole angles, then a bounded
    scalar search between the grid neighbours of the largest sample. ``inf`` for a path
    through an unstable loop.
    """
    single = isinstance(dsts, str)
    dsts = [dsts] if single else list(dsts)
    A, _, _, _, _ = _subsystem(model, source, dsts)
    if len(A) and _spectral_radius(A) >= 1.0:
        vals, freqs = np.full(len(dsts), np.inf), np.full(len(dsts), np.nan)
    else:
        w = _grid(A, points)
        H = np.abs(frequency_response(model, source, dsts, w))
        vals, freqs = np.empty(len(dsts)), np.empty(len(dsts))
        for i, name in enumerate(dsts):
            k = int(np.argmax(H[i]))
            best, wbest = H[i, k], w[k]
            lo, hi = w[max(k - 1, 0)], w[min(k + 1, len(w) - 1)]
            if hi > lo:
                sub = _subsystem(model, source, [name])[:4]
                if not _has_loop(sub[0]):
                    h = _impulse_sub(*sub, len(sub[0]) + 1)

                    def mag(x, h=h):
                        return -abs(_eval_polynomial(h, np.array([x]))[0, 0])
                else:

                    def mag(x, sub=sub):
                        return -abs(_response_sub(*sub, np.array([x]), loop=True)[0, 0])

                res = scipy.optimize.minimize_scalar(
                    mag, bounds=(lo, hi), method="bounded", options={"xatol": 1e-12}
                )
                if -res.fun > best:
                    best, wbest = -res.fun, float(res.x)
            vals[i], freqs[i] = best, wbest
    if single:
        return float(vals[0]), float(freqs[0])
    return vals, freqs


def noise_gains(model: LinearModel, sources=None, dst: str | None = None) -> dict[str, float]:
    """``sum_n g[n]^2`` from each source (default: every quantize node) to ``dst``.

    ``dst`` defaults to the output. One observability Gramian serves every source:
    ``W = A^T W A + c^T c``, ``sum g^2 = d_j^2 + b_j^T W b_j``.
    """
    dst = dst or model.output
    sources = list(model.sources[1:] if sources is None else sources)
    c, d = model.row(dst)
    keep = np.flatnonzero(_observable(model, [dst]))
    A = model.A[np.ix_(keep, keep)]
    out = {}
    W = None  # stays None for an unstable loop: infinite gains
    if len(keep) and _spectral_radius(A) < 1.0:
        W = scipy.linalg.solve_discrete_lyapunov(A.T, np.outer(c[keep], c[keep]))
    for s in sources:
        j = model.source_index(s)
        b = model.B[keep, j]
        if not len(keep) or not np.any(b):
            out[s] = float(d[j] ** 2)
        elif W is None:
            out[s] = np.inf
        else:
            out[s] = float(d[j] ** 2 + b @ W @ b)
    return out


def dc_gains(model: LinearModel, sources=None, dst: str | None = None) -> dict[str, float]:
    """``sum_n g[n]`` (the gain at z = 1) from each source to ``dst`` (default output)."""
    dst = dst or model.output
    sources = list(model.sources[1:] if sources is None else sources)
    out = {}
    for s in sources:
        A, b, C, d, _ = _subsystem(model, s, [dst])
        if len(A) == 0:
            out[s] = float(d[0])
        elif _spectral_radius(A) >= 1.0:
            out[s] = np.nan
        else:
            out[s] = float(d[0] + C[0] @ np.linalg.solve(np.eye(len(A)) - A, b))
    return out


def transfer_function(model: LinearModel, source: str, dst: str) -> tuple[np.ndarray, np.ndarray]:
    """``(b, a)`` in powers of z^-1 (``a[0] == 1``) of the path ``source -> dst``.

    From the minimal structural subsystem by ``scipy.signal.ss2tf``; both arrays have
    ``n + 1`` entries for ``n`` states in that subsystem. Numerically it shares the
    weakness of every polynomial form for high orders: prefer the state space.
    """
    import scipy.signal

    A, b, C, d, _ = _subsystem(model, source, [dst])
    if len(A) == 0:
        return np.array([float(d[0])]), np.array([1.0])
    num, den = scipy.signal.ss2tf(A, b[:, None], C, d[:, None])
    return np.asarray(num[0], dtype=float), np.asarray(den, dtype=float)


def poles(graph_or_model, *, coefficients: str = "quantized") -> np.ndarray:
    """Eigenvalues of ``A``: the poles of the structure (quantized coefficients by default)."""
    model = (
        graph_or_model
        if isinstance(graph_or_model, LinearModel)
        else linear_model(graph_or_model, coefficients=coefficients)
    )
    return np.linalg.eigvals(model.A) if model.n_states else np.zeros(0, dtype=complex)
