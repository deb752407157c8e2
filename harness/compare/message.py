"""The words of an engines-disagree verdict (the hand value is never blamed for it)."""

from __future__ import annotations

from ..units import format_apart, format_si


def engine_message(closed, numeric, unit: str) -> str:
    """The message of an engines-disagree verdict."""
    closed_text, numeric_text = format_apart([closed, numeric], unit)
    return (f"the closed form gives {closed_text} but the numerical engine gives "
            f"{numeric_text}: an engine problem, not a hand-calculation error")


def engine_pair(closed, numeric, unit: str) -> str:
    def text(v):
        return "none" if v is None else format_si(v, unit)
    return f"the closed form gives {text(closed)} but the numerical engine gives {text(numeric)}"
