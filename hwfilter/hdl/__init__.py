"""Hardware: the Amaranth component, Verilog, testbench, vectors and proof in simulators.

Public entry points::

    plan(graph, pipelining="none")               -> HardwarePlan (stages, latency, registers)
    FilterCore(graph, pipelining="none")         -> the Amaranth wiring.Component
    generate_verilog(graph, pipelining="none")   -> Verilog text
"""

from .core import FilterCore
from .plan import PIPELININGS, HardwarePlan, PipelineRegister, plan
from .verilog import PORTS, VERILATOR_LINT_WAIVERS, generate_verilog, module_name

__all__ = [
    "PIPELININGS",
    "PORTS",
    "VERILATOR_LINT_WAIVERS",
    "FilterCore",
    "HardwarePlan",
    "PipelineRegister",
    "generate_verilog",
    "module_name",
    "plan",
]
