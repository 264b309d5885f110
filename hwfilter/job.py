"""The whole job in one call: from a filter file to a proven, estimated, reported build.

Steps, each announced on the progress stream::

    load and validate -> realize -> assign formats -> analyze
    -> generate Verilog and testbench -> verify bit-exact -> estimate -> report

Everything is written to a staging folder beside the target and renamed into place at
the end: a failed or interrupted build leaves no partial folder. A failed verdict
(unstable structure, hardware/reference mismatch, response spec missed) still writes the
build and the report, but the exit status is 1 and the summary says what to change.
"""

from __future__ import annotations

import dataclasses
import os
import shutil
import subprocess
import sys
import tempfile
import time
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from . import __version__
from .errors import QuantizationWarning
from .pipeline import float_graph, quantized_graph
from .spec import FilterSpec, load

__all__ = ["JobResult", "run_job", "DEFAULT_DEVICE", "advice", "STEPS"]

#: device profile used when neither the command line nor the filter file names one
DEFAULT_DEVICE = "ecp5-25k"
STEPS = (
    "load and validate",
    "realize",
    "assign formats",
    "analyze",
    "generate Verilog and testbench",
    "verify bit-exact",
    "estimate",
    "report",
)
#: samples of the long Verilator run (when Verilator is installed)
LONG_RUN_SAMPLES = 100_000


@dataclass
class JobResult:
    """What the build decided: exit status, the results dict, the summary lines."""

    exit_code: int
    results: dict
    summary: list[str] = field(default_factory=list)
    out_dir: Path | None = None


class _Progress:
    def __init__(self, stream):
        self.stream = stream
        self.k = 0
        self.t0 = time.monotonic()

    def step(self, what: str, detail: str = ""):
        self.k += 1
        t = time.monotonic() - self.t0
        extra = f": {detail}" if detail else ""
        if self.stream is not None:
            print(
                f"[{self.k}/{len(STEPS)}] {what}{extra} ({t:.1f} s)", file=self.stream, flush=True
            )

    def note(self, text: str):
        if self.stream is not None:
            print(f"      {text}", file=self.stream, flush=True)


# -- advice ---------------------------------------------------------------------------


def _with_bits(spec: FilterSpec, bits: int) -> FilterSpec:
    return dataclasses.replace(spec, fixed=dataclasses.replace(spec.fixed, coefficient_bits=bits))


