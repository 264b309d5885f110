"""The whole job: every example builds green, the report has its plots and tables, a
failing filter gives advice and a non-zero status, an interrupted build leaves nothing."""

from __future__ import annotations

import json
from html.parser import HTMLParser

import pytest
from conftest import EXAMPLES, require_tool

from hwfilter import job
from hwfilter.cli import main

FILES = sorted(EXAMPLES.glob("*.toml"))


class _Page(HTMLParser):
    """Collects images (with data URIs) and the number of body rows per table."""

    def __init__(self):
        super().__init__()
        self.images, self.tables, self.headings = [], [], []
        self._rows = None
        self._in_tbody = False
        self._h = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "img":
            self.images.append((a.get("alt", ""), a.get("src", "")))
        elif tag == "table":
            self._rows = 0
        elif tag == "tbody":
            self._in_tbody = True
        elif tag == "tr" and self._in_tbody:
            self._rows += 1
        elif tag in ("h2", "h3"):
            self._h = ""

    def handle_endtag(self, tag):
        if tag == "table":
            self.tables.append(self._rows)
        elif tag == "tbody":
            self._in_tbody = False
        elif tag in ("h2", "h3") and self._h is not None:
            self.headings.append(self._h)
            self._h = None

    def handle_data(self, data):
        if self._h is not None:
            self._h += data


@pytest.fixture(scope="module")
def builds(tmp_path_factory):
    require_tool("iverilog")
    require_tool("verilator")
    root = tmp_path_factory.mktemp("builds")
    return {f.stem: (job.run_job(f, root / f.stem, progress=None), root / f.stem) for f in FILES}


@pytest.mark.parametrize("name", [f.stem for f in FILES])
def test_every_example_builds_green(builds, name):
    res, out = builds[name]
    assert res.exit_code == 0, res.summary
    v = res.results["verdicts"]
    assert v["stable"] and v["bit_exact"] and v["spec_met"] is not False
    sims = {r["simulator"] for r in res.results["verification"] if r["passed"]}
    assert {"amaranth", "iverilog (emitted testbench)", "verilator (long run)"} <= sims
    files = {p.name for p in out.iterdir()}
    assert {
        f"{name}.v",
        f"{name}_tb.v",
        f"{name}_in.hex",
        f"{name}_expected.hex",
        "build.json",
        "report.html",
        "report.json",
    } <= files
    assert not [p for p in out.parent.iterdir() if p.name.startswith(".")]  # no staging left


@pytest.mark.parametrize("name", [f.stem for f in FILES])
def test_report_has_every_plot_and_table(builds, name):
    _, out = builds[name]
    page = _Page()
    page.feed((out / "report.html").read_text())
    alts = [alt for alt, src in page.images if src.startswith("data:image/png;base64,")]
    assert len(alts) == len(page.images)  # self-contained: every image embedded
    for want in (
        "Magnitude response",
        "Passband zoom",
        "Poles and zeros",
        "Impulse response",
        "Output error spectrum",
        "Word lengths",
    ):
        assert any(a.startswith(want) for a in alts), (want, alts)
    assert "Node formats" in page.headings and "Roundoff noise per quantizer" in page.headings
    assert "Resources and timing (estimate)" in page.headings
    assert all(rows > 0 for rows in page.tables)
    assert "Estimates are not timing or safety sign-off" in (out / "report.html").read_text()
    assert (
        "How close these estimates came to the synthesis tools" in (out / "report.html").read_text()
    )
    data = json.loads((out / "report.json").read_text())
    assert set(data["estimate_accuracy"]) == {"luts", "fmax"}
    assert data["verdicts"]["bit_exact"] is True
    assert len(data["resources"]) >= 3  # the realizations compared
    # predicted vs measured SQNR agree on a busy input (Jackson / O&S white-noise model,
    # shared/references.md: within 10% in power, i.e. 0.5 dB)
    assert abs(data["sqnr"]["predicted_db"] - data["sqnr"]["measured_db"]) < 0.5


UNSTABLE = """
name = "kaiser_df"
sample_rate = 1000.0
[filter]
design = { method = "butterworth", band = "lowpass", order = 8, edges = [25.0] }
[realization]
form = "direct-form-2"
[fixed]
coefficient_bits = 16
"""


def test_unstable_filter_exits_nonzero_with_advice(tmp_path, capsys):
    # Kaiser's effect (shared/references.md): butter(8, 0.05) as one direct form with
    # 16-bit coefficients is unstable; the advice names the word length that fixes it
    f = tmp_path / "unstable.toml"
    f.write_text(UNSTABLE)
    code = main(["build", str(f), "-o", str(tmp_path / "out"), "--device", "ecp5-25k"])
    out = capsys.readouterr().out
    assert code == 1
    assert "stable: NO" in out
    assert "restores stability" in out and "coefficient_bits 16 -> " in out
    assert 'form = "cascade" is stable with the same 16-bit coefficients' in out


def test_interrupted_build_leaves_nothing(tmp_path, monkeypatch):
    target = tmp_path / "out"

    def boom(*a, **k):
        raise KeyboardInterrupt

    monkeypatch.setattr(job, "_images", boom)
    with pytest.raises(KeyboardInterrupt):
        job.run_job(EXAMPLES / "crossover_low.toml", target, progress=None)
    assert list(tmp_path.iterdir()) == []


def test_failed_build_keeps_the_earlier_one(tmp_path, monkeypatch):
    target = tmp_path / "out"
    target.mkdir()
    (target / "build.json").write_text("{}")  # an earlier build

    def fail(*a, **k):
        raise OSError("disk full (simulated)")

    monkeypatch.setattr(job, "_estimates", fail)
    with pytest.raises(OSError):
        job.run_job(EXAMPLES / "crossover_low.toml", target, progress=None)
    assert [p.name for p in tmp_path.iterdir()] == ["out"]
    assert [p.name for p in target.iterdir()] == ["build.json"]


def test_missed_spec_exits_nonzero_with_advice(tmp_path):
    # the hum notch as one direct form II keeps its poles inside the circle at 18-bit
    # coefficients but loses the notch (its walkthrough); the advice is found by trying
    text = (
        (EXAMPLES / "hum_notch.toml")
        .read_text()
        .replace('form = "cascade"', 'form = "direct-form-2"')
    )
    f = tmp_path / "notch_df2.toml"
    f.write_text(text)
    res = job.run_job(f, tmp_path / "out", progress=None, compare=False)
    assert res.exit_code == 1
    assert res.results["verdicts"]["stable"] is True
    assert res.results["verdicts"]["spec_met"] is False
    tips = [t for t in res.results["advice"] if "meets the response spec" in t]
    assert tips and tips[0].startswith("coefficient_bits 18 -> ")
    assert (tmp_path / "out" / "report.html").exists()  # the failed verdict is reported
