"""The closed form keeps a slow real mode 12, 14 and 16 decades below its fastest one.

A 40-section RC ladder (1 kohm, 1 nF: modes down to ~0.25 us) with a 1 Mohm, 0.1 F branch at its
first node (a ~1e5 s mode) has 43 unknowns, so the closed form takes the symmetric route
(``closedform.symmetric``).  Its rate, 1.85e-11 in the pencil's scaled time, lay below
ZERO_REL at shift 1 and was taken as trapped charge: the slow node kept 0 V for ever.  With a
1 Gohm branch (1e8 s, 14 decades; 16 with 10 ohm sections) the rate lies below eigh's own
rounding of the fastest; the graph says the network has no zero mode
(``closedform.nullity``), so the general route's shifts resolve it.
"""

from __future__ import annotations

import pytest

SECTIONS, R, C, R_SLOW, C_SLOW = 40, 1e3, 1e-9, 1e6, 0.1


def _ladder(sections: int = SECTIONS, r: float = R, c: float = C, r_slow: float = R_SLOW,
            c_slow: float = C_SLOW) -> str:
    lines = ["[parts]", 'V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", '
             'steps = [["1 ms", "1 V"]] }']
    prev = "in"
    for i in range(1, sections + 1):
        lines.append(f'R{i} = {{ kind = "resistor", nodes = ["{prev}", "a{i}"], value = "{r:g}" }}')
        lines.append(f'C{i} = {{ kind = "capacitor", nodes = ["a{i}", "gnd"], value = "{c:g}" }}')
        prev = f"a{i}"
    lines.append(f'RS = {{ kind = "resistor", nodes = ["a1", "s"], value = "{r_slow:g}" }}')
    lines.append(f'CS = {{ kind = "capacitor", nodes = ["s", "gnd"], value = "{c_slow:g}" }}')
    return "\n".join(lines) + "\n"


def _slowest_tau(sections: int = SECTIONS, r: float = R, c: float = C, r_slow: float = R_SLOW,
                 c_slow: float = C_SLOW) -> float:
    """The slowest time constant of the hand ODE C v' = -G v (G the nodal conductance matrix of
    the ladder and its branch, common practice), eigenvalues by mpmath at 40 digits."""
    import mpmath as mp
    with mp.workdps(40):
        n = sections + 1
        g = mp.zeros(n, n)

        def conductance(i, j, value):
            g[i, i] += value
            if j is not None:
                g[j, j] += value
                g[i, j] -= value
                g[j, i] -= value

        conductance(0, None, 1 / mp.mpf(r))                 # R1 to the held source node
        for i in range(1, sections):
            conductance(i - 1, i, 1 / mp.mpf(r))
        conductance(0, sections, 1 / mp.mpf(r_slow))
        caps = [mp.mpf(c)] * sections + [mp.mpf(c_slow)]
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


@pytest.mark.parametrize("sections, r, decades", [(40, 1e3, 14), (40, 10.0, 16), (5, 1e3, 14)])
def test_a_mode_below_rounding_of_the_fastest_is_not_trapped_charge(sections, r, decades):
    # reference: the DC solution (capacitors open, common practice): no current through RS, so
    # v(s) = v(a1) = 1 V; the slowest eigenvalue of the hand ODE (mpmath, 40 digits), 1e8 s
    # beside modes of 2.5 ns-0.27 us, and v(s) one slowest τ after the step, 1 - 1/e of the
    # 1 V step (the faster modes long gone).  Double precision across the spread keeps about
    # eps sqrt(spread) of the slow rate (4e-9 at 14 decades, 4e-8 at 16; 1e-8 measured)
    import math
    from harness import closedform
    from harness.circuitfile import parse_circuit
    from harness.model import Probe
    tau = _slowest_tau(sections, r, C, 1e9, C_SLOW)
    solution = closedform.solve(parse_circuit(_ladder(sections, r, C, 1e9, C_SLOW)))
    probe = Probe("node", ("s",))
    features = solution.features(probe, 1)
    assert features.final == pytest.approx(1.0, rel=1e-12)
    assert features.after == pytest.approx(0.0, abs=1e-12)      # CS held at 0 V across the step
    assert not solution.warnings                                # and no jump read into it
    assert solution.features(Probe("node", ("a1",)), 1).final == pytest.approx(1.0, rel=1e-12)
    assert features.modes[0] == pytest.approx(tau, rel=1e-7)
    fastest = solution.features(Probe("node", (f"a{sections}",)), 1).modes[-1]
    assert tau / fastest > 10.0 ** decades
    at = solution.waveform(probe, 1, [1e-3 + tau])
    assert at[0] == pytest.approx(1.0 - math.exp(-1.0), rel=1e-7)
