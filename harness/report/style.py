"""How console text looks: colour for verdicts and the width to fit, decided once per run.

Colour follows the common conventions: on when the stream is a terminal, off when it is piped;
``NO_COLOR`` (any non-empty value) turns it off, ``FORCE_COLOR`` (non-empty, not ``0``) turns it
on even when piped, and ``NO_COLOR`` wins over both.  The width is ``COLUMNS`` when set, else the
terminal's; None (unknown) when the stream is not a terminal and ``COLUMNS`` is unset.
"""

from __future__ import annotations

import os
import shutil
from dataclasses import dataclass
from typing import Mapping, TextIO

#: SGR colour codes per verdict
COLOURS = {"pass": "32", "mismatch": "1;31", "engines-disagree": "1;33", "error": "1;35",
           "finding": "1;35", "unchecked": "1;31"}
#: no console is narrower than this
MIN_WIDTH = 40


@dataclass(frozen=True)
class Style:
    """``colour``: whether verdicts are coloured; ``width``: columns to fit, None if unknown."""

    colour: bool = False
    width: int | None = None

    def verdict(self, text: str, verdict: str | None = None) -> str:
        """``text`` in the colour of ``verdict`` (``text`` itself by default)."""
        code = COLOURS.get((verdict or text).lower())
        if not self.colour or code is None:
            return text
        return f"\x1b[{code}m{text}\x1b[0m"


def for_stream(stream: TextIO, environ: Mapping[str, str] | None = None) -> Style:
    """The style for writing to ``stream`` under ``environ`` (default ``os.environ``)."""
    env = os.environ if environ is None else environ
    try:
        tty = stream.isatty()
    except (AttributeError, ValueError):
        tty = False
    colour = tty
    if env.get("FORCE_COLOR", "") not in ("", "0"):
        colour = True
    if env.get("NO_COLOR", ""):
        colour = False
    width = None
    columns = env.get("COLUMNS", "")
    if columns.isdigit() and int(columns) > 0:
        width = int(columns)
    elif tty:
        width = shutil.get_terminal_size().columns
    return Style(colour=colour, width=None if width is None else max(width, MIN_WIDTH))
