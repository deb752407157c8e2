"""The symbolic work behind ``derivation.derive``: one network and one Laplace solve per
interval, the state carried from event to event, every result checked against the closed form.

Units: SI throughout (V, A, Ω, F, H, s).  Method: see ``derivation`` and ``laplace``.
"""

from __future__ import annotations

import sympy as sp

from .. import model as m
from ..formula import MAX_LENGTH
from . import forms, laplace, network
from .derivation import Derivation, Formula, OverBudget, StoragePart, agrees


def _state_probe(part: m.Part) -> m.Probe:
    """The probe of a part's state: a capacitor's (or gain-bandwidth op-amp's output) voltage,
    an inductor's current."""
    return m.Probe(m.THROUGH if part.kind == m.INDUCTOR else m.ACROSS, (part.name,))


def _stateful(circuit: m.Circuit) -> tuple[m.Part, ...]:
    """The parts with a state: storage, and op-amps with a gain-bandwidth pole (their output
    voltage)."""
    return tuple(p for p in circuit.parts
                 if p.kind in m.STORAGE or (p.kind == m.OPAMP and p.param(m.GBW) is not None))


def _poles(circuit: m.Circuit) -> tuple[tuple[str, float], ...]:
    """(op-amp name, its gain-bandwidth product in Hz) of each op-amp with a pole."""
    return tuple((p.name, p.param(m.GBW)) for p in _stateful(circuit) if p.kind == m.OPAMP)


def numbers_only(circuit: m.Circuit, solution, exp: m.Expectation, reason: str) -> Derivation:
    """The closed form's numbers for an expectation the symbolic budget did not reach."""
    k = circuit.events.index(exp.at)
    f = solution.features(exp.probe, k)

    def num(v):
        return None if v is None else Formula(v, v)
    return Derivation(exp.index, exp.label, exp.probe.label, exp.at, exp.probe.dimension,
                      num(f.before), num(f.after), num(f.final), num(f.tau), order=f.order,
                      modes=f.modes, dominant=num(f.dominant_tau), limited=reason,
                      poles=_poles(circuit))


