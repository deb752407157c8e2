"""The Thevenin resistance a storage part sees, as a formula of part names.

Method: the zero-value (open-circuit) time-constant network (Cochrun & Grabel 1973; Gray &
Meyer, *Analysis and Design of Analog Integrated Circuits*, §7.3): independent sources zeroed
(voltage sources shorted, current sources opened), the part itself removed, the other
capacitors open and the other inductors shorted, controlled sources kept.  A 1 A test current
driven into the part's p terminal (out of n) gives R_th = v(p) − v(n) in Ω.
"""

from __future__ import annotations

import sympy as sp

from .. import model as m
from . import network
from .laplace import fraction_free


def resistance(circuit: m.Circuit, time: float, part: m.Part,
               syms: network.Symbols) -> sp.Expr | None:
    """R_th in Ω seen by ``part`` in the interval starting at ``time``; None when no finite
    resistance exists (the part has no DC path, or the network is singular)."""
    others = [p for p in circuit.storage_parts() if p.name != part.name]
    opened = frozenset([part.name] + [p.name for p in others if p.kind == m.CAPACITOR])
    shorted = frozenset(p.name for p in others if p.kind == m.INDUCTOR)
    net = network.build(circuit, time, syms, zeroed=True, open_parts=opened, short=shorted)
    rhs = sp.zeros(len(net.index), 1)
    p, n = net.index.get(f"v:{part.p}"), net.index.get(f"v:{part.n}")
    for row, sign in ((p, 1), (n, -1)):
        if row is not None:
            rhs[row] += sign
    if not net.index or (p is None and n is None):
        return None
    try:
        x = fraction_free(net.g, rhs)
    except (ZeroDivisionError, ValueError, sp.polys.polyerrors.PolynomialError) as _:
        return None
    except Exception:                          # sympy's NonInvertibleMatrixError and kin
        return None
    vp = x[p] if p is not None else 0
    vn = x[n] if n is not None else 0
    return sp.factor(sp.cancel(vp - vn))
