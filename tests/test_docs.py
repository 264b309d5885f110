"""The README's set-up commands are the ones CI runs."""

from __future__ import annotations

import re

from conftest import ROOT


def readme_commands() -> dict[str, str]:
    """Commands in the README's fenced blocks that follow 'main job' / 'tests' markers."""
    text = (ROOT / "README.md").read_text()
    found = {}
    for key in ("main-job", "tests"):
        m = re.search(rf"<!-- {key} -->\s*```(?:sh|bash)?\n(.+?)\n```", text, re.S)
        assert m, f"README lacks the <!-- {key} --> command block"
        found[key] = m.group(1).strip()
    return found


def test_ci_runs_the_readme_test_command():
    ci = (ROOT / ".ci" / "run").read_text().splitlines()
    assert readme_commands()["tests"] in [line.strip() for line in ci]


def test_readme_main_job_uses_a_shipped_example():
    cmd = readme_commands()["main-job"]
    m = re.search(r"(examples/\S+\.toml)", cmd)
    assert m and (ROOT / m.group(1)).exists()
