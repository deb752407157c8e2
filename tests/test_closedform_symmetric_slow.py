"""The passive symmetric route keeps a slow real mode 12 decades below its fastest one.

A 40-section RC ladder (1 kohm, 1 nF: modes down to ~0.25 us) with a 1 Mohm, 0.1 F branch at its
first node (a ~1e5 s mode) has 43 unknowns, so the closed form takes the symmetric route
(``closedform.symmetric``).  Its rate, 1.85e-11 in the pencil's scaled time, lay below
ZERO_REL at shift 1 and was taken as trapped charge: the slow node kept 0 V for ever.
"""

from __future__ import annotations

import pytest

SECTIONS, R, C, R_SLOW, C_SLOW = 40, 1e3, 1e-9, 1e6, 0.1


def _ladder() -> str:
    lines = ["[parts]", 'V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", '
             'steps = [["1 ms", "1 V"]] }']
    prev = "in"
    for i in range(1, SECTIONS + 1):
        lines.append(f'R{i} = {{ kind = "resistor", nodes = ["{prev}", "a{i}"], value = "{R:g}" }}')
        lines.append(f'C{i} = {{ kind = "capacitor", nodes = ["a{i}", "gnd"], value = "{C:g}" }}')
        prev = f"a{i}"
    lines.append(f'RS = {{ kind = "resistor", nodes = ["a1", "s"], value = "{R_SLOW:g}" }}')
    lines.append(f'CS = {{ kind = "capacitor", nodes = ["s", "gnd"], value = "{C_SLOW:g}" }}')
    return "\n".join(lines) + "\n"


def _slowest_tau() -> float:
    """The slowest time constant of the hand ODE C v' = -G v (G the nodal conductance matrix of
    the ladder and its branch, common practice), eigenvalues by mpmath at 30 digits."""
    import mpmath as mp
    with mp.workdps(30):
        n = SECTIONS + 1
        g = mp.zeros(n, n)

        def conductance(i, j, value):
            g[i, i] += value
            if j is not None:
                g[j, j] += value
                g[i, j] -= value
                g[j, i] -= value

        conductance(0, None, 1 / mp.mpf(R))                 # R1 to the held source node
        for i in range(1, SECTIONS):
            conductance(i - 1, i, 1 / mp.mpf(R))
        conductance(0, SECTIONS, 1 / mp.mpf(R_SLOW))
        caps = [mp.mpf(C)] * SECTIONS + [mp.mpf(C_SLOW)]
        a = mp.matrix(n, n)
        for i in range(n):
            for j in range(n):
                a[i, j] = -g[i, j] / caps[i]
        return float(max(-1 / e.real for e in mp.eig(a, left=False, right=False)))


def test_a_slow_real_mode_of_a_passive_network_is_not_trapped_charge(monkeypatch):
    # reference: the DC solution (capacitors open, common practice): no current flows through
    # RS, so v(s) = v(a1) = 1 V; and the slowest eigenvalue of the hand ODE (mpmath)
    from harness import closedform
    from harness.circuitfile import parse_circuit
    from harness.closedform import symmetric
    from harness.model import Probe
    taken = []
    original = symmetric.decompose

    def spy(*args, **kwargs):
        dec = original(*args, **kwargs)
        taken.append(dec is not None)
        return dec

    monkeypatch.setattr(symmetric, "decompose", spy)
    features = closedform.solve(parse_circuit(_ladder())).features(Probe("node", ("s",)), 1)
    assert taken and all(taken)                        # the symmetric route, every interval
    assert features.final == pytest.approx(1.0, rel=1e-12)
    assert features.modes[0] == pytest.approx(_slowest_tau(), rel=1e-9)
