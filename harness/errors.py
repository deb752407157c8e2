"""The one exception family for input errors, and the warnings about input that still runs.

Every error that comes from what the user wrote carries the file, the part (or expectation) and
the field, so the command line can print a message that points at the fault and exit with code 2.
An ``InputWarning`` carries the same location but does not stop the check.
"""

from __future__ import annotations

from dataclasses import dataclass


class InputError(Exception):
    """A circuit file that cannot be analysed, with its location.

    Attributes:
        file: path of the circuit file as the user gave it (or None before it is known).
        part: the part name, or an expectation label such as ``expect #2``, or None.
        field: the field name inside the part (``value``, ``nodes`` …), or None.
        line: 1-based line in the file where the TOML reader reports one, or None.
        message: what is wrong and, where possible, what to do about it.
    """

    def __init__(self, message: str, *, file: str | None = None, part: str | None = None,
                 field: str | None = None, line: int | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.file = file
        self.part = part
        self.field = field
        self.line = line

    def located(self, *, file: str | None = None, part: str | None = None,
                field: str | None = None) -> "InputError":
        """Return a copy with missing location fields filled in (existing ones are kept)."""
        err = type(self)(self.message, file=self.file or file, part=self.part or part,
                         field=self.field or field, line=self.line)
        return err

    def where(self) -> str:
        """The location as ``file:line: part C1, field value``."""
        return location(self.file, self.line, self.part, self.field)

    def __str__(self) -> str:
        return f"{self.where()}: {self.message}"


def location(file: str | None, line: int | None, part: str | None, field: str | None) -> str:
    """``file:line: part C1, field value`` (``expect #2`` stands as it is; parts are optional)."""
    head = file or "<input>"
    if line is not None:
        head += f":{line}"
    bits = []
    if part:
        bits.append(part if part.startswith("expect") else f"part {part}")
    if field:
        bits.append(f"field {field}")
    return head + (": " + ", ".join(bits) if bits else "")


@dataclass(frozen=True, eq=False)
class InputWarning:
    """Something in a circuit file that is probably a slip but can still be analysed (a value
    far outside its kind's plausible range, a tolerance without ``%``): the check runs and the
    file's result carries the warning.  Same location fields as ``InputError``."""

    message: str
    file: str | None = None
    part: str | None = None
    field: str | None = None
    line: int | None = None

    def __str__(self) -> str:
        return f"{location(self.file, self.line, self.part, self.field)}: {self.message}"


class UnitError(InputError):
    """A quantity that cannot be read, or whose unit does not fit its field."""


class TopologyError(InputError):
    """A circuit whose structure makes the analysis ill-posed (loops, cutsets, floating nodes)."""


class InitialStateError(InputError):
    """Initial conditions that contradict the circuit at 0-, or a pre-step value that is undefined."""