def _quiet_graph(spec, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", QuantizationWarning)
        return quantized_graph(spec, **kw)


def advice(spec: FilterSpec, analysis: dict, *, form=None, section=None) -> list[str]:
    """What to change when a verdict failed, found by trying the change.

    Instability: the fewest coefficient bits (up to 16 more) that make the structure
    stable, and whether the cascade is stable at today's bits. A missed spec: the fewest
    coefficient bits that meet it.
    """
    from .analysis import response_deviation
    from .stability import stability

    out = []
    cb = spec.fixed.coefficient_bits
    if not analysis["stable"]:
        for bits in range(cb + 1, cb + 17):
            if stability(_quiet_graph(_with_bits(spec, bits), form=form, section=section)).stable:
                out.append(f"coefficient_bits {cb} -> {bits} restores stability")
                break
        else:
            out.append(f"no coefficient word up to {cb + 16} bits makes this structure stable")
        if (form or spec.realization.form) in (
            "direct-form-1",
            "direct-form-2",
            "transposed-direct-form-2",
        ) and not spec.is_fir:
            g = _quiet_graph(spec, form="cascade")
            if stability(g).stable:
                out.append(f'form = "cascade" is stable with the same {cb}-bit coefficients')
    elif analysis["response"].get("spec_met") is False:
        if analysis["response"].get("design_meets_spec") is False:
            out.append("the float design itself misses the [spec]: change the design first")
        else:
            for bits in range(cb + 1, cb + 17):
                g = _quiet_graph(_with_bits(spec, bits), form=form, section=section)
                resp = response_deviation(g, None, **_response_kwargs(spec))
                if resp["spec_met"]:
                    out.append(f"coefficient_bits {cb} -> {bits} meets the response spec")
                    break
            else:
                out.append(
                    f"no coefficient word up to {cb + 16} bits meets the spec here; "
                    'try form = "cascade"'
                )
    return out


# -- steps ----------------------------------------------------------------------------


def _response_kwargs(spec: FilterSpec) -> dict:
    """The file's ``[spec]`` as the keyword arguments of the response checks."""
    r = spec.response
    if r is None:
        return {}
    return dict(
        passband=r.passband,
        stopband=r.stopband,
        passband_ripple_db=r.passband_ripple_db,
        stopband_attenuation_db=r.stopband_attenuation_db,
        sample_rate=spec.sample_rate,
    )


def _analyze(spec, g, fg):
    from .analysis import analyze

    return analyze(
        g,
        fg,
        scaling=spec.fixed.scaling,
        overridden=tuple(spec.fixed.nodes),
        **_response_kwargs(spec),
    )


def _run_emitted_testbench(build_dir: Path, module: str, simulator: str) -> dict:
    """Run the emitted testbench unchanged, in a scratch copy of the build folder."""
    names = [f"{module}.v", f"{module}_tb.v", f"{module}_in.hex", f"{module}_expected.hex"]
    with tempfile.TemporaryDirectory(prefix="hwfilter-tb-") as wd:
        for n in names:
            shutil.copy(build_dir / n, wd)
        if simulator == "iverilog":
            cmds = [
                ["iverilog", "-g2005", "-o", "tb.vvp", f"{module}_tb.v", f"{module}.v"],
                ["vvp", "-n", "tb.vvp"],
            ]
        else:
            cmds = [
                [
                    "verilator",
                    "--binary",
                    "-Wno-fatal",
                    "-j",
                    "2",
                    "--top-module",
                    f"{module}_tb",
                    "-o",
                    "tb",
                    f"{module}_tb.v",
                    f"{module}.v",
                ],
                ["obj_dir/tb"],
            ]
        out = ""
        for cmd in cmds:
            r = subprocess.run(cmd, cwd=wd, capture_output=True, text=True, timeout=900)
            out = r.stdout + r.stderr
            if r.returncode != 0:
                break
        line = next((ln for ln in reversed(out.splitlines()) if ln.startswith("checked ")), "")
        return {
            "simulator": f"{simulator} (emitted testbench)",
            "passed": r.returncode == 0 and " 0 mismatches" in line,
            "summary": line or out.strip()[-300:],
        }


def _verify(g, pipelining, manifest, build_dir: Path, progress) -> list[dict]:
    from .hdl.simulate import first_mismatch, idle_pattern, run_amaranth, run_verilator
    from .hdl.vectors import vector_set
    from .reference import simulate_integer

    runs = []
    vec = vector_set(g, manifest["vectors"]["samples"], seed=manifest["vectors"]["seed"])
    expected = simulate_integer(g, vec.words).output
    res = run_amaranth(g, vec.words, pipelining=pipelining, idle=idle_pattern(len(vec.words), 7))
    mm = first_mismatch(vec.words, expected, res.output)
    runs.append(
        {
            "simulator": "amaranth",
            "samples": len(vec.words),
            "passed": mm is None,
            "summary": mm.describe() if mm else f"{len(vec.words)} samples, 0 mismatches",
        }
    )
    progress.note(f"amaranth: {runs[-1]['summary']}")
    module = manifest["module"]
    for tool in ("iverilog",):
        if shutil.which(tool) is None:
            runs.append({"simulator": tool, "passed": None, "summary": f"{tool} not installed"})
            progress.note(f"{tool}: not installed, skipped")
            continue
        r = _run_emitted_testbench(build_dir, module, tool)
        r["samples"] = len(vec.words)
        runs.append(r)
        progress.note(f"{r['simulator']}: {r['summary']}")
    if shutil.which("verilator") is not None and g.input.format.bits <= 64:
        x = np.random.default_rng(2).integers(
            g.input.format.min_int, g.input.format.max_int, size=LONG_RUN_SAMPLES, endpoint=True
        )
        want = simulate_integer(g, x).output
        got = run_verilator(g, x, pipelining=pipelining).output
        mm = first_mismatch(x, want, got)
        runs.append(
            {
                "simulator": "verilator (long run)",
                "samples": LONG_RUN_SAMPLES,
                "passed": mm is None,
                "summary": mm.describe()
                if mm
                else f"{LONG_RUN_SAMPLES} random full-scale samples, 0 mismatches",
            }
        )
        progress.note(f"verilator long run: {runs[-1]['summary']}")
    return runs


def _estimates(spec, g, device, clock_mhz, pipelining, compare: bool):
    """The estimate of the built realization and, with ``compare``, of every other one."""
    from .boards import load_profile
    from .commands.estimate import compare as compare_all
    from .estimate import estimate

    profile = load_profile(device)
    main = estimate(g, profile, pipelining=pipelining, clock_mhz=clock_mhz).as_dict()
    rows = []
    if compare:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", QuantizationWarning)
            rows = compare_all(spec, profile, clock_mhz=clock_mhz, pipelining=pipelining)
    for row in rows:
        row["realization"] = row["form"] + (f" of {row['section']}" if row.get("section") else "")
        row["chosen"] = (row["form"], row.get("section") or "") == (g.form, g.section_form)
    return profile, main, rows


# -- plots ----------------------------------------------------------------------------


def _images(spec, g, fg, analysis) -> dict[str, bytes]:
    from scipy import signal as sps

    from . import plots
    from .linear import frequency_response, linear_model, poles
    from .noise import busy_input, predict_noise
    from .reference import simulate_float, simulate_integer

    fs = spec.sample_rate
    w = np.linspace(0, np.pi, 4096)
    f, unit = (w * fs / (2 * np.pi), "Hz") if fs else (w / np.pi, "x Nyquist")
    mq = linear_model(g, coefficients="quantized")
    md = linear_model(fg, coefficients="design")
    hq = frequency_response(mq, mq.sources[0], mq.output, w)
    hd = frequency_response(md, md.sources[0], md.output, w)
    images = {
        "Magnitude response, float design vs quantized coefficients": plots.magnitude_plot(
            f, hd, hq, spec=spec.response if fs else None, unit=unit
        )
    }
    if spec.response is not None and spec.response.passband and fs:
        images["Passband zoom with the spec window"] = plots.magnitude_plot(
            f, hd, hq, spec=spec.response, zoom=True, unit=unit
        )
    pd = poles(fg, coefficients="design")
    pq = poles(g, coefficients="quantized")
    zd = spec.zpk[0] if spec.zpk is not None else np.roots(np.trim_zeros(spec.b, "b"))
    zq = None
    try:
        from .linear import state_space

        A, B, C, D = state_space(g, coefficients="quantized")
        if 0 < len(A) <= 40:
            zq = sps.ss2zpk(A, B, C, D)[0]
    except (ValueError, np.linalg.LinAlgError):
        zq = None
    images["Poles and zeros, design vs quantized structure"] = plots.pole_zero_plot(pd, zd, pq, zq)
    radius = float(np.max(np.abs(pd))) if len(pd) else 0.0
    n_imp = (
        64 if radius < 1e-9 else int(np.clip(np.log(1e-4) / np.log(min(radius, 0.9999)), 64, 4096))
    )
    n_imp = max(n_imp, len(g.delays) + 8)
    fin, fout = g.input.format, g.output.format
    x = np.zeros(n_imp, dtype=np.int64)
    x[0] = fin.max_int
    amp = float(fin.to_float(fin.max_int))
    yq = fout.to_float(simulate_integer(g, x).output) / amp
    yd = simulate_float(fg, fin.to_float(x), coefficients="design") / amp
    images["Impulse response, float design vs bit-exact model"] = plots.impulse_plot(yd, yq)
    if analysis["stable"]:
        xb = busy_input(g, 1 << 15, rms=0.25 * float(abs(fin.min_value)), seed=3)
        y_int = np.asarray(simulate_integer(g, xb).output, dtype=float)
        y_ref = simulate_float(g, fin.to_float(xb), coefficients="quantized") * 2.0**fout.frac
        err = (y_int - y_ref)[2000:]
        fw, psd = sps.welch(err, fs=2 * np.pi, nperseg=1024)
        pred = predict_noise(g, mq)
        wf = fw  # rad/sample on [0, pi]
        floor = np.zeros_like(wf)
        for s in pred.sources:
            if s.power_lsb2 <= 0:
                continue
            gain = frequency_response(mq, s.name, mq.output, wf)
            scale = 2.0 ** (fout.frac - g[s.name].format.frac)
            floor += s.variance * scale**2 * np.abs(gain) ** 2 / np.pi
        ff = wf * fs / (2 * np.pi) if fs else wf / np.pi
        images["Output error spectrum: measured vs predicted roundoff noise"] = (
            plots.error_spectrum_plot(ff, psd, floor, unit=unit)
        )
    names = [n.name for n in g.nodes if n.kind in ("input", "quantize", "delay", "add")]
    images["Word lengths per node (integer and fraction bits)"] = plots.word_length_plot(
        names, [g[n].format.bits for n in names], [g[n].format.frac for n in names]
    )
    return images


# -- the job --------------------------------------------------------------------------


def _stage_dir(out: Path) -> Path:
    out.parent.mkdir(parents=True, exist_ok=True)
    return Path(tempfile.mkdtemp(prefix=f".{out.name}.job-", dir=out.parent))


def _install(stage: Path, out: Path):
    """Move the finished build into place (replacing an earlier build).

    The staging folder and report files come from ``mkdtemp``/``mkstemp`` (private); the
    build gets the usual permissions (0777/0666 less the umask) first.
    """
    umask = os.umask(0)
    os.umask(umask)
    stage.chmod(0o777 & ~umask)
    for f in stage.iterdir():
        f.chmod(0o666 & ~umask)
    old = None
    if out.exists():
        old = out.with_name(f".{out.name}.old-{os.getpid()}")
        os.replace(out, old)
    os.replace(stage, out)
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)


