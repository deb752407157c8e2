"""What an engineer would script instead (section 5): sympy's dsolve and scipy.signal by hand.

The same n-section RC ladder step (1 V at t = 0 into R, probe at the far end) three ways: the
closed-form engine (solve + features + waveform), scipy.signal (state space written by hand:
A = -C^-1 G, B = C^-1 g_in, one ``signal.step``) and sympy (the nodal ODE system solved by
``dsolve`` with zero initial conditions).  Then the cases where the hand scripts give up.
"""

from __future__ import annotations

import multiprocessing as mp
import time

import numpy as np
import scipy.signal as signal

from harness.closedform import solve
from harness.model import Circuit, Part, Probe

from .circuits import rc_ladder
from .timing import median_time

R, C = 1e3, 1e-9


def _ladder_matrices(n: int):
    """Nodal G (S), C (F) and the input vector g_in (S) of the ladder, written by hand."""
    g = np.zeros((n, n))
    for k in range(n):
        g[k, k] += 1 / R
        if k + 1 < n:
            g[k, k] += 1 / R
            g[k, k + 1] -= 1 / R
            g[k + 1, k] -= 1 / R
    g_in = np.zeros(n)
    g_in[0] = 1 / R
    return g, C * np.eye(n), g_in


def scipy_signal_step(n: int, times: np.ndarray) -> np.ndarray:
    """Far-end step response by scipy.signal from the hand-written state space."""
    g, c, g_in = _ladder_matrices(n)
    a = -np.linalg.solve(c, g)
    b = np.linalg.solve(c, g_in)[:, None]
    out = np.zeros((1, n))
    out[0, -1] = 1.0
    _, y = signal.step(signal.StateSpace(a, b, out, np.zeros((1, 1))), T=times)
    return y


def _sympy_dsolve(n: int, queue) -> None:
    import sympy as sp
    t = sp.symbols("t", nonnegative=True)
    v = [sp.Function(f"v{k}") for k in range(n)]
    r, c = sp.Rational(1000), sp.Rational(1, 10**9)
    eqs = []
    for k in range(n):
        left = 1 if k == 0 else v[k - 1](t)
        right = (v[k + 1](t) - v[k](t)) / r if k + 1 < n else 0
        eqs.append(sp.Eq(c * v[k](t).diff(t), (left - v[k](t)) / r + right))
    start = time.perf_counter()
    sol = sp.dsolve(eqs, [f(t) for f in v], ics={f(0): 0 for f in v})
    far = [s for s in sol if s.lhs == v[-1](t)][0].rhs
    value = float(far.subs(t, 1e-6).evalf())
    queue.put((time.perf_counter() - start, value))


def sympy_dsolve_time(n: int, limit: float) -> tuple[float | None, float | None]:
    """(seconds, v_far(1 us)) of sympy's dsolve in a child process, (None, None) past ``limit``."""
    ctx = mp.get_context("fork")
    queue = ctx.Queue()
    proc = ctx.Process(target=_sympy_dsolve, args=(n, queue))
    proc.start()
    proc.join(limit)
    if proc.is_alive():
        proc.terminate()
        proc.join()
        return None, None
    return queue.get() if not queue.empty() else (None, None)


def engine_run(n: int, times: np.ndarray) -> np.ndarray:
    circ = rc_ladder(n)
    probe = circ.expectations[0].probe
    sol = solve(circ)
    sol.features(probe, 0)
    return sol.waveform(probe, 0, times)


def compare(sizes, sympy_limit: float) -> list[dict]:
    rows = []
    for n in sizes:
        times = np.linspace(0.0, 5 * R * C * n * n, 200)
        ref = scipy_signal_step(n, times)
        got = engine_run(n, times)
        t_sym, v_sym = sympy_dsolve_time(n, sympy_limit)
        rows.append({"n": n,
                     "engine": median_time(lambda: engine_run(n, times), 7),
                     "signal": median_time(lambda: scipy_signal_step(n, times), 7),
                     "sympy": t_sym,
                     "max_dev": float(np.max(np.abs(got - ref))),
                     "sympy_value": v_sym,
                     "engine_value": float(engine_run(n, np.array([1e-6]))[0])})
    return rows


def where_they_give_up() -> list[tuple[str, str]]:
    """Attempt the hand state-space route on circuits that need charge bookkeeping; record what
    happens (the exception text, or the wrong value) next to the engine's answer."""
    out = []
    # capacitive divider stepped through a source loop: C is singular, no state space exists
    div = Circuit("divider", (Part("V1", "voltage-source", ("in", "gnd"), 0.0,
                                   steps=((0.0, 1.0),)),
                              Part("C1", "capacitor", ("in", "m"), 1e-9),
                              Part("C2", "capacitor", ("m", "gnd"), 3e-9),
                              Part("R1", "resistor", ("m", "gnd"), 1e6)))
    c1, c2, r1 = 1e-9, 3e-9, 1e6
    # by hand, node m: (C1 + C2) v' + v / R1 = C1 dV/dt.  The step's dV/dt is an impulse, which
    # a state-space input cannot carry: lsim with u = V gives no jump at all ...
    naive = signal.StateSpace([[-1 / (r1 * (c1 + c2))]], [[0.0]], [[1.0]], [[0.0]])
    _, y_naive, _ = signal.lsim(naive, np.ones(3), [0.0, 1e-9, 2e-9])
    # ... only the transfer function H = C1 s / ((C1 + C2) s + 1/R1), derived by hand, has the
    # jump, as its feedthrough D = C1 / (C1 + C2)
    _, y_tf = signal.step(signal.TransferFunction([c1, 0.0], [c1 + c2, 1 / r1]), T=[0.0, 1e-9])
    jump = solve(div).features(Probe("node", ("m",)), 0).after
    out.append(("capacitive divider stepped through a source loop",
                f"state space with u = V: v(m, 0+) = {y_naive[1]:.3g} V (jump lost); hand-derived "
                f"H(s): {y_tf[0]:.6g} V; engine: {jump:.6g} V (C1/(C1+C2) = "
                f"{c1 / (c1 + c2):.6g} V)"))
    # switch: scipy.signal has one LTI system per run; each switch state needs a restart with
    # X0 carried over by hand, and charge sharing at a closing switch is a hand calculation
    out.append(("switch closing between charged capacitors",
                "scipy.signal: one StateSpace per switch state, lsim restarted with X0 by hand; "
                "the instantaneous charge sharing (a jump) is not an ODE solution at all"))
    out.append(("trapped charge (node reached only through capacitors)",
                "the nodal G is singular and C^-1 G has a zero eigenvalue: scipy.signal runs "
                "but the final value depends on the initial charge, which the user must carry; "
                "sympy dsolve needs the charge as an extra condition"))
    return out
