"""``hwfilter new NAME``: write a commented starter filter file."""

from __future__ import annotations

from pathlib import Path

from ..errors import FilterFileError
from ..signals import atomic_write_text
from ..spec import _check_name, loads

NAME = "new"
HELP = "write a commented starter filter file NAME.toml"

TEMPLATE = """\
# {name}.toml: a starter filter file written by `hwfilter new`. Every key is shown with
# its default; delete what you do not need. Frequencies are in Hz.
name = "{name}"                 # Verilog module name: letters, digits, underscores
sample_rate = 48000.0           # Hz
# device = "ecp5-25k"           # default device profile for estimates (boards/)

[filter]
# Give exactly one of: b + a, sections, zeros + poles + gain, taps, design.
design = {{ method = "butterworth", band = "lowpass", order = 4, edges = [4000.0] }}
# methods: butterworth, chebyshev-1 (ripple), chebyshev-2 (attenuation),
#          elliptic (ripple, attenuation), bessel, window (FIR), equiripple (FIR)
# bands:   lowpass, highpass, bandpass, bandstop
# b = [0.2, 0.4, 0.2]           # numerator, powers of z^-1
# a = [1.0, -0.5, 0.3]          # denominator, a[0] != 0 (normalized to 1)
# sections = [[b0, b1, b2, 1.0, a1, a2]]
# zeros = [[0.0, 1.0], [0.0, -1.0]]   # [re, im] pairs
# poles = [[0.5, 0.5], [0.5, -0.5]]
# gain = 0.25
# taps = [0.25, 0.5, 0.25]

[realization]
form = "cascade"                # direct-form-1, direct-form-2, transposed-direct-form-2,
                                # cascade, parallel, fir-direct, fir-transposed, fir-symmetric
section = "direct-form-2"       # section form for cascade and parallel
pairing = "nearest"             # cascade pole-zero pairing: nearest, keep-odd
order = "nearest-last"          # cascade order: nearest-last, nearest-first
gain = "first"                  # cascade gain spread: first, even, normalized

[fixed]
input = {{ bits = 16, frac = 15 }}   # signed two's complement: total bits, fraction bits
output = {{ bits = 16, frac = 15 }}
coefficient_bits = 18           # per coefficient group, integer bits fit the largest
state_bits = 24                 # stored states and section outputs
rounding = "half-up"            # floor, half-up, half-even, toward-zero, half-away
overflow = "saturate"           # wrap, saturate
scaling = "l1"                  # l1 (never overflows), l2, linf, none
round_products = false          # round every product to a state word
section_gains = false           # power-of-two rescaling of cascade sections

# [fixed.nodes]                 # per-node overrides (see `hwfilter check` for names)
# "s1.w" = {{ bits = 20, frac = 17 }}

# [spec]                        # the response the quantized filter must still meet
# passband = [[0.0, 3000.0]]
# stopband = [[6000.0, 24000.0]]
# passband_ripple = 1.0         # dB
# stopband_attenuation = 40.0   # dB

[hardware]
pipelining = "none"             # none, registered-products, registered-all-products
"""


def add_arguments(p):
    p.add_argument("name", help="filter name (also the file name and Verilog module name)")
    p.add_argument("-o", "--output", help="file to write (default NAME.toml)")
    p.add_argument("--force", action="store_true", help="overwrite an existing file")


def run(args) -> int:
    _check_name("<command line>", args.name)
    path = Path(args.output or f"{args.name}.toml")
    if path.exists() and not args.force:
        raise FilterFileError("already exists (use --force to overwrite)", source=str(path))
    text = TEMPLATE.format(name=args.name)
    loads(text, str(path))  # the starter file must itself be valid
    atomic_write_text(path, text)
    print(f"wrote {path}")
    return 0
