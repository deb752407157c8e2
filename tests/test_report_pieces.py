"""A file's report pieces (plots, spec sample rows) drawn in the worker that analysed it give the
report set a run in one process writes, byte for byte (timings aside: each file's analysis time
is in the HTML and JUnit reports; ``tests/benchmarks/reports_diff.py`` masks it); pieces that
do not fit the final result are not used; the workers take spec'd files first."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pytest

from harness import clusterparts, pool
from harness.outcome import require_checks
from harness.report import spreads, write_all, writeall
from harness.report.pieces import Drawn, draw
from harness.runner import RunOptions, Weight, heavy_first, run, weigh
from tests.benchmarks.reports_diff import differences

LIBRARY = "circuits/library"
FILES = [f"{LIBRARY}/logger/button-debounce.toml", f"{LIBRARY}/tolerance/soft-start-spread.toml",
         f"{LIBRARY}/periodic/pwm-current-setpoint.toml", f"{LIBRARY}/relay-driver/economizer.toml",
         "circuits/no-such-file.toml"]


@pytest.fixture(scope="module")
def here():
    """The files run in this process (nothing drawn ahead) and their report set."""
    return require_checks(run(FILES))


def _written(result, folder: Path, pieces=None) -> Path:
    write_all(result, folder, provenance={"tool": "t"}, pieces=pieces)
    return folder


def test_pieces_drawn_in_two_workers_give_the_same_report_set(here, tmp_path, monkeypatch):
    monkeypatch.setattr(pool, "free_cores", lambda: 2)   # two workers, however busy the machine
    drawn = Drawn()
    result = require_checks(run(FILES, RunOptions(jobs=2, pieces=drawn)))
    assert len(drawn) == len(FILES) - 1                   # every file that exists
    assert result.to_json() == here.to_json()
    a = _written(here, tmp_path / "here")

    def not_again(draw_here, path_of):
        def drawing(what):     # only the missing file (an error result) is drawn here
            assert path_of(what) == FILES[-1], "drawn again in the parent"
            return draw_here(what)
        return drawing
    monkeypatch.setattr(writeall, "plot_one", not_again(writeall.plot_one, lambda i: i[2]))
    monkeypatch.setattr(spreads, "sample_rows", not_again(spreads.sample_rows, lambda f: f.file))
    b = _written(result, tmp_path / "workers", drawn)
    assert differences(a, b) == []
    assert (a / "spec-samples.csv").stat().st_size > 1000
    assert len(list((a / "plots").iterdir())) > 10


def test_pieces_without_plots_hold_the_sample_rows_only(here):
    spread = next(f for f in here.files if f.spreads)
    pieces = draw(spread, with_plots=False)
    assert pieces.plots is None and pieces.samples.count("\n") > 100


def test_pieces_that_do_not_fit_the_result_are_not_used(here):
    """Pieces drawn from a result with other checks (or another title) are left aside, so the
    report writes the file's own plots."""
    file = next(f for f in here.files if len(f.checks) > 1)
    drawn = Drawn()
    drawn.add(file.file, draw(dataclasses.replace(file, checks=file.checks[:1]), True))
    assert drawn.get(file) is None
    drawn.add(file.file, draw(file, True))
    assert drawn.get(file) is not None
    assert drawn.get(dataclasses.replace(file, title="another")) is None


