"""The SVG plots read back honestly: every plot of a report set is well-formed XML (xml.etree)
with a title, axis labels and its legend; a trace's vertices read back through the axes are the
engine's samples and lie on the RC step response x(t) = V·(1 − e^(−t/RC)) (common practice);
every sample lies within a pixel of the drawn line; tick labels stand where their values are
(SI prefixes: the BIPM SI brochure, common practice); untrusted text stays text; ``--no-plots``
writes every report without a plot; the report set is synced with or without ``syncfs``.
"""

from __future__ import annotations

import json
import math
import os
import re
import subprocess
import sys
import textwrap
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

from harness.circuitfile import parse_circuit
from harness.closedform import solve as exact_solve
from harness.compare import compare_file
from harness.outcome import PASS, CheckResult, FileResult, RunResult
from harness.report import html, plots, reportset, scale, svg, write_all
from harness.runner import check_file
from harness.simulate import solve as numeric_solve
from tests.test_cli_output import RC as RC_CIRCUIT, RC_EXPECT

ROOT = Path(__file__).resolve().parent.parent
NS = "{http://www.w3.org/2000/svg}"
#: SI prefixes (BIPM, The International System of Units, 9th edition, table 7)
PREFIX = {"f": 1e-15, "p": 1e-12, "n": 1e-9, "µ": 1e-6, "m": 1e-3, "": 1.0, "k": 1e3,
          "M": 1e6, "G": 1e9}
#: an RC charge, 5 V through 10 kΩ into 1 µF (τ = 10 ms), with its hand values
RC = RC_CIRCUIT + RC_EXPECT
LIBRARY = ROOT / "circuits" / "library"


def facts(root: ET.Element) -> dict:
    return json.loads(root.find(f"{NS}metadata").text)


def texts(root: ET.Element) -> list[str]:
    return ["".join(t.itertext()) for t in root.iter(f"{NS}text")]


def path_points(element: ET.Element) -> list[np.ndarray]:
    """The runs of a path ``d`` written as ``M x,y x,y …``: arrays of shape (n, 2) in px."""
    return [np.array([[float(v) for v in pair.split(",")] for pair in run.split()])
            for run in element.get("d").split("M") if run.strip()]


def rc_check() -> CheckResult:
    circuit = parse_circuit(RC)
    return compare_file(circuit, exact_solve(circuit), numeric_solve(circuit)).checks[0]


@pytest.fixture(scope="module")
def report_set(tmp_path_factory):
    """A report set of a switched gate drive, a periodic doubler and a spread (every plot kind)."""
    names = ["motor-drive/gate-drive-rc.toml", "periodic/gate-bias-doubler.toml"]
    files = [check_file(str(LIBRARY / n)) for n in names]
    files.append(check_file(str(LIBRARY / "tolerance" / "reset-delay-spread.toml"),
                            numeric=False))
    folder = tmp_path_factory.mktemp("reports")
    paths = write_all(RunResult(files=tuple(files)), folder)
    return folder, [p for p in paths if p.parent.name == "plots"]


def test_every_plot_parses_with_a_title_labels_and_its_legend(report_set):
    """Each plot file is an SVG document with a non-empty title, the axis labels and tick
    labels as text, and every legend label of its metadata drawn."""
    _, paths = report_set
    kinds = {re.sub(r"\d+", "", p.stem.rsplit("-", 1)[-1]) for p in paths}
    assert {"c", "schedule", "s"} <= kinds and any("sensitivity" in p.name for p in paths)
    for path in paths:
        root = ET.parse(path).getroot()
        assert root.tag == f"{NS}svg" and root.find(f"{NS}title").text.strip(), path
        drawn = texts(root)
        meta = facts(root)
        assert all(label in drawn for label in meta["legend"]), path
        assert len(drawn) >= 6, path                    # title, ticks, axis label(s)
        assert len(meta["frames"]) == len(meta["ylims"]) >= 1


def test_check_plot_names_its_axes_and_time_origin(report_set):
    _, paths = report_set
    root = ET.parse(next(p for p in paths if p.name.startswith("001-") and
                         p.name.endswith("-c1.svg"))).getroot()
    drawn = texts(root)
    assert "time since the event at t = 0 s" in drawn and "node g" in drawn


