"""Sign-off over tolerances of every spec'd field of a circuit.

Per expectation with ``spec`` limits: the nominal value; normalised sensitivities by a central
difference (relative step ``STEP``, error O(STEP²)); Monte Carlo streamed in chunks
(``sampling``);
the extremes over the box (``extremes.search``); root-sum-square bounds from the sensitivities
(each quantity's deviation towards the side that raises, or lowers, the field); the numerical
engine at each extreme corner; and the verdict.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .. import model as m
from .. import tolerances as tol
from ..fieldspec import field_spec
from ..outcome import ENGINES_DISAGREE, MISMATCH, PASS, worst
from ..units import format_apart
from . import batch, fieldvalue, stats
from .extremes import search
from .quantities import Quantity, edges, varied
from .result import HOLDS_STATISTICALLY, SpreadResult
from .sampling import CHUNK, KEEP, PIECE, Accumulator, chunk_deviations
from .verify import numeric_at

STEP = 1e-4
#: the most Monte Carlo samples evaluated where the exact engine solves each one (a circuit
#: the batched route does not take): ~5-30 ms a sample, so 10,000 samples would hold a check
#: for minutes.  A fixed count, not a time budget, so a run stays reproducible; the yield is
#: then of these samples (its Wilson interval widens accordingly) and the report says so
EXACT_MAX_SAMPLES = 200


def spec_names(exp: m.Expectation) -> tuple[str, ...]:
    """The spec'd fields of ``exp`` in ``model.SPEC_FIELDS`` order (the value columns)."""
    return tuple(n for n in m.SPEC_FIELDS if n in exp.spec)


def evaluator(circuit, exp, names, quantities):
    """(deviations -> values, route): the batched route where it qualifies and matches the
    exact engine at the nominal point, else the exact engine sample by sample."""
    def exact(dev):
        return fieldvalue.evaluate(circuit, exp, names, quantities, dev)
    if batch.qualifies(circuit, exp, names):
        def fast(dev):
            return batch.evaluate(circuit, exp, names, quantities, dev)
        zero = np.zeros((1, len(quantities)))
        if _same(fast(zero), exact(zero)):
            return fast, "batched first order"
    return exact, "exact engine per sample"


def _same(a: np.ndarray, b: np.ndarray, rel: float = 1e-7) -> bool:
    both = np.isnan(a) == np.isnan(b)
    close = np.isclose(a, b, rtol=rel, atol=0.0) | np.isnan(a) | \
        (np.abs(a - b) <= rel * np.nanmax(np.abs(b), initial=0.0))
    return bool(both.all() and close.all())


def sensitivities(fn, nominal: np.ndarray, count: int) -> np.ndarray:
    """∂x/∂d per quantity for each field (d the relative deviation), shape (F, n): the
    central difference (x(+h) − x(−h))/2h, h = STEP."""
    if count == 0:
        return np.zeros((len(nominal), 0))
    steps = np.vstack([np.eye(count) * STEP, -np.eye(count) * STEP])
    values = fn(steps)
    return ((values[:count] - values[count:]) / (2 * STEP)).T


def rss_bounds(nominal: float, gradient: np.ndarray, low, high) -> tuple[float, float]:
    """x₀ − √Σ(down_i²), x₀ + √Σ(up_i²), where up_i / down_i is the largest rise / fall the
    linearised field takes over quantity i's spread."""
    ends = np.vstack([gradient * low, gradient * high])
    up = np.maximum(ends.max(axis=0), 0.0)
    down = np.minimum(ends.min(axis=0), 0.0)
    return (nominal - math.sqrt(float((down ** 2).sum())),
            nominal + math.sqrt(float((up ** 2).sum())))


