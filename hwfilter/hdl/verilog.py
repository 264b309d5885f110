"""Verilog through Amaranth's own back end (its builtin Yosys; no tool to install).

The text is deterministic: no source locations (``emit_src=False``), the module is named
after the graph, and internal signals after the nodes (``s1.w`` -> ``s1_w``; product
registers keep the node's name, the multiplier before one is ``<name>_product``, balance
registers are ``<name>_d1``, ``<name>_d2``..., the valid chain ``valid_1``...).

Verilator lint
--------------
The emitted module passes ``verilator --lint-only -Wall`` (Verilator 5.006) with two
warning classes waived (:data:`VERILATOR_LINT_WAIVERS`); both flag how Amaranth's back end
writes correct Verilog, not a design problem:

- ``WIDTH`` (split into ``WIDTHEXPAND``/``WIDTHTRUNC`` by later Verilator releases, which
  still accept ``-Wno-WIDTH`` for all of them): Amaranth writes each operand at its own
  width, ``$signed(a) + $signed(14'h1fff)``, and lets Verilog's context rules sign-extend it
  to the result's width. Every width is chosen exactly from the graph's formats, and
  the simulations against the bit-exact reference prove the arithmetic.
- ``UNUSEDSIGNAL``: Amaranth declares each operation's full-width result and then takes
  the bits it needs (the low bits of a product in its exact range, the kept bits of an
  arithmetic shift that drops fraction bits): the unread bits are the dropped bits, by
  design.

No other class fires on any realization or pipelining option (tests lint them all with
:func:`lint_flags`).
"""

from __future__ import annotations

import re

from amaranth.back import verilog as _verilog
from amaranth.hdl import Signal
from amaranth.hdl._ir import PortDirection
from amaranth.lib.wiring import In

from ..graph import Graph
from .core import FilterCore

__all__ = ["generate_verilog", "module_name", "PORTS", "VERILATOR_LINT_WAIVERS", "lint_flags"]

#: Verilog port names of every generated module, by role (amaranth.lib.stream names)
PORTS = {
    "clock": "clk",
    "reset": "rst",
    "in_data": "i__payload",
    "in_valid": "i__valid",
    "in_ready": "i__ready",
    "out_data": "o__payload",
    "out_valid": "o__valid",
}

#: Verilator warning classes waived for the emitted Verilog (see the module docstring)
VERILATOR_LINT_WAIVERS = ("WIDTH", "UNUSEDSIGNAL")


def lint_flags() -> list[str]:
    """Verilator options for linting emitted Verilog: all warnings, minus the waivers."""
    return ["--lint-only", "-Wall"] + [f"-Wno-{w}" for w in VERILATOR_LINT_WAIVERS]


def module_name(graph: Graph) -> str:
    """The Verilog module name: the graph name as a plain identifier."""
    name = re.sub(r"\W", "_", graph.name)
    if not name or name[0].isdigit():
        name = "filter_" + name
    return name


def generate_verilog(graph: Graph, *, pipelining: str = "none") -> str:
    """Verilog-2005 text of the filter core of ``graph``.

    Parameters
    ----------
    graph : Graph
        A quantized graph.
    pipelining : str
        One of :data:`hwfilter.hdl.plan.PIPELININGS`.

    Returns
    -------
    str
        One module named :func:`module_name` with the ports in :data:`PORTS`.
    """
    core = FilterCore(graph, pipelining=pipelining)
    return _verilog.convert(core, name=module_name(graph), ports=core_ports(core), emit_src=False)


def core_ports(core: FilterCore) -> dict:
    """The ports of ``core`` for Amaranth's back end (constant members left out)."""
    ports = {}
    for path, member, value in core.signature.flatten(core):
        if isinstance(value, Signal):
            direction = PortDirection.Input if member.flow == In else PortDirection.Output
            ports["__".join(map(str, path))] = (value, direction)
    return ports
