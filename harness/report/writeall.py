"""Writing a run's report set: every report file of ``WRITERS`` plus the SVG plots, as one set.

The names here are the package's (``harness.report.write_all`` …); ``harness/report/__init__.py``
forwards them on first use, so that a command printing only the console table or the JSON
document does not load the HTML, Markdown, JUnit and plot writers."""

from __future__ import annotations

import re
import signal
import warnings
from pathlib import Path

from typing import Mapping

from ..outcome import RunResult
from ..progress import Progress
from . import csvout, html, jsonout, junit, markdown, spreads
from .pieces import Drawn, plot_items, plot_one
from .plot_schedule import SCHEDULE
from .atomic import ReportError, ensure_dir, safe_name
from .context import ReportContext
from .reportset import publish

__all__ = ["REPORT_FILES", "WRITERS", "ReportError", "render_plots", "write_all"]

#: the report-file writers, in the order ``write_all`` returns their files
WRITERS = (html, markdown, csvout, jsonout, junit)
#: the report files, one per writer
REPORT_FILES = tuple(writer.FILE for writer in WRITERS)
PLOT_DIR = "plots"
#: the plot files' suffix
PLOT_SUFFIX = ".svg"
#: names this package gives plot files (and gave them as PNG); older ones matching it are
#: removed from plots/
_PLOT_NAME = re.compile(r"^\d{3,}-[A-Za-z0-9_-]+-(c\d+|schedule|s\d+)\.(svg|png)$")


#: fewer plots than this are drawn in this process even when jobs > 1
PARALLEL_PLOTS = 16


def render_plots(run: RunResult, jobs: int = 1, progress: Progress | None = None,
                 pieces: Drawn | None = None) -> dict[tuple[int, int], str]:
    """(file index, check index) -> SVG text for every check that carries a trace, and
    (file index, ``SCHEDULE``) -> the file's whole-schedule plot.

    A file's plots drawn already where it was analysed (``pieces``) are taken as they are;
    with ``jobs`` > 1 and many plots left they are drawn in worker processes; the result is
    the same.  ``progress`` is stepped per plot.
    """
    ready = {}
    items = []
    for i, file in enumerate(run.files):
        got = pieces.get(file) if pieces is not None else None
        if got is not None and got.plots is not None:
            ready[i] = [((i, key), chart, problem) for key, chart, problem in got.plots]
        else:
            items += plot_items(file, i)
    progress = progress or Progress(False)
    progress.add(len(items) + sum(map(len, ready.values())), "plots")
    if jobs > 1 and len(items) >= PARALLEL_PLOTS:
        from ..pool import usable_jobs
        jobs = usable_jobs(jobs)
    if jobs > 1 and len(items) >= PARALLEL_PLOTS:
        drawn = [_stepped(d, progress) for d in _draw_in_workers(items, jobs)]
    else:
        drawn = [_stepped(plot_one(item), progress) for item in items]
    if ready:
        progress.step(sum(map(len, ready.values())))
        drawn = _in_file_order(ready, drawn)
    out = {}
    for key, chart, problem in drawn:
        if problem:
            warnings.warn(problem, RuntimeWarning, stacklevel=2)
        elif chart is not None:
            out[key] = chart
    return out


def _in_file_order(ready: dict, drawn: list) -> list:
    """The plots of the files in ``ready`` (file index -> its plots) and those ``drawn`` here,
    in the order of the files (each file's plots stay together, in ``plot_items`` order)."""
    by_file: dict = {}
    for plot in drawn:
        by_file.setdefault(plot[0][0], []).append(plot)
    by_file.update(ready)
    return [plot for i in sorted(by_file) for plot in by_file[i]]


def _stepped(drawn, progress: Progress):
    progress.step()
    return drawn


def _draw_in_workers(items: list, jobs: int) -> list:
    """``plot_one`` of every item in ``jobs`` worker processes (``harness.pool``: killed with
    the run on SIGINT or SIGTERM, and dying with it); a lost worker costs its plot only.

    Raises:
        KeyboardInterrupt, pool.Interrupted: the run was stopped (every worker is gone).
    """
    from ..pool import RunInterrupted, run_tasks

    def lost(i: int, how: str = "timed out"):
        key, what, file = items[i]
        return key, None, f"{file}: no plot: the worker drawing it {how}"

    try:
        done = run_tasks([(item,) for item in items], plot_one, jobs=jobs, timeout=None,
                         on_timeout=lost, on_death=lost)
    except RunInterrupted as stop:
        if stop.signum == signal.SIGINT:
            raise KeyboardInterrupt from None
        from ..pool import Interrupted
        raise Interrupted(stop.signum) from None
    return [done[i] for i in range(len(items))]


