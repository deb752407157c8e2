"""``tauproof derive`` and ``tauproof solve --formulas``: the worked derivation of each check,
and each computed field as a formula of part names to paste as a hand value.

Reads each file, solves it with the closed form only (the derivation's numbers and checks come
from it) and hands both to ``harness.derive``; sympy is imported here, never by ``check``.
"""

from __future__ import annotations

from pathlib import Path

from .errors import InputError


def _solved(path: str):
    from .circuitfile import read_circuit
    from .closedform import solve
    circuit = read_circuit(path)
    return circuit, solve(circuit)


def _files(paths) -> list[str]:
    from .runner import collect
    files, missing = collect(paths)
    return files + [m.file for m in missing]


def derive_text(paths, budget: float | None = None) -> tuple[str, int]:
    """The derivations of every file under ``paths`` and the exit code (2 on an input error)."""
    from .derive import derive
    from .derive.derivation import TIME_BUDGET
    from .report.derivation import text
    out, code = [], 0
    for path in _files(paths):
        try:
            circuit, sol = _solved(path)
        except (InputError, OSError) as err:
            out.append(f"{path}: {err}\n")
            code = 2
            continue
        out.append(f"== {circuit.title or path} ({path})\n")
        out.append(text(derive(circuit, sol, budget=TIME_BUDGET if budget is None else budget)))
    return "\n".join(out), code


def formula_lines(path: str) -> list[str]:
    """``expect #N  field = "= formula"`` for every field with an exact formula."""
    from .derive import derive
    try:
        circuit, sol = _solved(path)
    except (InputError, OSError):
        return []
    out = [f"formulas to paste as hand values ({Path(path).name}):"]
    for d in derive(circuit, sol):
        for name, f in d.fields().items():
            key = "crossing.time" if name == "crossing" else name
            out.append(f"  {d.label}  {key} = \"= {f.formula}\"")
    return out