def test_pieces_drawn_from_other_traces_are_not_used(here):
    """The pieces fit only the waveforms they were drawn from: a check whose trace differs in
    one sample of its numerical waveform (or a mark), a schedule that differs in one value, a
    spread with another sample, each leaves them aside; the same result after a trip through
    pickle (as it comes back from a worker) still fits."""
    import pickle
    file = next(f for f in here.files if f.checks and f.checks[0].trace is not None)
    drawn = Drawn()
    drawn.add(file.file, draw(file, True))
    assert drawn.get(pickle.loads(pickle.dumps(file))) is not None
    trace = file.checks[0].trace
    moved = trace.numeric_x.copy()
    moved[len(moved) // 2] += 1e-9 * max(trace.scale, 1.0)
    for other in (dataclasses.replace(trace, numeric_x=moved),
                  dataclasses.replace(trace, marks=trace.marks + (("peak", 0.0, 1.0),))):
        checks = (dataclasses.replace(file.checks[0], trace=other),) + file.checks[1:]
        assert drawn.get(dataclasses.replace(file, checks=checks)) is None
    probe = file.schedule.probes[0]
    values = probe.closed_x.copy()
    values[0] += 1.0
    schedule = dataclasses.replace(file.schedule, probes=(dataclasses.replace(
        probe, closed_x=values),) + file.schedule.probes[1:])
    assert drawn.get(dataclasses.replace(file, schedule=schedule)) is None


def test_pieces_drawn_from_other_samples_are_not_used(here):
    """The spec sample rows fit only the samples they were written from."""
    file = next(f for f in here.files if f.spreads and f.spreads[0].samples is not None)
    drawn = Drawn()
    drawn.add(file.file, draw(file, False))
    assert drawn.get(file) is not None
    spread = file.spreads[0]
    samples = spread.samples.copy()
    samples[0] *= 1.5
    other = dataclasses.replace(file, spreads=(dataclasses.replace(spread, samples=samples),)
                                + file.spreads[1:])
    assert drawn.get(other) is None


def test_spec_files_are_handed_out_first(tmp_path):
    """The order is written out by hand: spec'd files first, then by size, largest first."""
    plain, spec, variation = (tmp_path / n for n in ("a.toml", "b.toml", "c.toml"))
    plain.write_text('title = "spec = not at a line start"\n')
    spec.write_text("[[expect]]\n  spec = { tau = { max = \"1 ms\" } }\n")
    variation.write_text("[variation]\nresistors = \"F\"\n")
    files = [str(plain), str(spec), str(tmp_path / "gone.toml"), str(variation)]
    sizes = [len(f.read_bytes()) for f in (plain, spec, variation)]
    assert [weigh(f) for f in files] == [Weight(False, sizes[0]), Weight(True, sizes[1]),
                                         Weight(), Weight(True, sizes[2])]
    assert heavy_first([weigh(f) for f in files]) == [1, 3, 0, 2]
    # a cluster's Monte Carlo pieces and corner runs come before everything else
    assert heavy_first([weigh(f) for f in files], [0, 0, 0, 5]) == [3, 1, 0, 2]


@pytest.mark.parametrize("text, spread", [
    ('[[expect]]\nnode = "x"\nspec.tau.max = "1 ms"\n', True),        # dotted key
    ('[[expect]]\nnode = "x"\n[expect.spec]\ntau = { max = "1 ms" }\n', True),   # header
    ('expect = [{ node = "x", spec = { tau = { max = "1 ms" } } }]\n', True),  # inline table
    ('title = "a spectrum"\n# the spectrum of the edge\n', False),
    ("title = 'spec = in a literal string'\n", False),
    ('[[expect]]\nnode = "x"\n"spec" = { tau = { max = "1 ms" } }\n', True),   # quoted key
    ("[[expect]]\nnode = 'x'\n'spec'.tau.max = '1 ms'\n", True),     # literal quoted, dotted
    ('[[expect]]\nnode = "x"\n[ "expect" . "spec" ]\ntau = { max = "1 ms" }\n', True),
    ('[ variation ]\nsamples = 100\n', True),                         # spaces in a header
    ('title = "the \\"spec\\" sheet"\n', False),
])
def test_what_marks_a_spec_d_file(text, spread):
    """Each way TOML (v1.0.0: bare and quoted keys, dotted keys, table headers with spaces
    inside, inline tables) can hold the ``spec`` key marks the file; the word elsewhere does
    not."""
    assert Weight.of(text.encode()).spread is spread


def test_the_cluster_plan_reads_a_file_once_and_weighs_it_as_the_pool_does(monkeypatch):
    """``clusterparts.plan`` opens the file once, and its weight is the pool's (one rule)."""
    import builtins
    path = f"{LIBRARY}/tolerance/soft-start-spread.toml"
    opened, real = [], builtins.open

    def counting(file, *args, **kwargs):
        opened.append(str(file))
        return real(file, *args, **kwargs)
    monkeypatch.setattr(builtins, "open", counting)
    weight, splits = clusterparts.plan(path, None, True)
    monkeypatch.setattr(builtins, "open", real)
    assert opened.count(path) == 1
    assert weight == weigh(path) and weight.spread and splits == {}


def test_without_plots_the_workers_draw_the_sample_rows_alone(here, tmp_path, monkeypatch):
    """``--no-plots`` with workers: the pieces hold no plots and the set is the same bytes."""
    monkeypatch.setattr(pool, "free_cores", lambda: 2)
    drawn = Drawn(with_plots=False)
    result = require_checks(run(FILES[1:3], RunOptions(jobs=2, pieces=drawn)))
    assert len(drawn) == 2 and all(drawn.get(f).plots is None for f in result.files)
    mine = require_checks(run(FILES[1:3]))
    a, b = tmp_path / "here", tmp_path / "workers"
    write_all(mine, a, provenance={"tool": "t"}, with_plots=False)
    write_all(result, b, provenance={"tool": "t"}, with_plots=False, pieces=drawn)
    assert differences(a, b) == [] and not (b / "plots").exists()
