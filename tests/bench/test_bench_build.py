"""Speed of the whole job (``hwfilter build``) on a shipped example.

Run fully with ``pytest tests/bench --benchmark-enable -m "slow or not slow"``; in the
default run it executes once with timing disabled (a smoke test of the benchmark).
"""

from __future__ import annotations

import itertools

from conftest import EXAMPLES, require_tool

from hwfilter.job import run_job

_count = itertools.count()


def test_bench_build_example(benchmark, tmp_path):
    require_tool("iverilog")
    require_tool("verilator")

    def build():
        return run_job(
            EXAMPLES / "crossover_low.toml", tmp_path / f"b{next(_count)}", progress=None
        )

    res = benchmark.pedantic(build, rounds=1, iterations=1)
    assert res.exit_code == 0 and res.results["verdicts"]["bit_exact"] is True
