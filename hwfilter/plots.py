"""Plots for the report (matplotlib, off-screen), each returned as PNG bytes.

Every function takes plain arrays and numbers, so the report decides what to show and
the plots stay testable without a filter.
"""

from __future__ import annotations

import io

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

__all__ = [
    "magnitude_plot",
    "pole_zero_plot",
    "impulse_plot",
    "error_spectrum_plot",
    "word_length_plot",
]

_DB_FLOOR = 1e-12


def _png(fig) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=90, bbox_inches="tight")
    plt.close(fig)
    return buf.getvalue()


def _db(h):
    return 20 * np.log10(np.maximum(np.abs(h), _DB_FLOOR))


def _mask(ax, spec, ripple_ref_db=0.0, stopband=True):
    """Shade the spec: passband ripple window and stopband ceiling."""
    if spec is None:
        return
    if spec.passband_ripple_db is not None:
        for lo, hi in spec.passband:
            ax.fill_between(
                [lo, hi],
                ripple_ref_db - spec.passband_ripple_db,
                ripple_ref_db,
                color="tab:green",
                alpha=0.15,
                lw=0,
                label="passband window",
            )
    if stopband and spec.stopband_attenuation_db is not None:
        for lo, hi in spec.stopband:
            ax.plot(
                [lo, hi],
                [ripple_ref_db - spec.stopband_attenuation_db] * 2,
                color="tab:red",
                lw=2,
                label="stopband ceiling",
            )


def magnitude_plot(
    f, h_design, h_quantized, *, spec=None, zoom: bool = False, unit: str = "Hz"
) -> bytes:
    """Magnitude in dB, design vs quantized coefficients; ``zoom`` shows the passband."""
    fig, ax = plt.subplots(figsize=(7.5, 3.6))
    d, q = _db(h_design), _db(h_quantized)
    ax.plot(f, d, label="float design", lw=1.4)
    ax.plot(f, q, "--", label="quantized coefficients", lw=1.2)
    ref = float(np.max(d))
    _mask(ax, spec, ref, stopband=not zoom)
    if zoom and spec is not None and spec.passband:
        lo = min(b[0] for b in spec.passband)
        hi = max(b[1] for b in spec.passband)
        ax.set_xlim(lo, hi)
        sel = (f >= lo) & (f <= hi)
        span = max(spec.passband_ripple_db or 1.0, float(np.ptp(q[sel])) if sel.any() else 1.0)
        ax.set_ylim(ref - 1.5 * span, ref + 0.5 * span)
        ax.set_title("Passband (zoom)")
    else:
        ax.set_ylim(max(min(float(np.min(d)), float(np.min(q))), ref - 140) - 5, ref + 5)
        ax.set_title("Magnitude response")
    ax.set_xlabel(f"frequency ({unit})")
    ax.set_ylabel("dB")
    ax.grid(True, alpha=0.3)
    handles, labels = ax.get_legend_handles_labels()
    uniq = dict(zip(labels, handles))
    ax.legend(uniq.values(), uniq.keys(), fontsize=8, loc="best")
    return _png(fig)


def pole_zero_plot(poles_design, zeros_design, poles_quantized, zeros_quantized=None) -> bytes:
    """Pole-zero plot, design vs quantized structure, with the unit circle."""
    fig, ax = plt.subplots(figsize=(4.6, 4.6))
    t = np.linspace(0, 2 * np.pi, 512)
    ax.plot(np.cos(t), np.sin(t), color="0.6", lw=1)
    pd, pq = np.asarray(poles_design), np.asarray(poles_quantized)
    ax.plot(pd.real, pd.imag, "x", ms=9, mew=1.5, label="design poles")
    ax.plot(pq.real, pq.imag, "+", ms=11, mew=1.5, label="quantized poles")
    zd = np.asarray(zeros_design)
    if zd.size:
        ax.plot(zd.real, zd.imag, "o", mfc="none", ms=8, label="design zeros")
    if zeros_quantized is not None and np.size(zeros_quantized):
        zq = np.asarray(zeros_quantized)
        ax.plot(zq.real, zq.imag, ".", ms=6, label="quantized zeros")
    ax.set_aspect("equal")
    lim = max(1.1, float(np.max(np.abs(np.concatenate([pd, pq, zd, [1.0]])))) * 1.05)
    lim = min(lim, 3.0)
    ax.set_xlim(-lim, lim)
    ax.set_ylim(-lim, lim)
    ax.grid(True, alpha=0.3)
    ax.set_title("Poles and zeros")
    ax.legend(fontsize=7, loc="upper left", bbox_to_anchor=(1.02, 1.0))
    return _png(fig)


def impulse_plot(h_design, h_quantized) -> bytes:
    """Impulse response: float design vs bit-exact model (output units)."""
    fig, ax = plt.subplots(figsize=(7.5, 3.0))
    n = np.arange(len(h_design))
    ax.plot(n, h_design, lw=1.2, label="float design")
    ax.plot(n, h_quantized, ".", ms=3, label="bit-exact model")
    ax.set_xlabel("sample")
    ax.set_ylabel("output")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8)
    ax.set_title("Impulse response")
    return _png(fig)


def error_spectrum_plot(f, psd_measured, predicted_floor, *, unit: str = "Hz") -> bytes:
    """Output error power spectral density measured (Welch) vs the predicted floor.

    Both in output LSB^2 per bin-normalized unit; ``predicted_floor`` is an array over
    ``f`` (the predicted noise shaped by each quantizer's gain) or a constant.
    """
    fig, ax = plt.subplots(figsize=(7.5, 3.2))
    ax.plot(f, 10 * np.log10(np.maximum(psd_measured, _DB_FLOOR)), lw=1, label="measured error")
    pf = np.broadcast_to(np.asarray(predicted_floor, float), np.shape(f))
    ax.plot(f, 10 * np.log10(np.maximum(pf, _DB_FLOOR)), lw=1.6, label="predicted roundoff noise")
    ax.set_xlabel(f"frequency ({unit})")
    ax.set_ylabel("dB re 1 LSB^2 / (rad/sample)")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8)
    ax.set_title("Output error spectrum")
    return _png(fig)


def word_length_plot(names, bits, fracs) -> bytes:
    """Per-node word lengths: a bar from -frac to the integer bits around the binary point."""
    names = list(names)
    bits = np.asarray(bits)
    fracs = np.asarray(fracs)
    fig, ax = plt.subplots(figsize=(7.5, 0.28 * len(names) + 1.2))
    y = np.arange(len(names))[::-1]
    lsb, msb = -fracs, bits - fracs  # bit positions [lsb, msb) around the binary point
    i_lo, i_hi = np.maximum(lsb, 0), np.maximum(msb, 0)
    f_lo, f_hi = np.minimum(lsb, 0), np.minimum(msb, 0)
    ax.barh(y, i_hi - i_lo, left=i_lo, color="tab:orange", label="integer bits (with sign)")
    ax.barh(y, f_hi - f_lo, left=f_lo, color="tab:blue", label="fraction bits")
    ax.axvline(0, color="k", lw=0.8)
    ax.set_yticks(y)
    ax.set_yticklabels(names, fontsize=7)
    ax.set_xlabel("bit position relative to the binary point")
    ax.set_title("Word lengths per node")
    ax.legend(fontsize=7, loc="lower right")
    ax.grid(True, axis="x", alpha=0.3)
    return _png(fig)
