"""The energy floor is small against the energy itself, never the circuit's largest stored energy.

Circuit: a 400 V source charges a 625 µF DC link through 100 Ω (½CV² = 50 J stored) and, on its
own branch, a 125 nF snubber capacitor through a 10 kΩ bleed.  Reference: charging a capacitor
from a step through any resistance dissipates ½CV² in it (common practice), so the bleed
dissipates ½ · 125 nF · (400 V)² = 10 mJ.  Judged at 1e-5 relative, a 0.1 % slip (10 µJ) must be
caught; a floor of ENERGY_FLOOR times the 50 J stored elsewhere (50 µJ) let it pass.
"""

from __future__ import annotations

from dataclasses import replace

import pytest

from harness import tolerances as T
from harness.circuitfile import parse_circuit
from harness.compare import CheckContext, compare_file
from harness.compare.energy import _noise_energy, energy_floor
from harness.model import Probe
from harness.outcome import ENGINES_DISAGREE, MISMATCH, PASS
from harness import closedform
from harness.simulate import solve as numeric

BLEED = 0.5 * 125e-9 * 400.0 ** 2      # ½CV² = 10 mJ (common practice)
LINK = 0.5 * 625e-6 * 400.0 ** 2       # 50 J stored in the link


def _text(hand: float) -> str:
    return f"""
title = "bleed beside a DC link"
[parts]
V1 = {{ kind = "voltage-source", nodes = ["bus", "gnd"], value = "0 V", steps = [["0 s", "400 V"]] }}
Rpre = {{ kind = "resistor", nodes = ["bus", "dc"], value = "100" }}
Clink = {{ kind = "capacitor", nodes = ["dc", "gnd"], value = "625u" }}
Rb = {{ kind = "resistor", nodes = ["bus", "snub"], value = "10k" }}
Cb = {{ kind = "capacitor", nodes = ["snub", "gnd"], value = "125n" }}

[[expect]]
through = "Rb"
energy = {{ part = "Rb", value = "{hand!r} J" }}
tolerance = 1e-5
"""


def _energy_field(text: str, numeric_solution=None):
    circuit = parse_circuit(text)
    exact = closedform.solve(circuit)
    num = numeric(circuit) if numeric_solution is None else numeric_solution(circuit)
    check = compare_file(circuit, exact, num).checks[0]
    return next(f for f in check.fields if f.name == "energy"), circuit, exact


def test_the_bleed_energy_is_half_cv_squared_and_passes():
    """The right hand value passes against ½CV² with both engines present."""
    field, _, _ = _energy_field(_text(BLEED))
    assert field.closed_form == pytest.approx(BLEED, rel=1e-9)
    assert field.verdict == PASS and field.numeric is not None


def test_a_small_slip_beside_a_large_store_is_a_mismatch():
    """A 0.1 % slip (10 µJ) at 1e-5 relative: below the old floor (1e-6 of the 50 J stored in
    the link, 50 µJ) but above the part's own floor, so it is now a mismatch."""
    field, circuit, exact = _energy_field(_text(BLEED * 1.001))
    assert field.verdict == MISMATCH, field
    ctx = CheckContext(circuit, exact, None, Probe("through", ("Rb",)), 0)
    floor = energy_floor(ctx, field.closed_form, "Rb")
    assert floor < 1e-3 * BLEED < T.ENERGY_FLOOR * LINK   # the old floor would have hidden it


class _EnergySlip:
    """The real numeric solution with every energy 0.1 % high (100 ENERGY_ENGINE_RELATIVE)."""

    def __init__(self, real) -> None:
        self._real = real

    def __getattr__(self, name):
        return getattr(self._real, name)

    def energy(self, part, k, until=None):
        got = self._real.energy(part, k, until)
        return replace(got, energy=got.energy + 1e-3 * BLEED)


def test_a_small_engine_error_beside_a_large_store_is_engines_disagree():
    """A 10 µJ numeric error on the 10 mJ bleed (old floor 50 µJ) is engines-disagree."""
    field, _, _ = _energy_field(_text(BLEED), lambda c: _EnergySlip(numeric(c)))
    assert field.verdict == ENGINES_DISAGREE, field


SHARE = """
title = "ideal switch shares charge"
[parts]
C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1u", initial = "1 V" }
S1 = { kind = "switch", nodes = ["a", "b"], state = "open", steps = [["0 s", "closed"]] }
C2 = { kind = "capacitor", nodes = ["b", "gnd"], value = "1u", initial = "0 V" }
R1 = { kind = "resistor", nodes = ["b", "gnd"], value = "1k" }

[[expect]]
node = "b"
energy = { part = "S1", value = "250 nJ" }
"""


def test_an_ideal_switch_is_judged_on_the_energy_stored_at_its_event():
    """An ideal switch has no R I^2 T of its own: its floor scale is the stored energy at the
    event (½ C1 (1 V)² = 500 nJ), which bounds its jump loss, ½ C1 C2/(C1 + C2) V² = 250 nJ
    (charge sharing between capacitors, textbook); without it the switch's scale would be the
    rounding-noise floor alone."""
    circuit = parse_circuit(SHARE)
    exact = closedform.solve(circuit)
    field = compare_file(circuit, exact, numeric(circuit)).checks[0].fields
    field = next(f for f in field if f.name == "energy")
    assert field.closed_form == pytest.approx(250e-9, rel=1e-9) and field.verdict == PASS
    ctx = CheckContext(circuit, exact, None, Probe("node", ("b",)), 0)
    assert energy_floor(ctx, 0.0, "S1") >= T.JUMP_ENERGY_NOISE * 500e-9 * (1 - 1e-12)
    assert _noise_energy(ctx) < T.JUMP_ENERGY_NOISE * 500e-9     # alone: only a noise floor
    # and the floor is small against the loss itself: a hand 0 J is a mismatch
    assert energy_floor(ctx, 250e-9, "S1") < 1e-3 * 250e-9
