"""The worked derivation (``harness.derive``, ``tauproof derive``, ``solve --formulas``).

Sources: every formula is checked against the closed form (``harness.closedform``), itself
checked against sympy's exact solutions in ``test_closedform_sympy.py``.  Textbook forms:
Thevenin's theorem with the sources zeroed (Hayt, Kemmerly & Durbin, *Engineering Circuit
Analysis*, 8th ed., §8.1: τ = R_th·C for a divider, τ = L/R for an RL circuit); charge
conservation when two capacitors are connected (Hayt et al., §7.2: the shared voltage
(C1·V1 + C2·V2)/(C1 + C2)); the Miller effect (Sedra & Smith, *Microelectronic Circuits*,
7th ed., §10.3.3: a capacitance C across an inverting gain −A looks like (1 + A)·C).
"""

from __future__ import annotations

import time
from pathlib import Path

import pytest
import sympy as sp

from harness import formula
from harness.circuitfile import read_circuit
from harness.closedform import solve
from harness.derive import derive
from harness.derive.derivation import agrees
from harness.derive.network import Symbols
from harness.runner import check_file

LIBRARY = sorted((Path(__file__).parent.parent / "circuits" / "library").rglob("*.toml"))


def _derived(path):
    circuit = read_circuit(str(path))
    return circuit, derive(circuit, solve(circuit))


def _formulas(d):
    out = list(d.fields().items())
    out += [(f"R_th {s.name}", s.resistance) for s in d.storage if s.resistance]
    out += [(f"tau {s.name}", s.tau) for s in d.storage if s.tau]
    return [(k, f) for k, f in out if f is not None and f.formula is not None]


@pytest.mark.parametrize("path", LIBRARY, ids=lambda p: f"{p.parent.name}/{p.name}")
def test_every_formula_equals_the_closed_form(path):
    """Every pasteable formula, read back by the hand-value evaluator at the part values,
    equals the closed form's number within 1e-9 (relative, or of the probe's scale)."""
    circuit, derivations = _derived(path)
    values, units = Symbols(circuit).scope()
    for d in derivations:
        probe = max(abs(f.exact or 0) for f in (d.before, d.after, d.final) if f is not None)
        for name, f in _formulas(d):
            value = formula.evaluate("= " + f.formula, values, None, units)
            scale = probe if name in ("before", "after", "final") else abs(f.exact or 0)
            assert f.exact is None or agrees(value, f.exact, scale), (d.label, name)


