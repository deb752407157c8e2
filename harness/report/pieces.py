"""What the reports draw from one file's result alone, drawn where the file was analysed.

With ``--jobs N`` each file is analysed in a worker process (``harness.pool``); the report's
pieces of that file — its plots (the whole schedule and each check's) and its rows of the spec
samples' CSV — are drawn in the same worker right after the analysis and travel back with the
result, so they are drawn while other files are still being analysed and the parent, after the
last file, only joins them (``write_all(..., pieces=drawn)``).  Measured on the library: these
pieces were ~0.5 s of the parent's ~1 s of serial work after the last file (at load ~3;
tests/benchmarks/RESULTS.md, "Parallel runs").

The pieces are the same functions of the same values as ``write_all`` would call, so the report
bytes are the same with or without them; a file without pieces (run in this process, on a
cluster, a worker that died or timed out, pieces drawn from a result of another shape) is drawn
by ``write_all`` as before.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..outcome import FileResult
from .plot_schedule import SCHEDULE


@dataclass(frozen=True)
class FilePieces:
    """One file's drawn pieces.

    Attributes:
        plots: (check index or ``SCHEDULE``, SVG text or None, warning text or None) for the
            schedule, then each check, in ``plot_items`` order; None when plots were not asked
            for.
        samples: the file's rows of the spec samples' CSV (``spreads.sample_rows``).
        shape: what they were drawn from (``shape``), checked before they are used.
    """

    plots: tuple | None
    samples: str
    shape: tuple


def shape(file: FileResult) -> tuple:
    """What a file's pieces depend on beyond the objects that travel with them: its path,
    title, check indices and number of spreads (``require_checks`` changes none of them)."""
    return (file.file, file.title, tuple(c.index for c in file.checks), len(file.spreads),
            file.schedule is None)


def plot_items(file: FileResult, i) -> list[tuple]:
    """(key, what to draw, file path) of a file's plots, ``i`` its place in the run: the
    schedule ((i, ``SCHEDULE``), the file), then each check ((i, check index), the check)."""
    return [((i, SCHEDULE), file, file.file)] + [((i, check.index), check, file.file)
                                                  for check in file.checks]


def plot_one(item: tuple) -> tuple:
    """(key, check or file, file path) -> (key, SVG text or None, warning text or None)."""
    from . import plots
    from .plot_schedule import plot_schedule
    key, what, file = item
    try:
        if key[1] == SCHEDULE:
            return key, plot_schedule(what), None
        return key, plots.plot_check(what), None
    except Exception as exc:  # a bad trace must not cost the whole report
        name = "the schedule" if key[1] == SCHEDULE else f"check #{what.index + 1}"
        return key, None, f"{file}: no plot for {name}: {exc}"


def draw(file: FileResult, with_plots: bool) -> FilePieces | None:
    """The file's pieces (plots only ``with_plots``); None if drawing them failed in a way
    ``plot_one`` does not catch (``write_all`` then draws the file itself, as before)."""
    from .spreads import sample_rows
    try:
        drawn = tuple((key[1], chart, problem) for key, chart, problem in
                      map(plot_one, plot_items(file, None))) if with_plots else None
        return FilePieces(drawn, sample_rows(file), shape(file))
    except Exception:  # noqa: BLE001 - the parent draws it and reports what goes wrong there
        return None


class Drawn:
    """The pieces of one run's files, by file path: the runner adds them as the files return
    from the workers (``add``), ``write_all`` takes those that fit the final result (``get``).
    ``with_plots``: whether the workers draw the plots too (not under ``--no-plots``)."""

    def __init__(self, with_plots: bool = True) -> None:
        self.with_plots = bool(with_plots)
        self._by_file: dict[str, FilePieces] = {}

    def add(self, path: str, pieces: FilePieces | None) -> None:
        if pieces is not None:
            self._by_file[path] = pieces

    def get(self, file: FileResult) -> FilePieces | None:
        """The pieces drawn for ``file``, or None (none, or drawn from a different result)."""
        pieces = self._by_file.get(file.file)
        return pieces if pieces is not None and pieces.shape == shape(file) else None

    def __len__(self) -> int:
        return len(self._by_file)
