"""The dominant-τ field: the one-τ estimate of a higher-order probe (the sum of its zero-value
time constants) against the hand value, and the two engines' estimates against each other."""

from __future__ import annotations

import itertools
from typing import Any

from .. import tolerances as tol
from ..model import Expectation
from ..outcome import ENGINES_DISAGREE, MISMATCH, PASS, FieldResult
from ..results import DominantTau, Features
from ..units import format_si
from .context import CheckContext, hand_relative, tau_scale
from .crossing import crossing_engines_agree
from .message import engine_pair


def dominant_json(dv: DominantTau | None) -> dict[str, Any] | None:
    """The JSON form of a ``DominantTau`` (None stays None)."""
    if dv is None:
        return None
    out = {"tau": dv.tau, "terms": dict(dv.terms), "modes_sum": dv.modes_sum,
           "deviation": dv.deviation, "t50": dv.t50, "t50_estimate": dv.t50_estimate,
           "t50_error": dv.t50_error}
    if dv.weak:
        out["weak"] = list(dv.weak)
    return out


def compare_dominant(exp: Expectation, fe: Features, ctx: CheckContext) -> FieldResult:
    """Hand dominant τ vs the sum of zero-value time constants, and the closed form's estimate
    vs the numerical engine's own (``harness.simulate.dominant``): τ within
    ``tol.DOMINANT_ENGINE``; where the swing is above ``tol.WAVEFORM_SWING_FLOOR`` of the
    probe's scale, the deviation within the whole-waveform tolerance and the 50 % time within
    the crossing tolerance (``dominant_engine_problems``)."""
    dv = ctx.exact.dominant(ctx.probe, ctx.k)
    dn = None if ctx.numeric is None else ctx.numeric.dominant(ctx.probe, ctx.k)
    hand = exp.hand["dominant_tau"]
    verdict, message = PASS, ""
    numeric = None if dn is None else dn.tau
    problems = [] if dn is None or ctx.unjudged else dominant_engine_problems(dv, dn, fe, ctx)
    if problems:
        verdict = ENGINES_DISAGREE
        message = "; ".join(problems) + ": an engine problem, not a hand-calculation error"
    elif not tol.agree(hand, dv.tau, hand_relative(exp, ctx)):
        verdict = MISMATCH
        terms = ", ".join(f"{p} {format_si(t, 's')}" for p, t in dv.terms.items())
        message = (f"hand {format_si(hand, 's')}, the zero-value time constants sum to "
                   f"{format_si(dv.tau, 's')} ({terms}); each is R_th·C (L/R_th) with the "
                   f"other capacitors open and the other inductors shorted")
    if dv.deviation is not None:
        message = "; ".join(([message] if message else []) + [dominant_summary(dv)])
    if not problems and weak_note(dv, dn):
        message = "; ".join(([message] if message else []) + [weak_note(dv, dn)])
    extra = dict(dominant_json(dv) or {})
    if dn is not None:
        extra["numeric"] = dominant_json(dn)
    return FieldResult(name="dominant_tau", hand=hand, closed_form=dv.tau, numeric=numeric,
                       verdict=verdict, unit="s", message=message,
                       formula=exp.formulas.get("dominant_tau", ""),
                       tolerance=hand_relative(exp, ctx), extra=extra)


