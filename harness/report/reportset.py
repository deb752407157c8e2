"""A run's report set put in place all at once: every file new, or every file as before.

``publish`` first checks every name it will replace (a report file that is a folder or a link,
a ``plots`` that is a link or a file: refused before anything is written, so no link is ever
followed out of the report folder and nothing in a link's target is touched).  It then writes the
whole set into a staging folder inside the report folder (same file system; a full disk or any
other failure removes it and leaves the old set whole), and swaps: the old files are moved into a
second hidden folder, the new ones moved in, and on any failure every move is undone.  The
staged files are on disk before the swap (one ``syncfs``, else an ``fsync`` per file).  Renames in
one folder need no space, so the swap does not fail for a full disk.  SIGINT and SIGTERM are held
during the swap (a few renames), so a signal cannot leave it half done; an interruption that
arrives during it is raised after it, marked ``reports_written``.
"""

from __future__ import annotations

import contextlib
import os
import re
import shutil
import signal
import tempfile
import threading
from pathlib import Path

from .atomic import ReportError

#: the hidden folders of a swap (left behind only if the process is killed during one)
_STAGE, _OLD = ".tauproof-new-", ".tauproof-old-"


def publish(folder: Path, files: dict[str, bytes], plots: dict[str, bytes], plot_dir: str,
            ours: re.Pattern) -> list[Path]:
    """Replace the report set in ``folder`` by ``files`` (name -> bytes) and ``plots`` (name ->
    bytes, in ``folder/plot_dir``); plots an earlier run left there whose names match
    ``ours`` and that this run does not write are removed with the old set.

    Returns the paths written: ``files`` in their order, then the plots.

    Raises:
        ReportError: a name is a folder, a link or otherwise not replaceable, or writing or
            swapping failed (the folder then holds the previous set, unchanged).
    """
    folder = Path(folder)
    _check_names(folder, list(files), plot_dir)
    stage = _hidden(folder, _STAGE)
    try:
        _write_set(stage, files, plots, plot_dir)
        stale = _stale(folder / plot_dir, ours, set(plots))
        _swap(folder, stage, _hidden(folder, _OLD), list(files),
              [f"{plot_dir}/{n}" for n in plots], [f"{plot_dir}/{n}" for n in stale], plot_dir)
    finally:
        shutil.rmtree(stage, ignore_errors=True)
    return [folder / n for n in files] + [folder / plot_dir / n for n in plots]


def _check_names(folder: Path, names: list[str], plot_dir: str) -> None:
    """Refuse names the swap must not replace: a folder or link instead of a report file, a
    link or file instead of the plots folder."""
    for name in names:
        path = folder / name
        if path.is_symlink() or (path.exists() and not path.is_file()):
            what = "a symbolic link" if path.is_symlink() else "not a regular file"
            raise ReportError(f"cannot write the reports: {path} is {what}; tauproof replaces "
                              f"only files it can write in place (remove or rename it)", path)
    plots = folder / plot_dir
    if plots.is_symlink() or (plots.exists() and not plots.is_dir()):
        what = "a symbolic link" if plots.is_symlink() else "not a folder"
        raise ReportError(f"cannot write the reports: {plots} is {what}; tauproof never writes "
                          f"through a link out of the report folder (remove or rename it)", plots)


def _hidden(folder: Path, prefix: str) -> Path:
    try:
        return Path(tempfile.mkdtemp(prefix=prefix, dir=folder))
    except OSError as exc:
        raise ReportError(f"cannot write in the report folder {folder}: {exc.strerror or exc}",
                          folder) from exc


def _write_set(stage: Path, files: dict[str, bytes], plots: dict[str, bytes],
               plot_dir: str) -> None:
    """Every file of the set into ``stage`` (plots in ``stage/plot_dir``), then all synced to
    disk (``_sync``) before anything is swapped."""
    items = [(stage / n, data) for n, data in files.items()]
    if plots:
        (stage / plot_dir).mkdir()
        items += [(stage / plot_dir / n, data) for n, data in plots.items()]
    for path, data in items:
        with _naming(stage, path):
            with open(path, "xb") as handle:
                handle.write(data)
            os.chmod(path, 0o644)
    _sync(stage, [path for path, _ in items])