def run_job(
    path,
    out_dir,
    *,
    device: str | None = None,
    clock_mhz: float | None = None,
    pipelining: str | None = None,
    samples: int = 2048,
    seed: int = 1,
    compare: bool = True,
    progress=sys.stderr,
) -> JobResult:
    """Run the whole job on filter file ``path`` into ``out_dir`` (see the module doc)."""
    from .hdl.build import check_target, write_build
    from .report import CAUTION, render_html, to_json
    from .signals import atomic_write_text

    out = Path(out_dir)
    check_target(out)
    pr = _Progress(progress)
    spec = load(path)
    pr.step(STEPS[0], f"{spec.name} from {spec.source}")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", QuantizationWarning)
        fg = float_graph(spec)
        c = fg.counts()
        pr.step(
            STEPS[1],
            f"{fg.form}{' of ' + fg.section_form if fg.section_form else ''}: "
            f"{c['gain']} gains, {c['adders']} adders, {c['delay']} delays",
        )
        g = quantized_graph(spec)
        pr.step(STEPS[2], f"scaling {spec.fixed.scaling}, {len(g.of_kind('quantize'))} quantizers")
    for w in caught:
        pr.note(f"warning: {w.message}")
    a = _analyze(spec, g, fg)
    pr.step(
        STEPS[3],
        f"{'stable' if a['stable'] else 'UNSTABLE'}, max |pole| "
        f"{a['max_pole_radius']:.6f}, predicted noise {a['noise']['predicted_db']:.2f} dB "
        "re 1 LSB^2",
    )
    pipe = pipelining or spec.hardware.pipelining
    stage = _stage_dir(out)
    try:
        build_dir = stage / "build"
        manifest = write_build(g, build_dir, pipelining=pipe, samples=samples, seed=seed)
        pr.step(
            STEPS[4],
            f"module {manifest['module']}, latency {manifest['latency_cycles']}, "
            f"{manifest['cycles_per_sample']} clock(s) per sample",
        )
        runs = _verify(g, pipe, manifest, build_dir, pr) if a["stable"] else []
        bit_exact = all(r["passed"] for r in runs if r["passed"] is not None) if runs else None
        pr.step(
            STEPS[5],
            "all simulators agree with the reference model"
            if bit_exact
            else ("skipped: the structure is unstable" if bit_exact is None else "MISMATCH"),
        )
        dev = device or spec.device or DEFAULT_DEVICE
        profile, est, rows = _estimates(spec, g, dev, clock_mhz, pipe, compare)
        pr.step(
            STEPS[6],
            f"{profile.name}: {est['dsp_blocks']:g} DSP blocks, {est['luts']} "
            f"LUTs, {est['registers']} flip-flops, Fmax {est['fmax_mhz']:.1f} MHz",
        )
        tips = advice(spec, a)
        if bit_exact is False:
            tips.append(
                "the hardware disagrees with the reference model: this is a bug in "
                "hwfilter; please report it with this build folder"
            )
        resp = a["response"]
        results = {
            "name": spec.name,
            "source": spec.source,
            "generator": f"hwfilter {__version__}",
            "realization": a["realization"],
            "device": profile.name,
            "estimate_accuracy": profile.accuracy_notes(),
            "pipelining": pipe,
            "caution": CAUTION,
            "verdicts": {
                "stable": a["stable"],
                "max_pole_radius": a["max_pole_radius"],
                "overflow_free": not a["overflow_possible"],
                "overflow_reason": (
                    f"(proven by the {spec.fixed.scaling} worst case)"
                    if not a["overflow_possible"]
                    else f"(possible at {', '.join(a['overflow_nodes'])}; "
                    f"{spec.fixed.overflow} applies)"
                ),
                "limit_cycle_lsb": a["limit_cycle_lsb"],
                "spec_met": resp.get("spec_met"),
                "bit_exact": bit_exact,
                "bit_exact_detail": "; ".join(f"{r['simulator']}: {r['summary']}" for r in runs),
            },
            "sqnr": a["sqnr"],
            "advice": tips,
            "nodes": [{**n, "norm": n.get("norm")} for n in a["nodes"]],
            "noise": [
                {
                    "name": s["name"],
                    "bits_dropped": s["dropped_bits"],
                    "gain": s["noise_gain"],
                    "power_lsb2": s["power_lsb2"],
                    "mean_lsb": s["dc_lsb"],
                }
                for s in a["noise"]["sources"]
            ],
            "analysis": a,
            "verification": runs,
            "estimate": est,
            "resources": rows,
            "build": manifest,
        }
        images = _images(spec, g, fg, a)
        for name in os.listdir(build_dir):
            os.replace(build_dir / name, stage / name)
        build_dir.rmdir()
        results["files"] = sorted(os.listdir(stage)) + ["report.html", "report.json"]
        atomic_write_text(stage / "report.json", to_json(results))
        atomic_write_text(stage / "report.html", render_html(results, images))
        pr.step(STEPS[7], f"{len(images)} plots")
        _install(stage, out)
    except BaseException:
        shutil.rmtree(stage, ignore_errors=True)
        raise
    failed = (not a["stable"]) or bit_exact is False or resp.get("spec_met") is False
    return JobResult(1 if failed else 0, results, _summary(results, out), out)