def _spec_histograms(run: RunResult, with_plots: bool) -> dict:
    """(file index, field index) -> each spec'd field's histogram SVG, and with
    ``spreads.SENSITIVITY`` appended its sensitivity chart (``report.spreads``)."""
    if not with_plots:
        return {}
    drawn = {(i, j): spreads.histogram(s) for i, f in enumerate(run.files)
             for j, s in enumerate(f.spreads)}
    drawn.update({(i, j, spreads.SENSITIVITY): spreads.sensitivity_chart(s)
                  for i, f in enumerate(run.files) for j, s in enumerate(f.spreads)})
    return {key: chart for key, chart in drawn.items() if chart}


def _with_spreads(run: RunResult, files: dict, charts: dict, names: dict, histograms: dict,
                  pieces: Drawn | None = None):
    """Add the spec samples' CSV (a file's rows from ``pieces`` where drawn already) and each
    spec'd field's histogram and sensitivity chart to the set."""
    if not any(f.spreads for f in run.files):
        return charts, names
    files[spreads.SAMPLES_CSV] = spreads.samples_csv(run, pieces).encode("utf-8")
    charts, names = dict(charts), dict(names)
    for key, chart in histograms.items():
        charts[("spec",) + key] = chart
        names[("spec",) + key] = _spec_plot_name(*key)
    return charts, names


def _spec_plot_name(i: int, j: int, kind: str = "") -> str:
    """``003-spec-s2.svg`` (histogram), ``003-spec-sensitivity-s2.svg`` (chart)."""
    return f"{i + 1:03d}-spec{'-' + kind if kind else ''}-s{j + 1}{PLOT_SUFFIX}"


def plot_name(run: RunResult, key: tuple[int, int | str]) -> str:
    """The plot's file name: ``003-logger-board-reset-c2.svg``, ``003-logger-board-reset-
    schedule.svg`` (sanitised, inside the folder)."""
    i, index = key
    file = run.files[i]
    stem = safe_name(file.title or Path(file.file).stem)
    return f"{i + 1:03d}-{stem}-{SCHEDULE if index == SCHEDULE else f'c{index + 1}'}{PLOT_SUFFIX}"


def write_all(run: RunResult, report_dir: Path, *, with_plots: bool = True,
              jobs: int = 1, progress: Progress | None = None,
              provenance: Mapping | None = None, pieces: Drawn | None = None) -> list[Path]:
    """Write the report files (``REPORT_FILES``, one per writer of ``WRITERS``) and the plot
    SVGs into ``report_dir``.

    Returns the paths written: the report files in ``REPORT_FILES`` order, then the plots.
    The folder is created if missing.  Everything is rendered first, then ``publish`` puts the
    whole set in place at once: a serializer's exception, a full disk, a report name that is a
    folder or a link, or a signal leave the previous set as it was; plot files an earlier run
    left in ``plots/`` under this package's naming pattern go with it.
    ``with_plots=False`` skips the plots (every report is still written).  ``progress`` is
    stepped per plot; ``provenance`` (``report.provenance.collect``) heads the HTML and Markdown reports.
    ``pieces``: the files' plots and sample rows drawn already where they were analysed
    (``report.pieces``; the runner fills it); the rest is drawn here.

    Raises:
        ReportError: the folder cannot be created or written, or the set cannot be put in place.
    """
    folder = ensure_dir(Path(report_dir))
    charts = render_plots(run, jobs, progress, pieces) if with_plots else {}
    names = {key: plot_name(run, key) for key in charts}
    links = {key: f"{PLOT_DIR}/{name}" for key, name in names.items()}
    # every serializer runs before any file is touched: if one raises, the old report stays whole
    histograms = _spec_histograms(run, with_plots)
    spec_links = {(run.files[key[0]].file,) + key[1:]: f"{PLOT_DIR}/{_spec_plot_name(*key)}"
                  for key in histograms}
    context = ReportContext(charts, links, provenance or {}, histograms,
                            spec_links if with_plots else {})
    files = {writer.FILE: writer.write(run, context).encode("utf-8") for writer in WRITERS}
    charts, names = _with_spreads(run, files, charts, names, histograms, pieces)
    return publish(folder, files, {names[key]: chart.encode("utf-8")
                                   for key, chart in charts.items()}, PLOT_DIR, _PLOT_NAME)