def test_trace_vertices_read_back_to_the_engine_samples_and_the_rc_response():
    """Every vertex of the numeric and closed-form lines, read back through the axes, is within
    a pixel of one of that engine's samples and of V·(1 − e^(−t/RC)) with V = 5 V, RC = 10 ms;
    every sample in view lies within a pixel of the drawn line."""
    check = rc_check()
    root = ET.fromstring(plots.plot_check(check))
    meta = facts(root)
    limits, frame = svg.frame_of(meta)
    px_per_s = frame[2] / (limits[1] - limits[0])
    px_per_v = frame[3] / (limits[3] - limits[2])
    trace = check.trace
    for kind, t, x in (("numeric", trace.numeric_t, trace.numeric_x),
                       ("closed", trace.closed_t, trace.closed_x)):
        element = next(e for e in root.iter(f"{NS}path") if e.get("class") == kind)
        runs = path_points(element)
        assert len(runs) == 1
        drawn = runs[0]
        samples = np.column_stack([(t - trace.event - limits[0]) * px_per_s + frame[0],
                                   frame[1] + frame[3] - (x - limits[2]) * px_per_v])
        for px, py in drawn:
            nearest = np.min(np.hypot(samples[:, 0] - px, samples[:, 1] - py))
            assert nearest <= 1.0
            t_s, v = svg.to_data(px, py, limits, frame)
            exact = 5.0 * (1 - math.exp(-max(t_s, 0.0) / 10e-3))
            assert abs(v - exact) * px_per_v <= 1.0
        shown = samples[samples[:, 0] <= frame[0] + frame[2]]
        assert _distance_to_polyline(shown, drawn).max() <= 1.0


def _distance_to_polyline(points: np.ndarray, line: np.ndarray) -> np.ndarray:
    """Each point's distance (px) to the nearest segment of ``line`` (plane geometry)."""
    best = np.full(len(points), np.inf)
    for a, b in zip(line[:-1], line[1:]):
        d = b - a
        length = float(d @ d)
        u = np.clip(((points - a) @ d) / length, 0, 1) if length else np.zeros(len(points))
        best = np.minimum(best, np.hypot(*(points - a - np.outer(u, d)).T))
    return best


def _si_value(label: str) -> float:
    """``-2.5 ms`` (true minus sign allowed) -> -0.0025."""
    number, _, unit = label.replace("−", "-").partition(" ")
    prefix = unit[:-1] if len(unit) > 1 else ("" if unit in ("s", "V", "A", "") else unit)
    return float(number) * PREFIX[prefix]


def test_tick_labels_stand_where_their_values_are():
    """Each y tick label (right-aligned, left of the frame) and x tick label (centred under it)
    reads, with its SI prefix, the value the axes map its position to (within a pixel)."""
    root = ET.fromstring(plots.plot_check(rc_check()))
    limits, frame = svg.frame_of(facts(root))
    groups = {g.get("text-anchor"): g for g in root.iter(f"{NS}g")}
    for t in groups["end"].iter(f"{NS}text"):
        y = float(t.get("y")) - svg.TICK_FONT * 0.35
        value = svg.to_data(frame[0], y, limits, frame)[1]
        assert abs(value - _si_value(t.text)) / (limits[3] - limits[2]) * frame[3] <= 1.0
    for t in groups["middle"].iter(f"{NS}text"):
        value = svg.to_data(float(t.get("x")), 0.0, limits, frame)[0]
        assert abs(value - _si_value(t.text)) / (limits[1] - limits[0]) * frame[2] <= 1.0


def test_hostile_title_and_probe_stay_text():
    """A ``<script>`` title and an ``<img onerror>`` probe are text in the SVG file and in the
    page: no element of either name, the title reads back as written."""
    check = rc_check()
    title = '<script>alert("x")</script> & co'
    probe = "node <img src=x onerror=alert(1)>"
    odd = CheckResult(0, probe, 0.0, PASS, check.fields, order=1, modes=(0.01,),
                      trace=check.trace)
    text = plots.plot_check(odd, title)
    root = ET.fromstring(text)
    assert root.find(f"{NS}title").text == title
    assert not [e for e in root.iter() if e.tag.split("}")[-1] in ("script", "img")]
    assert "<script" not in text and "<img" not in text
    page = html.inline(text, title)
    assert "<script" not in page and "<img" not in page and "&lt;script&gt;" in page


def test_no_plots_option_writes_every_report_without_a_plot(tmp_path):
    path = tmp_path / "rc.toml"
    path.write_text(textwrap.dedent(RC), encoding="utf-8")
    out = tmp_path / "r"
    done = subprocess.run([sys.executable, "-m", "harness.cli", "check", str(path), "--no-plots",
                           "--report-dir", str(out)], capture_output=True, text=True, cwd=ROOT)
    assert done.returncode == 0, done.stderr
    assert {"report.html", "report.md", "summary.csv", "results.json", "junit.xml"} <= \
        {p.name for p in out.iterdir()}
    assert not (out / "plots").exists()
    assert "<svg" not in (out / "report.html").read_text(encoding="utf-8")
    assert "](plots/" not in (out / "report.md").read_text(encoding="utf-8")