def _summary(r: dict, out: Path) -> list[str]:
    v = r["verdicts"]
    e = r["estimate"]
    yes = {True: "yes", False: "NO", None: "not checked"}
    lines = [
        f"{r['name']}: {r['realization']} on {r['device']}",
        f"  stable: {yes[v['stable']]} (max |pole| {v['max_pole_radius']:.6f})",
        f"  overflow-free: {yes[v['overflow_free']]} {v['overflow_reason']}",
        f"  limit cycles: {'none found' if not v['limit_cycle_lsb'] else str(v['limit_cycle_lsb']) + ' LSB'}",  # noqa: E501
        f"  response spec met: {yes[v['spec_met']] if v['spec_met'] is not None else 'no spec given'}",  # noqa: E501
        f"  bit-exact in simulation: {yes[v['bit_exact']]}",
        f"  SQNR predicted {_num(r['sqnr'].get('predicted_db'))} dB, measured "
        f"{_num(r['sqnr'].get('measured_db'))} dB ({r['sqnr'].get('input', '')})",
        f"  resources: {e['multipliers']} multipliers, {e['dsp_blocks']:g} DSP blocks, "
        f"{e['luts']} LUTs, {e['registers']} flip-flops; Fmax {e['fmax_mhz']:.1f} MHz; "
        f"latency {e['latency_cycles']} clock(s); fits {r['device']}: {yes[e['fits']]}",
        f"  files in {out}: {', '.join(r['files'])}",
    ]
    for tip in r["advice"]:
        lines.append(f"  advice: {tip}")
    lines.append("  caution: estimates are not sign-off; verify on the target hardware.")
    return lines


def _num(v) -> str:
    return "n/a" if v is None else f"{v:.2f}"
