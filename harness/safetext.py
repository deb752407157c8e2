"""Untrusted text made safe to show: on a terminal, in a report, in a log.

File names, titles, part and node names and notes come from files anyone may have written.  Shown
as they are, control characters drive the terminal (``ESC ]0;…BEL`` sets a window title, ``ESC
[2J`` clears the screen, U+009B is a one-character CSI), bidi overrides (U+202E …) reorder what a
reviewer reads, and a lone surrogate (a file name that is not UTF-8, read with Python's
``surrogateescape``) cannot be encoded at all.  ``printable`` replaces each such character by a
visible escape (``\\x1b``, ``\\u202e``, ``\\udcff``), so the text stays readable and nothing is
silently lost; tab and newline are kept.
"""

from __future__ import annotations

import re

#: C0 controls but tab and newline, DEL, C1 controls, the bidi embedding, override and isolate
#: controls (and the marks), the line and paragraph separators, and the surrogate range
_UNSAFE = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u061c\u200e\u200f\u2028-\u202e"
                     "\u2066-\u2069\ud800-\udfff]")


def _escape(match: re.Match) -> str:
    code = ord(match.group())
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"


def printable(text: str) -> str:
    """``text`` with every control, bidi-control and surrogate character shown as an escape
    (``\\x1b``, ``\\u202e``); tab and newline stay as they are."""
    return _UNSAFE.sub(_escape, str(text))