def _file(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "c.toml"
    path.write_text(text)
    return path


def _expr(text: str) -> sp.Expr:
    plain = text.replace("par(", "_par(")
    names = {n: sp.Symbol(n) for n in ("E1", "C1", "C2", "V1", "V2", "Rs", "Cf")}
    return sp.sympify(plain, locals={"_par": lambda *a: 1 / sum(1 / x for x in a), **names})


DIVIDER = """title = "divider"
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "5 V"]] }
R1 = { kind = "resistor", nodes = ["in", "out"], value = "10k" }
R2 = { kind = "resistor", nodes = ["out", "gnd"], value = "22k" }
C1 = { kind = "capacitor", nodes = ["out", "gnd"], value = "100n" }
[[expect]]
node = "out"
"""


def test_divider_tau_is_r1_parallel_r2_times_c(tmp_path):
    """Textbook (Hayt et al. §8.1): τ = (R1‖R2)·C1 for a capacitor on a divider."""
    _, (d,) = _derived(_file(tmp_path, DIVIDER))
    assert d.tau.formula == "C1*par(R1, R2)"
    assert d.tau.display == "C1·(R1‖R2)"


def test_coil_with_series_resistor(tmp_path):
    """Textbook (Hayt et al. §8.1): τ = L/(R1 + R2) for a coil with its winding resistance."""
    text = """title = "coil"
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "12 V"]] }
R1 = { kind = "resistor", nodes = ["in", "a"], value = "100" }
R2 = { kind = "resistor", nodes = ["a", "b"], value = "47" }
L1 = { kind = "inductor", nodes = ["b", "gnd"], value = "10m" }
[[expect]]
through = "L1"
"""
    _, (d,) = _derived(_file(tmp_path, text))
    assert d.tau.formula == "L1/(R1 + R2)"


def test_charge_sharing_voltage(tmp_path):
    """Textbook (Hayt et al. §7.2): two capacitors charged to V1 and V2, then connected,
    share (C1·V1 + C2·V2)/(C1 + C2)."""
    text = """title = "share"
[parts]
V1 = { kind = "voltage-source", nodes = ["a1", "gnd"], value = "5 V" }
V2 = { kind = "voltage-source", nodes = ["b1", "gnd"], value = "2 V" }
S1 = { kind = "switch", nodes = ["a1", "a"], state = "closed", steps = [["1 ms", "open"]] }
S2 = { kind = "switch", nodes = ["b1", "b"], state = "closed", steps = [["1 ms", "open"]] }
C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1u" }
C2 = { kind = "capacitor", nodes = ["b", "gnd"], value = "3u" }
R1 = { kind = "resistor", nodes = ["a", "gnd"], value = "1G" }
R2 = { kind = "resistor", nodes = ["b", "gnd"], value = "1G" }
S3 = { kind = "switch", nodes = ["a", "b"], state = "open", steps = [["2 ms", "closed"]] }
[[expect]]
node = "a"
at = "2 ms"
"""
    circuit = read_circuit(str(_file(tmp_path, text.replace(
        'R1 = { kind = "resistor", nodes = ["a", "gnd"], value = "1G" }\n', "").replace(
        'R2 = { kind = "resistor", nodes = ["b", "gnd"], value = "1G" }\n', ""))))
    (d,) = derive(circuit, solve(circuit))
    c1, c2, v1, v2 = sp.symbols("C1 C2 V1 V2")
    assert sp.simplify(_expr(d.after.formula) - (c1 * v1 + c2 * v2) / (c1 + c2)) == 0
    assert d.jump_parts and d.loops


def test_miller_capacitance(tmp_path):
    """Sedra & Smith §10.3.3: Cf across an inverting gain −A seen from a source resistance
    Rs gives τ = Rs·(1 + A)·Cf (E1 is the gain, −A, so 1 − E1 = 1 + A)."""
    text = """title = "miller"
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "10 mV"]] }
Rs = { kind = "resistor", nodes = ["in", "g"], value = "10k" }
Cf = { kind = "capacitor", nodes = ["g", "out"], value = "0p5" }
E1 = { kind = "vcvs", nodes = ["out", "gnd"], value = "-40", control = ["g", "gnd"] }
[[expect]]
node = "g"
"""
    _, (d,) = _derived(_file(tmp_path, text))
    rs, cf, a = sp.symbols("Rs Cf A")
    got = _expr(d.tau.formula).subs(sp.Symbol("E1"), -a)
    assert sp.simplify(got - rs * (1 + a) * cf) == 0
    (part,) = d.storage
    assert sp.simplify(_expr(part.resistance.formula).subs(sp.Symbol("E1"), -a)
                       - rs * (1 + a)) == 0


def test_twelve_parts_within_budget(tmp_path):
    """A 12-part RC ladder (one source, six resistors, five capacitors) stays within the
    time budget: formulas where they came in time, else numbers only with the reason.

    The budget is wall time (a SIGALRM), but what the test holds it to is the CPU time this
    process spent (``time.process_time``): under load the wall clock also counts the time
    other processes had the cores, which failed a wall-clock limit.  The budget (0.2 s) is far
    below the 1-3 s of CPU the whole derivation takes (a 1 s budget was not always reached
    in the full suite, where earlier tests had filled sympy's cache; the test clears it), so the budget must cut it ("time" in
    ``limited``), and the CPU spent, at most the budget before the alarm, must stop within
    1.5 s after it: a budget that did not stop the work fails both."""
    lines = ['title = "ladder"', "[parts]",
             'V1 = { kind = "voltage-source", nodes = ["n0", "gnd"], value = "0 V", '
             'steps = [["0 s", "1 V"]] }']
    for i in range(1, 6):
        lines.append(f'R{i} = {{ kind = "resistor", nodes = ["n{i - 1}", "n{i}"], '
                     f'value = "{i}k" }}')
        lines.append(f'C{i} = {{ kind = "capacitor", nodes = ["n{i}", "gnd"], '
                     f'value = "{i}n" }}')
    lines.append('R6 = { kind = "resistor", nodes = ["n5", "gnd"], value = "10k" }')
    lines += ["[[expect]]", 'node = "n5"']
    circuit = read_circuit(str(_file(tmp_path, "\n".join(lines) + "\n")))
    assert len(circuit.parts) == 12
    sol = solve(circuit)
    budget = 0.2
    from sympy.core.cache import clear_cache
    clear_cache()          # earlier tests' expressions must not make the derivation quicker
    started = time.process_time()
    (d,) = derive(circuit, sol, budget=budget)
    spent = time.process_time() - started
    assert d.limited.startswith("time"), d.limited  # cut by the budget
    assert spent < budget + 1.5                     # and promptly, with the slack of one step
    assert d.final is not None and d.modes          # the numbers are always given


def test_pasted_formulas_check_exactly(tmp_path):
    """solve --formulas -> paste as hand values -> check passes (closed form, 1e-9)."""
    from harness.derivecmd import formula_lines
    path = _file(tmp_path, DIVIDER)
    pasted = [line.split("  ", 2)[2] for line in formula_lines(str(path))[1:]]
    assert any(p.startswith("tau = ") for p in pasted)
    text = DIVIDER + "\n".join(pasted) + "\n[settings]\ntolerance = 1e-9\n"
    result = check_file(str(_file(tmp_path, text)), numeric=False)
    assert result.verdict == "pass", [c.verdict for c in result.checks]


def test_derive_command_prints_the_steps(tmp_path, capsys):
    from harness.cli import main
    assert main(["derive", str(_file(tmp_path, DIVIDER))]) == 0
    out = capsys.readouterr().out
    assert "R_th = (R1‖R2)" in out and "x(∞) = " in out