def monte_carlo(fn, low, high, variation: m.Variation, limits: tuple[m.Limits, ...],
                keep: int | None = None, most: int | None = None) -> Accumulator:
    """The samples drawn and evaluated chunk by chunk (``sampling``: a fixed seed gives the
    same samples), summarised as they pass, piece by piece of ``sampling.PIECE`` samples whose
    summaries are merged in order (as a run split over machines merges them, ``shard``, so
    both give the same bits); ``keep`` overrides ``sampling.KEEP``; ``most`` caps the count
    (the first samples of the same sequence)."""
    total = variation.samples if most is None else min(most, variation.samples)
    whole = None
    for first in range(0, total, PIECE):
        part = Accumulator(limits, len(low), KEEP if keep is None else keep)
        for start in range(first, min(first + PIECE, total), CHUNK):
            dev = chunk_deviations(low, high, variation, start // CHUNK)[:total - start]
            part.add(dev, fn(dev))
        if whole is None:
            whole = part
        else:
            whole.merge(part)
    return whole if whole is not None else Accumulator(limits, len(low),
                                                       KEEP if keep is None else keep)


@dataclass(frozen=True)
class Evaluated:
    """What was evaluated elsewhere for one expectation (``shard``, on other processes):
    ``samples`` its Monte Carlo summary (``shard.summary`` of its pieces, merged in order) and
    ``numeric`` the numerical engine's values at corners, (field name, the corner's float64
    bytes) -> value, used where the extreme search ends on one of those corners."""

    samples: Accumulator | None = None
    numeric: dict = field(default_factory=dict)


def analyse_circuit(circuit: m.Circuit, numeric: bool = True,
                    given: dict | None = None) -> tuple[SpreadResult, ...]:
    """Every spec'd field of every expectation of ``circuit``.  ``given`` maps an
    expectation's index to what was evaluated elsewhere (an ``Evaluated``)."""
    out = []
    for index, exp in enumerate(circuit.expectations):
        if exp.spec:
            done = (given or {}).get(index, Evaluated())
            out += analyse_expectation(circuit, exp, numeric, done.samples, done.numeric)
    return tuple(out)


def basis(circuit: m.Circuit, exp: m.Expectation):
    """(names, quantities, fn, route, low, high, nominal, gradients) of one expectation: its
    spec'd fields, varied quantities, evaluator (``evaluator``), the box's edges, the nominal
    values (F,) and the sensitivities (F, n)."""
    names = spec_names(exp)
    quantities = varied(circuit, exp)
    fn, route = evaluator(circuit, exp, names, quantities)
    low, high = edges(quantities)
    nominal = fn(np.zeros((1, len(quantities))))[0]
    return names, quantities, fn, route, low, high, nominal, \
        sensitivities(fn, nominal, len(quantities))


def analyse_expectation(circuit: m.Circuit, exp: m.Expectation, numeric: bool = True,
                        samples: Accumulator | None = None, known: dict | None = None):
    """SpreadResults of the spec'd fields of one expectation; ``samples``: the Monte Carlo
    summary when it was evaluated elsewhere (``sampling.accumulate_range``, merged in order),
    else it is run here; ``known``: the numerical engine's values at corners evaluated
    elsewhere (``Evaluated.numeric``)."""
    names, quantities, fn, route, low, high, nominal, grads = basis(circuit, exp)
    methods = circuit.variation.methods
    acc = None
    extra = extra_values = None
    if m.MONTE_CARLO in methods and quantities:
        acc = samples if samples is not None else monte_carlo(
            fn, low, high, circuit.variation, tuple(exp.spec[n] for n in names),
            most=None if route.startswith("batched") else EXACT_MAX_SAMPLES)
        kept_values, kept = acc.samples()
        points, values = acc.extremes()
        extra, extra_values = np.vstack([kept, points]), np.vstack([kept_values, values])
    found, how = search(fn, low, high, grads, extra, extra_values) if quantities else ([], "")
    results = []
    for col, name in enumerate(names):
        pair = found[col] if found else None
        results.append(_field(circuit, exp, name, col, quantities, nominal[col], grads[col],
                              pair, how, acc, route, _Corners(known or {}) if numeric else None,
                              low, high))
    return results


class _Corners:
    """The numerical engine at a field's corner: the value evaluated elsewhere for that
    field and corner when there is one (the same call, so the same bits), else run here."""

    def __init__(self, known: dict) -> None:
        self.known = known

    def __call__(self, circuit, exp, name: str, quantities, corner: np.ndarray) -> float:
        value = self.known.get((name, corner.tobytes()))
        if value is None:
            value = numeric_at(circuit, exp, (name,), quantities, corner)[0]
        return _num(value)


def _field(circuit, exp, name, col, quantities, nominal, grad, pair, how, acc, route,
           numeric, low, high) -> SpreadResult:
    """One field's SpreadResult; ``numeric``: the numerical engine at a corner
    (``_Corners``), None when it is not run."""
    limits = exp.spec[name]
    unit = field_spec(name).unit_for(exp.probe.dimension)
    methods = circuit.variation.methods
    with np.errstate(all="ignore"):
        normalised = grad / nominal if nominal else grad * np.nan
    ranked = sorted(((q.name, float(s)) for q, s in zip(quantities, normalised)),
                    key=lambda item: -abs(item[1]) if math.isfinite(item[1]) else 0.0)
    result = dict(check=f"{exp.label}: {exp.probe.label} at {exp.at:g} s", index=exp.index,
                  name=name, unit=unit,
                  limits={"min": limits.min, "max": limits.max,
                          "hand_min": limits.hand_min, "hand_max": limits.hand_max},
                  nominal=_num(nominal), sensitivities=tuple(ranked), route=route,
                  units={q.name: q.unit for q in quantities})
    lo_val = hi_val = None
    if pair is not None and m.EXTREMES in methods:
        lo, hi = pair
        lo_val, hi_val = _num(lo.value), _num(hi.value)
        result.update(low=lo_val, high=hi_val, extreme_method=how,
                      low_corner=_corner(quantities, lo.corner),
                      high_corner=_corner(quantities, hi.corner))
        if route.startswith("batched"):   # the exact engine confirms the fast route's extremes
            exact = fieldvalue.evaluate(circuit, exp, (name,), quantities,
                                        np.vstack([lo.corner, hi.corner]))[:, 0]
            lo_val, hi_val = _num(exact[0]), _num(exact[1])
            result.update(low=lo_val, high=hi_val)
        if numeric is not None:
            result.update(numeric_low=numeric(circuit, exp, name, quantities, lo.corner),
                          numeric_high=numeric(circuit, exp, name, quantities, hi.corner))
    if m.RSS in methods and math.isfinite(nominal):
        result["rss"] = rss_bounds(nominal, grad, low, high)
    if acc is not None:
        kept_values, kept = acc.samples()
        result["monte_carlo"] = acc.summary(col)
        result["samples"] = kept_values[:, col]
        result["sample_deviations"] = kept
    verdict, messages = _verdict(result, limits, lo_val, hi_val, nominal, exp, circuit)
    if acc is not None and acc.count < circuit.variation.samples:
        messages.append(f"Monte Carlo ran the first {acc.count:,} of the "
                        f"{circuit.variation.samples:,} samples asked for: the batched route "
                        f"does not take this circuit, and the exact engine solves each sample; "
                        f"the yield and its interval are of those samples")
    verdict, messages = _unestablished(result, pair is not None and m.EXTREMES in methods,
                                       numeric is not None, verdict, messages)
    return SpreadResult(verdict=verdict, messages=tuple(messages), **result)


def _verdict(result, limits: m.Limits, lo, hi, nominal, exp, circuit):
    verdicts, messages = [PASS], []
    unit = result["unit"]
    for which, value, numeric in (("min", lo, result.get("numeric_low")),
                                  ("max", hi, result.get("numeric_high"))):
        if value is not None and numeric is not None and \
                not tol.agree(value, numeric, tol.ENGINE_RELATIVE, 0.0):
            verdicts.append(ENGINES_DISAGREE)
            shown = format_apart((numeric, value), unit)
            messages.append(f"at the {which} corner the numerical engine gives {shown[0]}, "
                            f"the closed form {shown[1]}")
    relative = exp.tolerance if exp.tolerance is not None else circuit.settings.tolerance
    for hand, value, word in ((limits.hand_min, lo, "min"), (limits.hand_max, hi, "max")):
        if hand is not None and not (value is not None and tol.agree(hand, value, relative,
                                                                     0.0)):
            verdicts.append(MISMATCH)
            shown = format_apart((hand, value), unit)
            messages.append(f"hand worst-case {word} {shown[0]} but the computed "
                            f"{word} over the spreads is {shown[1]}")
    values = [v for v in (lo, hi) if v is not None]
    if not values:             # no extremes asked for: the RSS bounds, else the nominal stand in
        values = list(result.get("rss") or ()) or [nominal]
    breaks = any(not stats.inside(np.array([v]), limits)[0] for v in values)
    mc = result.get("monte_carlo")
    samples_fail = bool(mc) and mc["passed"] < mc["count"]
    if samples_fail:
        verdicts.append(MISMATCH)
        messages.append(_yield_text(mc, breaks))
    elif breaks and mc:
        verdicts.append(HOLDS_STATISTICALLY)
        messages.append(f"an extreme is outside the limits, yet all {mc['count']} samples "
                        f"are inside: the spec holds statistically only")
    elif breaks:
        verdicts.append(MISMATCH)
        messages.append("outside the limits at an extreme")
    return worst(verdicts), messages


def _unestablished(result: dict, extremes: bool, numeric: bool, verdict: str,
                   messages: list) -> tuple[str, list]:
    """A value the analysis could not establish never leaves a pass: an extreme corner where
    the field has no value (a crossing that never happens there) is a mismatch; an extreme the
    numerical engine could not confirm is engines-disagree."""
    verdicts, messages = [verdict], list(messages)
    for which in ("low", "high"):
        if extremes and result.get(which) is None:
            verdicts.append(MISMATCH)
            messages.append(f"the field has no value at the {which} corner of the spreads")
        elif numeric and result.get(which) is not None and \
                result.get(f"numeric_{which}") is None:
            verdicts.append(ENGINES_DISAGREE)
            messages.append(f"the numerical engine gives no value at the {which} corner: the "
                            f"extreme is not cross-checked")
    return worst(verdicts), messages


def _yield_text(mc: dict, breaks: bool) -> str:
    missing = (f", {mc['without_value']} of them with no value" if mc["without_value"]
               else "")
    return (("outside the limits at an extreme; " if breaks else "")
            + f"{mc['count'] - mc['passed']} of {mc['count']} samples outside the limits"
            f"{missing}")


def _corner(quantities: tuple[Quantity, ...], corner: np.ndarray) -> dict:
    """Quantity name -> its relative deviation there (0.01 = +1 %)."""
    return {q.name: float(d) for q, d in zip(quantities, corner)}


def _num(value) -> float | None:
    return float(value) if value is not None and math.isfinite(value) else None