def dominant_engine_problems(dv: DominantTau, dn: DominantTau, fe: Features,
                             ctx: CheckContext) -> list[str]:
    """Where the engines' dominant-τ estimates disagree (empty when they agree).

    τ: ``tol.DOMINANT_ENGINE`` (relative).  Deviation and 50 % time only where the swing
    s = |x(t_k+) - x_inf| is at least ``tol.WAVEFORM_SWING_FLOOR`` of both the probe's scale
    and the waveform's excursion from x_inf (at most (1 + deviation) s), since both are
    normalised by, or defined from, the swing (a current that starts and ends at 0 has no
    meaningful one-τ curve): the deviations, in units of the swing, within
    ``tol.WAVEFORM_RELATIVE`` absolute or relative (|max|f| - max|g|| <= max|f - g|, so this
    is no stricter than the whole-waveform comparison of the two engines; the relative part
    covers the sampling of the maximum of a ringing waveform, proportional to its
    excursion); the 50 % times by the crossing rule (``crossing_engines_agree``)."""
    out = []
    plain = tol.agree(dv.tau, dn.tau, tol.DOMINANT_ENGINE)
    if not plain and _with_weak_modes(dv.tau, dn) is None:
        out.append(f"dominant τ: {engine_pair(dv.tau, dn.tau, 's')}")
    swing = None if fe.after is None or fe.final is None else abs(fe.after - fe.final)
    excursion = 1.0 + (dv.deviation or 0.0)          # >= max |x - x_inf| / swing
    if not swing or swing < tol.WAVEFORM_SWING_FLOOR * max(ctx.scale, excursion * swing):
        return out
    if plain and dv.deviation is not None and dn.deviation is not None and not tol.agree(
            dv.deviation, dn.deviation, tol.WAVEFORM_RELATIVE, tol.WAVEFORM_RELATIVE):
        out.append(f"one-τ curve deviation: the closed form gives {dv.deviation:.6g} of the "
                   f"swing but the numerical engine gives {dn.deviation:.6g}")
    t_k = ctx.circuit.events[ctx.k]
    if dv.tau is not None and dn.tau is not None and \
            not crossing_engines_agree(dv.t50, dn.t50, ctx, t_k, tau_scale(fe, ctx)):
        out.append(f"50 % time: {engine_pair(dv.t50, dn.t50, 's')}")
    return out


#: the most weakly observed modes whose subsets are tried (2**12 sums); past it the plain
#: comparison stands
WEAK_SUBSETS_UP_TO = 12


def _with_weak_modes(closed: float | None, dn: DominantTau) -> tuple[float, ...] | None:
    """The modes (s) the numerical engine observes only weakly (``DominantTau.weak``: a
    storage part reached through a path too faint for that engine to tell from rounding)
    whose time constants, added to its own τ, give the closed form's dominant τ within
    ``tol.DOMINANT_ENGINE``, or None: every such sum is that engine's value as much as its
    own τ is, and a coincidence to 1e-6 is not expected.  (The one-τ deviation is then not
    compared: each engine's is measured against its own τ.)"""
    if closed is None or not dn.weak or len(dn.weak) > WEAK_SUBSETS_UP_TO:
        return None
    base = dn.tau or 0.0
    for size in range(1, len(dn.weak) + 1):
        for subset in itertools.combinations(dn.weak, size):
            total = base + sum(subset)
            if abs(total - closed) <= tol.DOMINANT_ENGINE * max(total, closed):
                return subset
    return None


def weak_note(dv: DominantTau, dn: DominantTau | None) -> str:
    """The note of a dominant τ cross-checked with weakly observed modes, or ""."""
    if dn is None or tol.agree(dv.tau, dn.tau, tol.DOMINANT_ENGINE):
        return ""
    subset = _with_weak_modes(dv.tau, dn)
    if not subset:
        return ""
    faint = ", ".join(format_si(t, "s") for t in subset)
    own = "nothing" if dn.tau is None else format_si(dn.tau, "s")
    return (f"cross-checked as the numerical engine's {own} plus its faintly observed "
            f"mode{'s' if len(subset) > 1 else ''} {faint} (a storage part that reaches the "
            f"probe through a path too weak for that engine to tell from rounding)")


def dominant_summary(dv: DominantTau) -> str:
    """``one-τ curve within 3.1 % of the swing; 50 % time 7.2 ms vs τ·ln 2 = 6.9 ms (−4 %)``."""
    text = f"a one-τ curve with {format_si(dv.tau, 's')} departs by {dv.deviation:.2%} of the swing"
    if dv.t50 is not None and dv.t50_error is not None:
        text += (f"; 50 % time {format_si(dv.t50, 's')} exact vs τ·ln 2 = "
                 f"{format_si(dv.t50_estimate, 's')} ({dv.t50_error:+.1%})")
    return text
