"""``hwfilter build FILE -o DIR``: Verilog, testbench, vectors and build.json."""

from __future__ import annotations

from ..errors import FilterFileError
from ..hdl import PIPELININGS
from ..hdl.build import write_build

NAME = "build"
HELP = (
    "the whole job: formats, analysis, Verilog, testbench and vectors, bit-exact proof in "
    "simulators, estimate, report"
)

#: vector set length when --samples is not given
DEFAULT_SAMPLES = 2048


def add_arguments(p):
    p.add_argument("file", help="filter file (TOML)")
    p.add_argument("-o", "--output", required=True, metavar="DIR", help="build folder")
    add_pipelining_argument(p)
    p.add_argument(
        "--samples",
        type=int,
        default=DEFAULT_SAMPLES,
        help=f"length of the test vector set (default {DEFAULT_SAMPLES})",
    )
    p.add_argument("--seed", type=int, default=1, help="seed of the random vectors (default 1)")
    p.add_argument(
        "--device",
        help="device profile for the estimate (name or path; default: the file's device, "
        "else ecp5-25k)",
    )
    p.add_argument("--clock", type=float, metavar="MHZ", help="clock for the sample rate")
    p.add_argument(
        "--no-compare",
        action="store_true",
        help="estimate only the file's realization (default: compare every realization)",
    )
    p.add_argument(
        "--hardware-only",
        action="store_true",
        help="write only the Verilog, testbench, vectors and build.json (no analysis, "
        "verification, estimate or report)",
    )


def add_pipelining_argument(p):
    """The ``--pipelining`` option shared by build, verify and estimate."""
    p.add_argument(
        "--pipelining",
        choices=PIPELININGS,
        help="pipeline registers (default: the file's [hardware] pipelining, or none)",
    )


def pipelining_of(spec, args) -> str:
    """``--pipelining``, else the filter file's ``[hardware] pipelining``, else ``none``."""
    if getattr(args, "pipelining", None):
        return args.pipelining
    hw = getattr(spec, "hardware", None)
    return getattr(hw, "pipelining", None) or "none"


def run(args) -> int:
    from ..pipeline import quantized_graph
    from ..spec import load

    if args.samples < 1:
        raise FilterFileError(f"--samples must be a positive integer, not {args.samples!r}")
    if not args.hardware_only:
        return _whole_job(args)
    spec = load(args.file)
    graph = quantized_graph(spec)
    pipelining = pipelining_of(spec, args)
    m = write_build(graph, args.output, pipelining=pipelining, samples=args.samples, seed=args.seed)
    ff = m["flip_flops"]
    print(
        f"module {m['module']}: pipelining {pipelining}, latency {m['latency_cycles']} "
        f"clock(s), {m['cycles_per_sample']} clock(s) per sample"
    )
    print(
        f"registers: {sum(m['register_bits'].values())} bits "
        f"(state {m['register_bits']['state']}, pipeline {m['register_bits']['pipeline']}, "
        f"control {m['register_bits']['control']}); {ff['kept']} flip-flops after synthesis "
        f"removes {ff['constant']} constant, {ff['unused']} unused, "
        f"{ff['duplicate']} duplicate bits"
    )
    files = ", ".join(m["files"].values())
    print(f"wrote {args.output}: {files}, build.json ({m['vectors']['samples']} test vectors)")
    print(f"run the testbench: cd {args.output} && {m['simulate']['iverilog']}")
    return 0


def _whole_job(args) -> int:
    """Run :func:`hwfilter.job.run_job`; print the summary; 1 when a verdict failed."""
    import sys

    from ..job import run_job

    res = run_job(
        args.file,
        args.output,
        device=args.device,
        clock_mhz=args.clock,
        pipelining=args.pipelining,
        samples=args.samples,
        seed=args.seed,
        compare=not args.no_compare,
        progress=sys.stderr,
    )
    print("\n".join(res.summary))
    if res.exit_code:
        print("build finished with a failed verdict (see advice above and report.html)")
    return res.exit_code
