"""Build outputs: Verilog, testbench, vectors and a manifest, written all at once.

``write_build(graph, DIR)`` leaves in ``DIR``:

==========================  =============================================================
file                        content
==========================  =============================================================
``<name>.v``                the filter module (Amaranth's Verilog back end)
``<name>_tb.v``             the self-checking Verilog-2005 testbench
``<name>_in.hex``           input words (``$readmemh``), the vector set of
                            :mod:`hwfilter.hdl.vectors`
``<name>_expected.hex``     the bit-exact reference model's output words
``build.json``              module, ports, latency, rate, formats, registers, vectors
==========================  =============================================================

Everything is written to a temporary folder beside ``DIR`` and renamed into place at the
end, so a failed or interrupted build leaves no half-written folder. ``DIR`` may not
exist yet, may be empty, or may hold an earlier build (it is replaced); any other folder
is refused rather than overwritten.
"""

from __future__ import annotations

import json
import os
import shutil
import tempfile
from pathlib import Path

from ..errors import FilterFileError
from ..graph import Graph
from ..reference import simulate_integer
from .flipflops import flip_flop_count
from .plan import plan as make_plan
from .plan import signal_names
from .testbench import write_testbench_files
from .vectors import vector_set
from .verilog import PORTS, generate_verilog, module_name

__all__ = ["write_build", "MANIFEST", "simulator_commands", "check_target"]

#: name of the manifest file in a build folder
MANIFEST = "build.json"


def simulator_commands(name: str) -> dict[str, str]:
    """Shell commands that run the testbench in ``DIR`` (for the manifest and the docs)."""
    return {
        "iverilog": (
            f"iverilog -g2005 -o {name}_tb.vvp {name}_tb.v {name}.v && vvp -n {name}_tb.vvp"
        ),
        "verilator": (
            f"verilator --binary -Wno-fatal --top-module {name}_tb -o {name}_tb "
            f"{name}_tb.v {name}.v && obj_dir/{name}_tb"
        ),
    }


def check_target(out: Path) -> None:
    """Refuse an output path that is a file, or a folder holding anything but a build."""
    if out.exists() and not out.is_dir():
        raise FilterFileError(f"output folder must be a folder, not the file {str(out)!r}")
    if out.is_dir() and any(out.iterdir()) and not (out / MANIFEST).is_file():
        raise FilterFileError(
            f"output folder must be new, empty or an earlier build (with {MANIFEST}); "
            f"{str(out)!r} holds other files"
        )


def manifest(graph: Graph, *, pipelining: str, files: dict, vectors) -> dict:
    """The content of ``build.json`` (deterministic: no times, no absolute paths)."""
    from .. import __version__

    p = make_plan(graph, pipelining=pipelining)
    names = signal_names(graph)
    name = module_name(graph)
    return {
        "generator": f"hwfilter {__version__}",
        "module": name,
        "graph": graph.name,
        "form": graph.form,
        "section_form": graph.section_form,
        "pipelining": pipelining,
        "files": files,
        "ports": dict(PORTS),
        "latency_cycles": p.latency_cycles,
        "cycles_per_sample": p.cycles_per_sample,
        "input_format": graph.input.format.as_dict(),
        "output_format": graph.output.format.as_dict(),
        "nodes": {
            n.name: {
                "kind": n.kind,
                "signal": names[n.name] if n.kind != "output" else PORTS["out_data"],
                **n.format.as_dict(),
                "stage": p.stages[n.name],
            }
            for n in graph.nodes
        },
        "register_bits": dict(p.register_bits),
        "flip_flops": flip_flop_count(graph, p).as_dict(),
        "registered_products": sorted(p.registered),
        "pipeline_registers": [r.as_dict() for r in p.pipeline_registers],
        "vectors": {
            "samples": int(len(vectors.words)),
            "segments": vectors.as_dicts(),
        },
        "simulate": simulator_commands(name),
    }


def write_build(
    graph: Graph,
    out_dir: str | os.PathLike,
    *,
    pipelining: str = "none",
    samples: int = 2048,
    seed: int = 1,
) -> dict:
    """Write the build folder for ``graph`` (see the module docstring); return the manifest.

    Parameters
    ----------
    graph : Graph
        A quantized graph.
    out_dir : path
        The build folder.
    pipelining : str
        One of :data:`hwfilter.hdl.PIPELININGS`.
    samples : int
        Length of the vector set.
    seed : int
        Seed of the random segment.

    Raises
    ------
    FilterFileError
        When ``out_dir`` is a file or a folder holding something other than a build.
    """
    out = Path(out_dir)
    check_target(out)
    # everything that can fail on bad input happens before any file is written
    verilog = generate_verilog(graph, pipelining=pipelining)
    vectors = vector_set(graph, samples, seed=seed)
    expected = simulate_integer(graph, vectors.words).output
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.tmp-", dir=out.parent))
    backup = None
    try:
        umask = os.umask(0)
        os.umask(umask)
        tmp.chmod(0o777 & ~umask)  # mkdtemp makes it private; a build folder is not
        files = write_testbench_files(
            graph, tmp, vectors.words, expected, pipelining=pipelining, verilog=verilog
        )
        content = manifest(graph, pipelining=pipelining, files=files, vectors=vectors)
        content["vectors"]["seed"] = seed
        (tmp / MANIFEST).write_text(json.dumps(content, indent=2) + "\n")
        if out.exists():
            backup = Path(tempfile.mkdtemp(prefix=f".{out.name}.old-", dir=out.parent))
            backup.rmdir()
            out.rename(backup)
        tmp.rename(out)
        tmp = None
    finally:
        if tmp is not None:
            shutil.rmtree(tmp, ignore_errors=True)
            if backup is not None and not out.exists():
                backup.rename(out)  # put the earlier build back
                backup = None
        if backup is not None:
            shutil.rmtree(backup, ignore_errors=True)
    return content