class Worker:
    """Symbols, networks and states of one circuit, built as expectations need them."""

    def __init__(self, circuit: m.Circuit, solution) -> None:
        self.circuit, self.sol = circuit, solution
        self.syms = network.Symbols(circuit)
        self.nets: dict = {}
        self.states: dict = {}
        self.values = None

    # ------------------------------------------------------------------ numbers and checks
    def formula(self, expr, exact: float | None, scale: float, shape=forms.tidy) -> Formula:
        """A Formula of ``expr`` (None-safe), kept as a formula only where it agrees."""
        if expr is None:
            return None if exact is None else Formula(exact, exact)
        expr = shape(expr)
        value = forms.evaluate(expr, self.syms.values())
        if exact is not None and not agrees(value, exact, scale):
            return Formula(exact, exact)
        quantities = self.syms.text_of()
        text = forms.formula_text(expr, quantities)
        return Formula(value, exact, text if len(text) + 2 <= MAX_LENGTH else None,
                       forms.display_text(expr, quantities))

    # ------------------------------------------------------------------ networks
    def net(self, k: int):
        """(network, Y) of interval k (k = -1: the pre-step circuit)."""
        if k not in self.nets:
            time = self.circuit.events[max(k, 0)]
            net = network.build(self.circuit, time, self.syms, pre=k < 0)
            self.nets[k] = (net, laplace.solve(net, self.state(k)))
        return self.nets[k]

    def state(self, k: int) -> dict:
        """Storage name -> its value at the start of interval k, symbolic where it checks."""
        if k in self.states:
            return self.states[k]
        out = {}
        for part in _stateful(self.circuit):
            unit = "A" if part.kind == m.INDUCTOR else "V"
            if k < 0:
                init = part.initial
                out[part.name] = 0 if init is None else self.syms.quantity(init, unit)
                continue
            exact = self.sol.features(_state_probe(part), k).before
            expr = self.value_at_end(_state_probe(part), k - 1)
            keep = expr is not None and agrees(forms.evaluate(expr, self.syms.values()), exact,
                                               abs(exact) + self.circuit.largest_source() * 1e-3)
            out[part.name] = expr if keep else self.syms.quantity(exact, unit)
        self.states[k] = out
        return out

    def transform(self, probe: m.Probe, k: int) -> laplace.Transform:
        net, y = self.net(k)
        expr = laplace.probe_value(probe, self.circuit, net, y, self.syms, self.state(k))
        return laplace.transform(expr)

    def value_at_end(self, probe: m.Probe, k: int):
        """The probe's final value in interval k (k = -1: the pre-step state)."""
        return self.transform(probe, k).final()

    # ------------------------------------------------------------------ one expectation
    def derivation(self, exp: m.Expectation) -> Derivation:
        k = self.circuit.events.index(exp.at)
        f = self.sol.features(exp.probe, k)
        scale = max(abs(v) for v in (f.before, f.after, f.final, 1e-30) if v is not None)
        tr = self.transform(exp.probe, k)
        before = self.formula(self.value_at_end(exp.probe, k - 1), f.before, scale)
        after = self.formula(tr.initial(), f.after, scale)
        final = self.formula(tr.final(), f.final, scale)
        poly = tr.characteristic()
        coeffs = [c for c in reversed(poly.all_coeffs())][1:]
        storage = self.storage(k)
        tau = None
        if f.tau is not None:
            tau = self.formula(coeffs[0] if len(coeffs) == 1 else None, f.tau, f.tau,
                               self._tau_shape)
        dominant = None
        if f.order is not None and f.order > 1 and coeffs:
            dominant = self.formula(coeffs[0], f.dominant_tau, f.dominant_tau or 1.0,
                                    self._tau_shape)
        shown = [self.formula(c, None, 1.0) for c in coeffs]
        return Derivation(exp.index, exp.label, exp.probe.label, exp.at, exp.probe.dimension,
                          before, after, final, tau, storage, self.jumped(k), self._loops(k),
                          f.order, tuple(shown), dominant, f.modes,
                          self.crossing(exp, tau, after, final), poles=_poles(self.circuit))

    def _tau_shape(self, expr):
        """τ as R_th·C or L/R_th with the resistance in series/parallel form."""
        expr = forms.tidy(expr)
        caps = [s for s in expr.free_symbols
                if s.name in self.syms.table and self.circuit.part(s.name).kind == m.CAPACITOR]
        inds = [s for s in expr.free_symbols
                if s.name in self.syms.table and self.circuit.part(s.name).kind == m.INDUCTOR]
        if len(caps) == 1 and not inds:
            return forms.parallel(sp.cancel(expr / caps[0])) * caps[0]
        if len(inds) == 1 and not caps:
            return inds[0] / forms.parallel(sp.cancel(inds[0] / expr))
        return expr

    def storage(self, k: int) -> tuple[StoragePart, ...]:
        """Each storage part's R_th (sources zeroed, other C open, other L shorted)."""
        from .thevenin import resistance
        exact = self.sol.thevenin(k)
        out = []
        for part in self.circuit.storage_parts():
            r = resistance(self.circuit, self.circuit.events[k], part, self.syms)
            rx = exact.get(part.name)
            rf = self.formula(r, rx, abs(rx or 1.0), forms.parallel) if rx is not None else None
            sym = self.syms.part(part.name)
            tau = None
            if r is not None and rx is not None and rx != 0 and rx != float("inf"):
                t_expr = r * sym if part.kind == m.CAPACITOR else sym / r
                t_exact = rx * part.value if part.kind == m.CAPACITOR else part.value / rx
                tau = self.formula(t_expr, t_exact, t_exact, self._tau_shape)
            out.append(StoragePart(part.name, part.kind, rf, tau))
        return tuple(out)

    def jumped(self, k: int) -> dict:
        """Storage moved by the event: name -> (Formula before, Formula after)."""
        jump = self.sol.jump(k)
        moved = [n for n, q in {**jump.charges, **jump.fluxes}.items()
                 if q and n in self.syms.table
                 and self.circuit.part(n).kind in m.STORAGE] if jump.loops else []
        out = {}
        for name in moved:
            probe = _state_probe(self.circuit.part(name))
            f = self.sol.features(probe, k)
            scale = max(abs(f.before or 0), abs(f.after or 0), 1e-30)
            out[name] = (self.formula(self.state(k).get(name), f.before, scale),
                         self.formula(self.transform(probe, k).initial(), f.after, scale))
        return out

    def _loops(self, k: int) -> tuple[str, ...]:
        return tuple(self.sol.jump(k).loops)

    def crossing(self, exp: m.Expectation, tau, after, final):
        """(level, t formula) for a first-order probe with a crossing asked, else None."""
        if exp.crossing is None or tau is None or after is None or final is None:
            return None
        level = exp.crossing.level
        exact = self.sol.crossing(exp.probe, self.circuit.events.index(exp.at), level,
                                  exp.crossing.direction)
        t_exact = getattr(exact, "time", exact)
        if tau.formula is None or after.formula is None or final.formula is None:
            return level, Formula(t_exact, t_exact) if t_exact is not None else None
        unit = exp.probe.dimension
        text = (f"({tau.formula})*ln((({after.formula}) - ({final.formula}))/"
                f"({level!r} {unit} - ({final.formula})))")
        from .. import formula as evaluator
        values, units = self.syms.scope()
        try:
            value = evaluator.evaluate("= " + text, values, "s", units)
        except Exception:                      # a log of a non-positive ratio: no crossing
            return level, Formula(t_exact, t_exact) if t_exact is not None else None
        if t_exact is not None and not agrees(value, t_exact, abs(t_exact)):
            return level, Formula(t_exact, t_exact)
        display = (f"{tau.display}·ln(({after.display} − {final.display})/"
                   f"({level!r} {unit} − {final.display}))")
        return level, Formula(value, t_exact, text, display)


__all__ = ["Worker", "numbers_only", "OverBudget"]
