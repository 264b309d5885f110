"""hwfilter: fixed-point digital filters for FPGAs.

Filter in floating point -> realization as a signal-flow graph -> word lengths ->
bit-exact model -> Amaranth hardware and Verilog -> proof in simulators -> estimates.
"""

from .errors import FilterFileError, QuantizationWarning
from .fixed import Format
from .graph import Graph, Node

__all__ = ["Format", "Graph", "Node", "FilterFileError", "QuantizationWarning"]
__version__ = "0.1.0"
