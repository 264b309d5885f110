"""Hardware: the Amaranth component, Verilog, testbench, vectors and proof in simulators.

Public entry points::

    plan(graph, pipelining="none")              -> HardwarePlan: stages, latency_cycles,
                                                   cycles_per_sample, register_bits,
                                                   pipeline_registers
    flip_flop_count(graph, plan)                -> which register bits synthesis keeps
    FilterCore(graph, pipelining="none")        -> the Amaranth wiring.Component
    generate_verilog(graph, pipelining="none")  -> Verilog text (module named after graph)
    write_build(graph, out_dir, pipelining=..., samples=..., seed=...)
                                                -> Verilog, testbench, hex vectors,
                                                   build.json (hwfilter.hdl.build)

Simulation against the bit-exact model lives in :mod:`hwfilter.hdl.simulate`
(Amaranth, Icarus Verilog, Verilator).
"""

from .core import FilterCore
from .flipflops import FlipFlopCount, flip_flop_count
from .plan import PIPELININGS, HardwarePlan, PipelineRegister, plan
from .verilog import PORTS, VERILATOR_LINT_WAIVERS, generate_verilog, module_name

__all__ = [
    "PIPELININGS",
    "PORTS",
    "VERILATOR_LINT_WAIVERS",
    "FilterCore",
    "FlipFlopCount",
    "HardwarePlan",
    "PipelineRegister",
    "flip_flop_count",
    "generate_verilog",
    "module_name",
    "plan",
    "write_build",
]


def __getattr__(name):
    # write_build pulls in the reference model and vectors: load it on first use
    if name == "write_build":
        from .build import write_build

        return write_build
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
