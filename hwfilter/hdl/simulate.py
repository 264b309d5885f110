"""Run the generated design cycle by cycle and compare it with the bit-exact reference.

Three simulators, one result type (:class:`RunResult`):

- :func:`run_amaranth`: Amaranth's own simulator on the :class:`~hwfilter.hdl.FilterCore`
  (slow, a few thousand cycles per second: short runs, and the only one writing VCD);
- :func:`run_iverilog`: the emitted Verilog and self-checking testbench under Icarus;
- :func:`run_verilator`: the emitted Verilog compiled by Verilator with a small C++
  harness (millions of cycles per second: the path for long runs).

All three drive the design the same way: reset, then one sample offered per clock while
``i.ready`` allows (so at the design's rate), optionally with idle cycles (``i.valid``
low) in between; every ``o.valid`` cycle yields one output word.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..graph import Graph
from ..reference import simulate_integer
from .core import FilterCore
from .plan import plan as make_plan
from .testbench import harness_cpp, write_testbench_files
from .verilog import generate_verilog, module_name

__all__ = [
    "RunResult",
    "Mismatch",
    "SIMULATORS",
    "run_amaranth",
    "run_iverilog",
    "run_verilator",
    "build_verilator",
    "first_mismatch",
    "idle_pattern",
    "ToolError",
]

SIMULATORS = ("amaranth", "iverilog", "verilator")


class ToolError(RuntimeError):
    """An external tool failed (not a mismatch: the design could not be run)."""


@dataclass
class RunResult:
    """Output words of one simulation, and when the handshakes happened.

    ``accept_cycles[k]`` is the clock cycle in which input ``k`` was taken and
    ``output_cycles[k]`` the cycle after whose edge output ``k`` was valid (Amaranth only;
    empty for the others). ``passed`` and ``summary`` come from the Verilog testbench's own
    check where one ran.
    """

    simulator: str
    output: np.ndarray
    cycles: int
    accept_cycles: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    output_cycles: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    passed: bool | None = None
    summary: str = ""


@dataclass
class Mismatch:
    """The first output that differs from the reference, with the inputs that led to it."""

    index: int
    expected: int | None
    got: int | None
    history: list[int]

    def describe(self) -> str:
        got = "nothing (too few outputs)" if self.got is None else str(self.got)
        hist = ", ".join(str(v) for v in self.history)
        return (
            f"sample {self.index}: expected {self.expected}, got {got}; "
            f"inputs x[{max(0, self.index - len(self.history) + 1)}..{self.index}] = [{hist}]"
        )


def first_mismatch(x, expected, got, *, history: int = 8) -> Mismatch | None:
    """The first index where ``got`` differs from ``expected`` (or is missing), or None."""
    expected = [int(v) for v in expected]
    got = [int(v) for v in got]
    for i, e in enumerate(expected):
        g = got[i] if i < len(got) else None
        if g != e:
            lo = max(0, i - history + 1)
            return Mismatch(i, e, g, [int(v) for v in x[lo : i + 1]])
    if len(got) > len(expected):
        i = len(expected)
        return Mismatch(i, None, got[i], [])
    return None


def idle_pattern(n: int, seed: int, fraction: float = 0.25) -> np.ndarray:
    """Booleans: True where the driver leaves ``i.valid`` low for one cycle (random)."""
    return np.random.default_rng(seed).random(n) < fraction


# -- Amaranth ---------------------------------------------------------------------------
def run_amaranth(
    graph: Graph,
    x,
    *,
    pipelining: str = "none",
    idle=None,
    vcd: str | os.PathLike | None = None,
    reset_at: int | None = None,
) -> RunResult:
    """Simulate the Amaranth component on input words ``x``.

    Parameters
    ----------
    idle : array of bool, optional
        Per driver cycle, whether to hold ``i.valid`` low (cycles beyond its end: no idle).
    vcd : path, optional
        Write the waveforms there.
    reset_at : int, optional
        Pulse the synchronous reset for one cycle after this many inputs were accepted
        (tests that reset clears all state).
    """
    from amaranth.hdl import ClockDomain, Module
    from amaranth.sim import Simulator

    xs = [int(v) for v in np.asarray(x).ravel()]
    core = FilterCore(graph, pipelining=pipelining)
    p = core.plan
    idle = np.zeros(0, bool) if idle is None else np.asarray(idle, bool)
    limit = (len(xs) + int(idle.sum()) + 4) * p.cycles_per_sample + p.latency_cycles + 16
    outputs: list[int] = []
    accepted: list[int] = []
    produced: list[int] = []
    state = {"cycles": 0}

    async def bench(ctx):
        n = cycle = 0
        did_reset = False
        while len(outputs) < len(xs) and cycle < limit:
            if reset_at is not None and not did_reset and n == reset_at:
                # let earlier samples drain, then clear everything with one reset cycle
                for _ in range(p.latency_cycles + p.cycles_per_sample):
                    ctx.set(core.i.valid, 0)
                    await ctx.tick()
                    cycle += 1
                    if ctx.get(core.o.valid):
                        outputs.append(ctx.get(core.o.payload))
                        produced.append(cycle)
                ctx.set(domain.rst, 1)
                await ctx.tick()
                ctx.set(domain.rst, 0)
                cycle += 1
                did_reset = True
                continue
            offer = n < len(xs) and not (cycle < len(idle) and idle[cycle])
            ctx.set(core.i.valid, int(offer))
            if offer:
                ctx.set(core.i.payload, xs[n])
            ready = ctx.get(core.i.ready)
            await ctx.tick()
            if offer and ready:
                accepted.append(cycle)
                n += 1
            cycle += 1
            if ctx.get(core.o.valid):
                outputs.append(ctx.get(core.o.payload))
                produced.append(cycle)
        state["cycles"] = cycle

    top = Module()
    top.domains.sync = domain = ClockDomain("sync")
    top.submodules.core = core
    sim = Simulator(top)
    sim.add_clock(1e-8)
    sim.add_testbench(bench)
    if vcd is not None:
        with sim.write_vcd(os.fspath(vcd)):
            sim.run()
    else:
        sim.run()
    return RunResult(
        "amaranth",
        np.array(outputs, dtype=object),
        state["cycles"],
        np.array(accepted, dtype=np.int64),
        np.array(produced, dtype=np.int64),
    )


# -- Icarus -----------------------------------------------------------------------------
def _run(cmd: list[str], cwd: Path, what: str, timeout: float = 600) -> subprocess.CompletedProcess:
    try:
        return subprocess.run(
            cmd, cwd=cwd, capture_output=True, text=True, timeout=timeout, check=False
        )
    except FileNotFoundError as e:
        raise ToolError(f"{what} is not installed ({cmd[0]} not found)") from e
    except subprocess.TimeoutExpired as e:
        raise ToolError(f"{what} took longer than {timeout:.0f} s") from e


def _read_hex_words(path: Path, bits: int) -> np.ndarray:
    words = []
    for line in path.read_text().split():
        if any(c in line.lower() for c in "xz"):
            words.append(None)
            continue
        v = int(line, 16)
        words.append(v - (1 << bits) if v >> (bits - 1) else v)
    return np.array(words, dtype=object)


def run_iverilog(
    graph: Graph,
    x,
    *,
    pipelining: str = "none",
    expected=None,
    workdir: str | os.PathLike | None = None,
    verilog: str | None = None,
    libraries: tuple = (),
) -> RunResult:
    """Run the emitted Verilog and testbench under Icarus Verilog (``iverilog -g2005``).

    ``expected`` defaults to the reference model's output. The testbench writes every
    output word; its own pass/fail line is kept in ``summary``. ``verilog`` replaces the
    emitted core (a synthesized netlist of it), ``libraries`` are further source files
    (the cell models such a netlist needs).
    """
    iverilog = shutil.which("iverilog")
    vvp = shutil.which("vvp")
    if iverilog is None or vvp is None:
        raise ToolError("Icarus Verilog (iverilog, vvp) is not installed")
    x = np.asarray(x)
    if expected is None:
        expected = simulate_integer(graph, x).output
    with _workdir(workdir) as wd:
        files = write_testbench_files(
            graph, wd, x, expected, pipelining=pipelining, verilog=verilog
        )
        r = _run(
            [iverilog, "-g2005", "-o", "tb.vvp", files["testbench"], files["verilog"]]
            + [str(lib) for lib in libraries],
            wd,
            "iverilog",
        )
        if r.returncode != 0:
            raise ToolError(f"iverilog failed: {r.stderr.strip() or r.stdout.strip()}")
        r = _run([vvp, "-n", "tb.vvp", "+outputs=outputs.hex"], wd, "vvp")
        out_bits = graph.output.format.bits
        out_path = wd / "outputs.hex"
        got = _read_hex_words(out_path, out_bits) if out_path.exists() else np.zeros(0, object)
        return _tb_result("iverilog", got, r)


def _tb_result(simulator: str, got, r: subprocess.CompletedProcess) -> RunResult:
    lines = [ln for ln in r.stdout.splitlines() if ln.strip()]
    summary = next((ln for ln in reversed(lines) if ln.startswith("checked ")), "")
    cycles = 0
    for ln in lines:
        if ln.startswith("cycles "):
            cycles = int(ln.split()[1])
    return RunResult(simulator, got, cycles, passed=r.returncode == 0, summary=summary)


class _workdir:
    """A given folder, or a temporary one removed afterwards."""

    def __init__(self, path):
        self._given = Path(path).resolve() if path is not None else None
        self._tmp = None

    def __enter__(self) -> Path:
        if self._given is not None:
            self._given.mkdir(parents=True, exist_ok=True)
            return self._given
        self._tmp = tempfile.TemporaryDirectory(prefix="hwfilter-sim-")
        return Path(self._tmp.name)

    def __exit__(self, *exc):
        if self._tmp is not None:
            self._tmp.cleanup()


# -- Verilator --------------------------------------------------------------------------
@dataclass
class VerilatorModel:
    """A compiled Verilator harness for one design; run it with :meth:`run`."""

    graph: Graph
    pipelining: str
    executable: Path
    workdir: Path

    def run(self, x, *, idle_every: int = 0) -> RunResult:
        """Feed input words ``x``; ``idle_every > 0`` idles one cycle after every so many."""
        xs = np.ascontiguousarray(np.asarray(x, dtype=np.int64))
        inp = self.workdir / "in.bin"
        out = self.workdir / "out.bin"
        xs.tofile(inp)
        r = _run(
            [str(self.executable), str(inp), str(out), str(int(idle_every))],
            self.workdir,
            "Verilator model",
        )
        if r.returncode != 0:
            raise ToolError(f"Verilator model failed: {r.stderr.strip() or r.stdout.strip()}")
        y = np.fromfile(out, dtype=np.int64)
        cycles = int(r.stdout.split()[1]) if r.stdout.startswith("cycles ") else 0
        return RunResult("verilator", y, cycles)


def build_verilator(
    graph: Graph, workdir: str | os.PathLike, *, pipelining: str = "none", jobs: int = 2
) -> VerilatorModel:
    """Compile the emitted Verilog with Verilator and the C++ harness in ``workdir``."""
    verilator = shutil.which("verilator")
    if verilator is None:
        raise ToolError("Verilator is not installed")
    for fmt, what in ((graph.input.format, "input"), (graph.output.format, "output")):
        if fmt.bits > 64:
            raise ValueError(
                f"Verilator harness {what} word must be at most 64 bits, not {fmt.bits}"
            )
    wd = Path(workdir).resolve()
    wd.mkdir(parents=True, exist_ok=True)
    name = module_name(graph)
    (wd / f"{name}.v").write_text(generate_verilog(graph, pipelining=pipelining))
    p = make_plan(graph, pipelining=pipelining)
    (wd / "harness.cpp").write_text(harness_cpp(graph, p))
    cmd = [
        verilator,
        "--cc",
        "--exe",
        "--build",
        "-O3",
        "--x-assign",
        "fast",
        "--x-initial",
        "fast",
        "-Wno-fatal",
        "-Wno-lint",
        "-Wno-style",
        "--top-module",
        name,
        "-Mdir",
        "obj",
        "-j",
        str(jobs),
        "-CFLAGS",
        "-O2",
        "-o",
        "model",
        f"{name}.v",
        "harness.cpp",
    ]
    r = _run(cmd, wd, "verilator", timeout=1200)
    exe = wd / "obj" / "model"
    if r.returncode != 0 or not exe.exists():
        tail = "\n".join((r.stderr or r.stdout).strip().splitlines()[-15:])
        raise ToolError(f"verilator build failed:\n{tail}")
    return VerilatorModel(graph, pipelining, exe, wd)


def run_verilator(
    graph: Graph,
    x,
    *,
    pipelining: str = "none",
    workdir: str | os.PathLike | None = None,
    idle_every: int = 0,
) -> RunResult:
    """Build the Verilator harness (in ``workdir`` or a temporary folder) and run ``x``."""
    with _workdir(workdir) as wd:
        model = build_verilator(graph, wd, pipelining=pipelining)
        return model.run(x, idle_every=idle_every)