def _sync(stage: Path, paths: list[Path]) -> None:
    """The staged files' data on disk: one ``syncfs(2)`` of their file system where the C
    library has it (Linux), else (or if it fails) an ``fsync`` per file.  An fsync costs a
    device cache flush each, ~5 ms a file on the test machine (1.6 s for 280 plots), one
    syncfs 0.02 s."""
    if _syncfs(stage):
        return
    for path in paths:
        with _naming(stage, path):
            descriptor = os.open(path, os.O_RDONLY)
            try:
                os.fsync(descriptor)
            finally:
                os.close(descriptor)


def _syncfs(folder: Path) -> bool:
    """Whether one ``syncfs`` of the file system holding ``folder`` succeeded."""
    try:
        import ctypes
        call = ctypes.CDLL(None, use_errno=True).syncfs
    except Exception:        # noqa: BLE001 - no such call here: the caller syncs per file
        return False
    descriptor = os.open(folder, os.O_RDONLY)
    try:
        return call(descriptor) == 0
    finally:
        os.close(descriptor)


@contextlib.contextmanager
def _naming(stage: Path, path: Path):
    """An ``OSError`` on ``path`` raised as the ``ReportError`` that names it."""
    try:
        yield
    except OSError as exc:
        name = path.relative_to(stage)
        raise ReportError(f"cannot write {stage.parent / name}: {exc.strerror or exc} "
                          f"(the previous reports are left as they were)",
                          stage.parent / name) from exc


def _stale(plot_folder: Path, ours: re.Pattern, keep: set[str]) -> list[str]:
    if not plot_folder.is_dir():
        return []
    return sorted(p.name for p in plot_folder.iterdir()
                  if p.name not in keep and ours.match(p.name) and p.is_file()
                  and not p.is_symlink())


def _swap(folder: Path, stage: Path, old: Path, names: list[str], new_plots: list[str],
          stale: list[str], plot_dir: str) -> None:
    """Move the old set into ``old`` and the new one from ``stage`` into ``folder``, then remove
    ``old``; undo every move on failure (``old`` is kept if a file could not be moved back)."""
    done: list[tuple[Path, Path]] = []
    made: list[Path] = []
    with _signals_held() as held:
        try:
            (old / plot_dir).mkdir()
            for name in names + new_plots + stale:
                if os.path.lexists(folder / name):
                    _move(folder / name, old / name, done)
            if new_plots and not (folder / plot_dir).is_dir():
                (folder / plot_dir).mkdir()
                made.append(folder / plot_dir)
            for name in names + new_plots:
                _move(stage / name, folder / name, done)
        except BaseException as exc:
            whole = _undo(done, made)
            if whole:
                shutil.rmtree(old, ignore_errors=True)
            if not isinstance(exc, OSError):
                raise
            left = ("the previous reports are left as they were" if whole else
                    f"some previous reports could not be moved back; they are in {old}")
            raise ReportError(f"cannot put the reports in place in {folder}: "
                              f"{exc.strerror or exc} ({left})", folder) from exc
        held.committed = True
    shutil.rmtree(old, ignore_errors=True)


def _undo(done: list[tuple[Path, Path]], made: list[Path]) -> bool:
    """Every move in ``done`` reversed, last first, and the folders ``made`` removed; whether
    every move went back."""
    whole = True
    for source, target in reversed(done):
        try:
            os.replace(target, source)
        except OSError:
            whole = False
    for path in made:
        with contextlib.suppress(OSError):
            path.rmdir()
    return whole


def _move(source: Path, target: Path, done: list) -> None:
    os.replace(source, target)
    done.append((source, target))


class _Held:
    committed = False


@contextlib.contextmanager
def _signals_held():
    """SIGINT and SIGTERM held (blocked) for the block (main thread, POSIX); one that arrived
    meanwhile is raised on leaving, with ``reports_written`` set when the block committed."""
    held = _Held()
    can = hasattr(signal, "pthread_sigmask") and threading.current_thread() is \
        threading.main_thread()
    mask = {signal.SIGINT, signal.SIGTERM}
    previous = signal.pthread_sigmask(signal.SIG_BLOCK, mask) if can else None
    try:
        yield held
    finally:
        if can:
            try:
                signal.pthread_sigmask(signal.SIG_SETMASK, previous)
                _ = os.getpid()  # a pending signal's handler runs here, inside this try
            except BaseException as stop:
                stop.reports_written = held.committed  # type: ignore[attr-defined]
                raise
