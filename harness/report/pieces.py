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

import dataclasses
import hashlib
from dataclasses import dataclass

import numpy as np

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
    """What a file's pieces are drawn from, checked before they are used: its path and title,
    and a digest (``digest``) of the rest the drawing reads: the schedule's waveforms; each
    check's index, probe, time, its fields' names, units and values (the hand curve) and its
    trace (every waveform, mark and line); each spread's words, field, quantities and samples.
    Pieces drawn from a result that differs in any of them (another run's, a check replaced
    after the worker drew it) are left aside and the file is drawn again."""
    checks = tuple((c.index, c.probe, c.at, tuple((f.name, f.unit, f.hand, f.closed_form,
                                                   f.numeric) for f in c.fields), c.trace)
                   for c in file.checks)
    spreads = tuple((s.check, s.name, tuple(s.units), s.samples, s.sample_deviations)
                    for s in file.spreads)
    return file.file, file.title, digest((file.schedule, checks, spreads))


def digest(value) -> str:
    """A BLAKE2b digest (hex) of ``value``'s content: None, numbers, text, numpy arrays (their
    dtype, shape and bytes), sequences, mappings and dataclasses (field by field), each fed
    with its type, so equal content gives equal digests in any process (a result that
    travelled from a worker included) and a changed sample or value a different one."""
    h = hashlib.blake2b(digest_size=16)
    _feed(h, value)
    return h.hexdigest()


def _feed(h, value) -> None:
    """``value`` into the hash ``h`` (``digest``), with a tag and length before each part."""
    if isinstance(value, np.ndarray):
        data = np.ascontiguousarray(value)
        h.update(f"array {data.dtype.str} {data.shape}|".encode())
        h.update(data.tobytes() if data.dtype != object else repr(data.tolist()).encode())
    elif dataclasses.is_dataclass(value) and not isinstance(value, type):
        h.update(f"{type(value).__qualname__}|".encode())
        for f in dataclasses.fields(value):
            _feed(h, getattr(value, f.name))
    elif isinstance(value, (tuple, list)):
        h.update(f"seq {len(value)}|".encode())
        for item in value:
            _feed(h, item)
    elif isinstance(value, dict):
        h.update(f"map {len(value)}|".encode())
        for key, item in value.items():
            _feed(h, key)
            _feed(h, item)
    else:       # None, bool, int, float (repr is exact), str, numpy scalars
        text = repr(value.item() if isinstance(value, np.generic) else value)
        h.update(f"{type(value).__name__} {len(text)}|{text}".encode())


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
