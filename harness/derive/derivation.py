"""The hand method carried out correctly for each expectation, in part names, then numbers.

For the event t_k of an expectation (Hayt, Kemmerly & Durbin, *Engineering Circuit Analysis*,
8th ed., ch. 8: the complete response of RL and RC circuits):

1. τ: each storage part's Thevenin resistance with the independent sources zeroed, the other
   capacitors open and inductors shorted (``thevenin``), τ = R_th·C or L/R_th; for a probe that
   is not first order the characteristic polynomial 1 + a₁s + a₂s² … of the modes that reach
   it, a₁ being the sum of the zero-value time constants (Cochrun & Grabel, IEEE Trans. Circuit
   Theory 20(1), 1973) of the storage that reaches it.
2. x(t_k−): the previous interval's final value (or the pre-step DC state) where it had settled.
3. x(t_k+): lim s→∞ s·X(s), which is the charge (flux) balance of a capacitor loop (inductor
   cutset) where the closed form reports a jump (``laplace``).
4. x(∞): lim s→0 s·X(s), with capacitors open and inductors shorted; trapped charge included.
5. x(t) = x(∞) + (x(t_k+) − x(∞))·e^(−(t − t_k)/τ) and t = τ·ln((x(t_k+) − x(∞))/(level − x(∞))).

Every formula is evaluated at the part values and compared with the closed form's number
(``AGREE``, relative); a formula that disagrees, or that the symbolic budget did not reach, is
replaced by the number (``Formula.formula`` None).  Values are in SI units (V, A, s, Ω).
"""

from __future__ import annotations

import math
import signal
import threading
import time
from contextlib import contextmanager
from dataclasses import dataclass, field

from .. import model as m
from .. import tolerances as tol
from ..results import Diagnostic

#: relative agreement a formula must reach with the closed form to be shown as exact
AGREE = 1e-9
#: seconds of symbolic work per file before the rest is given as numbers only
TIME_BUDGET = 20.0


@dataclass(frozen=True)
class Formula:
    """One derived value: the pasteable formula (None: numbers only), its display, its value
    at the part values (SI) and the closed form's value."""

    value: float
    exact: float | None = None
    formula: str | None = None
    display: str | None = None


@dataclass(frozen=True)
class StoragePart:
    """A storage part of the interval: its R_th (Ω) and zero-value time constant (s)."""

    name: str
    kind: str
    resistance: Formula | None
    tau: Formula | None


@dataclass(frozen=True)
class Derivation:
    """The worked derivation of one expectation (see the module docstring for the steps).

    Attributes:
        index, label, at: the expectation and its event time (s).
        before, after, final, tau: the four fields (None where the closed form has none).
        storage: every storage part of the interval with its R_th and zero-value τ.
        jump_parts: capacitor/inductor -> (state at t_k−, state at t_k+) where the event
            moves charge or flux (the loop or cutset found), else empty.
        loops: why the closed form's jump happens (``results.Diagnostic``, one per kind of
            impulse: capacitors in a loop, inductors in a cutset).
        order: the probe's order; coefficients: a₁, a₂ … of its characteristic polynomial
            (s, s², …); modes: the closed form's time constants (s).
        crossing: (level, time formula) where a crossing is asked.
        limited: why some values are numbers only ("size" / "time" with its figure), or "".
        poles: (op-amp, its gain-bandwidth product in Hz) for each op-amp whose output
            voltage is a state (single-pole model).
    """

    index: int
    label: str
    probe: str
    at: float
    unit: str
    before: Formula | None = None
    after: Formula | None = None
    final: Formula | None = None
    tau: Formula | None = None
    storage: tuple[StoragePart, ...] = ()
    jump_parts: dict = field(default_factory=dict)
    loops: tuple[Diagnostic, ...] = ()
    order: int | None = None
    coefficients: tuple[Formula, ...] = ()
    dominant: Formula | None = None
    modes: tuple[float, ...] = ()
    crossing: tuple[float, Formula] | None = None
    limited: str = ""
    poles: tuple[tuple[str, float], ...] = ()

    def fields(self) -> dict:
        """Field name -> Formula for every field with a pasteable formula."""
        out = {k: getattr(self, k) for k in m.FIELDS}
        out["dominant_tau"] = self.dominant
        if self.crossing is not None:
            out["crossing"] = self.crossing[1]
        return {k: v for k, v in out.items() if v is not None and v.formula is not None}


class OverBudget(BaseException):
    """The symbolic work went beyond its time budget (a BaseException, so no handler for
    sympy's own errors swallows it); ``reason`` says which budget."""

    def __init__(self, reason: str) -> None:
        super().__init__(reason)
        self.reason = reason


#: seconds after which an expired deadline tries again where its first signal arrived in code
#: that cannot pass an exception on (``deadline``)
RETRY = 0.01


def _unraisable(frame) -> bool:
    """Whether ``frame`` or a caller of it runs a garbage-collector callback or a ``__del__``
    method: Python prints an exception raised there as "unraisable" and drops it, so the work
    would go on past its budget (a test tool's gc callback, a sympy object's finaliser)."""
    import gc
    codes = {getattr(cb, "__code__", None) for cb in gc.callbacks}
    while frame is not None:
        if frame.f_code in codes or frame.f_code.co_name == "__del__":
            return True
        frame = frame.f_back
    return False


@contextmanager
def deadline(seconds: float):
    """Raise OverBudget("time …") after ``seconds`` (main thread only; elsewhere the size
    budget alone bounds the work).  A signal that arrives inside a garbage-collector callback
    or a finaliser (``_unraisable``) is tried again ``RETRY`` s later instead; a timer already
    running outside (a caller's own bound on the whole run) is restored on exit, less the time
    spent inside."""
    if threading.current_thread() is not threading.main_thread() or seconds <= 0:
        yield
        return

    def expire(signum, frame):
        if _unraisable(frame):
            signal.setitimer(signal.ITIMER_REAL, RETRY)
            return
        raise OverBudget(f"time {seconds:g} s")

    old = signal.signal(signal.SIGALRM, expire)
    outer, _ = signal.setitimer(signal.ITIMER_REAL, seconds)
    started = time.monotonic()
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)
        if outer > 0:
            signal.setitimer(signal.ITIMER_REAL,
                             max(outer - (time.monotonic() - started), 1e-6))


def derive(circuit: m.Circuit, solution, indices=None,
           budget: float = TIME_BUDGET) -> list[Derivation]:
    """The derivation of each expectation (``indices``: only those) of ``circuit``, with the
    closed-form ``solution`` for the numbers and the checks."""
    from .network import TooLarge
    from .worker import Worker, numbers_only
    chosen = [e for e in circuit.expectations if indices is None or e.index in indices]
    out = []
    try:
        with deadline(budget):
            work = Worker(circuit, solution)
            for exp in chosen:
                try:
                    out.append(work.derivation(exp))
                except TooLarge as big:
                    out.append(numbers_only(circuit, solution, exp, str(big)))
    except OverBudget as stop:
        done = {d.index for d in out}
        out += [numbers_only(circuit, solution, e, stop.reason) for e in chosen
                if e.index not in done]
    return sorted(out, key=lambda d: d.index)


def agrees(a: float, b: float | None, scale: float) -> bool:
    """Whether a formula's value ``a`` equals the closed form's ``b`` (AGREE of the larger, or
    of the probe's scale for values near zero)."""
    return b is not None and math.isfinite(a) and tol.agree(a, b, AGREE, AGREE * scale)
