"""One progress bar on stderr for a whole run: the files' analysis, then the report's plots.

The command line makes one ``Progress``; the runner adds the files and steps it as each file
finishes, the report writer adds the plots and steps it as each is drawn, so the bar does not
finish while plots are still being drawn.  Shown only on a terminal and for more than
``MIN_STEPS`` steps; otherwise every call does nothing.
"""

from __future__ import annotations

import sys

#: fewer steps than this draw no bar
MIN_STEPS = 4


class Progress:
    """A bar whose total grows as the run learns of more work (files, then plots)."""

    def __init__(self, enabled: bool = True, stream=None) -> None:
        self._stream = stream or sys.stderr
        self._enabled = bool(enabled) and self._stream.isatty()
        self._bar = None
        self._total = 0

    def add(self, count: int, what: str) -> None:
        """``count`` more steps, described as ``what`` (``"analysing"``, ``"plots"``)."""
        self._total += count
        if not self._enabled or self._total < MIN_STEPS:
            return
        if self._bar is None:
            from tqdm import tqdm
            self._bar = tqdm(total=self._total, unit="step", leave=False, file=self._stream)
        self._bar.total = self._total
        self._bar.set_description(what)
        self._bar.refresh()

    def step(self, count: int = 1) -> None:
        """``count`` steps done."""
        if self._bar is not None:
            self._bar.update(count)

    def close(self) -> None:
        """Remove the bar (it leaves no line behind)."""
        if self._bar is not None:
            self._bar.close()
            self._bar = None