def test_page_holds_the_plots_inline_without_metadata(report_set):
    folder, paths = report_set
    page = (folder / "report.html").read_text(encoding="utf-8")
    assert page.count('<div class="plot"') == len(paths)
    assert "<metadata>" not in page and "data:image" not in page


# ------------------------------------------------------------------ axes and thinning
@pytest.mark.parametrize("low, high", [(0, 1e-3), (-2.073, 0.1008), (4.99, 5.01),
                                       (0, 350e-9), (1.35e-3, 1.5e-3), (-1, 1)])
def test_ticks_are_nice_numbers_inside_the_limits(low, high):
    """Steps of 1, 2, 2.5 or 5 times a power of ten (common practice), inside the limits,
    at most target + 1 of them, evenly spaced."""
    values, step = scale.ticks(low, high, 7)
    mantissa = step / 10 ** math.floor(math.log10(step))
    assert any(math.isclose(mantissa, m) for m in (1, 2, 2.5, 5))
    assert low - 1e-12 <= values.min() and values.max() <= high + 1e-12
    assert 2 <= len(values) <= 8
    np.testing.assert_allclose(np.diff(values), step, rtol=1e-9)


def test_si_labels_share_one_prefix_and_the_step_decimals():
    values, step = scale.ticks(0, 1e-3, 5)
    assert scale.si_labels(values, step, "s") == ["0.0 ms", "0.2 ms", "0.4 ms", "0.6 ms",
                                                  "0.8 ms", "1.0 ms"]
    assert scale.si_labels(np.array([-2.0, 0.0, 2.0]), 2.0, "A") == ["−2 A", "0 A", "2 A"]
    assert scale.si_labels(np.array([0, 2.5e-6, 5e-6]), 2.5e-6, "s") == \
        ["0.0 µs", "2.5 µs", "5.0 µs"]


@pytest.mark.parametrize("n", [3, 50, 400, 5000, 40000])
def test_thinned_line_keeps_every_sample_within_a_pixel(n):
    """Kept vertices are samples (the first and last among them) and no sample lies farther
    than a pixel from the thinned line: a ringing decay with noise, 600 px wide."""
    rng = np.random.default_rng(n)
    x = np.linspace(0, 600, n)
    y = 150 + 120 * np.exp(-x / 150) * np.cos(x / 9) + rng.normal(0, 0.5, n)
    keep = scale.thin(x, y)
    assert keep[0] == 0 and keep[-1] == n - 1 and np.all(np.diff(keep) > 0)
    line = np.column_stack([x[keep], y[keep]])
    assert _distance_to_polyline(np.column_stack([x, y]), line).max() <= 1.0
    if n >= 5000:
        assert len(keep) <= 4 * 601


def test_gaps_break_the_line():
    x = np.arange(6.0)
    y = np.array([0, 1, np.nan, 3, 4, 5.0])
    assert [len(r[0]) for r in scale.runs(x, y)] == [2, 3]


# ------------------------------------------------------------------ the set on disk
def test_report_set_is_synced_file_by_file_without_syncfs(tmp_path, monkeypatch):
    """Where there is no syncfs, every staged file is fsync'd before the swap."""
    synced = []
    real = os.fsync
    monkeypatch.setattr(reportset, "_syncfs", lambda folder: False)
    monkeypatch.setattr(reportset.os, "fsync", lambda fd: synced.append(fd) or real(fd))
    check = rc_check()
    run = RunResult(files=(FileResult("rc.toml", "RC", PASS, checks=(check,)),))
    paths = write_all(run, tmp_path)
    assert len(synced) == len(paths) and all(p.is_file() for p in paths)


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="syncfs(2) is Linux's")
def test_report_set_is_synced_with_one_syncfs_on_linux(tmp_path, monkeypatch):
    synced = []
    monkeypatch.setattr(reportset.os, "fsync", lambda fd: synced.append(fd))
    assert reportset._syncfs(tmp_path)
    run = RunResult(files=(FileResult("rc.toml", "RC", PASS, checks=(rc_check(),)),))
    write_all(run, tmp_path)
    assert synced == []


def test_an_earlier_runs_png_plots_go_with_the_old_set(tmp_path):
    """PNG plots an earlier version wrote under the same naming pattern are removed with the old
    set; a file of the user's beside them stays."""
    (tmp_path / "plots").mkdir()
    (tmp_path / "plots" / "001-rc-c1.png").write_bytes(b"old plot")
    (tmp_path / "plots" / "my-notes.png").write_bytes(b"mine")
    run = RunResult(files=(FileResult("rc.toml", "RC", PASS, checks=(rc_check(),)),))
    paths = write_all(run, tmp_path)
    assert sorted(p.name for p in (tmp_path / "plots").iterdir()) == sorted(
        [p.name for p in paths if p.parent.name == "plots"] + ["my-notes.png"])
