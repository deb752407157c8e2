"""Numerical engine benchmark (issue 3): ``python -m tests.benchmarks.numeric``.

Writes the section "Numerical engine" of tests/benchmarks/RESULTS.md (only that section is
replaced).  Figures: agreement with the exact engine on the bundled circuits and on random
circuits, convergence of the jump in the pulse ratio, the pulse energy of charge sharing over
four decades of r_s, the integrator's cost against rtol, and run time from 10 to 1000 ladder
sections with the share spent stepping the integrator.  Ratios and counts only, no assertions.

References: the exact engine (harness.closedform) for agreement; the textbook facts of charge
sharing (1/2 C1C2/(C1+C2) dV^2 dissipated) and of the capacitive divider (jump C1/(C1+C2) V,
tau = R2 (C1 + C2)) for the error tables.
"""

from __future__ import annotations

import glob
import math
import random
import sys
import time
import warnings
from pathlib import Path

from harness.simulate import solve
from tests.simulate_builder import divider, ladder, node, sharing
from tests.simulate_random import random_circuit

RESULTS = Path(__file__).with_name("RESULTS.md")
HEADER = "## Numerical engine"
FIELDS = ("before", "after", "final", "tau")


def _exact():
    try:
        from harness import closedform
    except ImportError:  # pragma: no cover - the other engine is optional here
        return None
    return closedform


def _error(x, y, floor):
    """Relative difference with the issue's floor (absolute, in the probe's unit)."""
    if x is None or y is None:
        return 0.0 if x is None and y is None else math.inf
    return abs(x - y) / max(abs(x), abs(y), floor / 1e-5 if floor else 1e-300)


def _probe_scale(circuit, exact, probe) -> float:
    """The largest source magnitude where the probe is in its unit, else the probe's own largest
    magnitude (a circuit driven only by current sources has no volts to scale a voltage by)."""
    unit = "current-source" if probe.dimension == "A" else "voltage-source"
    mags = [abs(p.value or 0.0) for p in circuit.parts if p.kind == unit]
    mags += [abs(v) for p in circuit.parts if p.kind == unit for _, v in p.steps]
    own = [abs(v) for k in range(len(circuit.events))
           for v in (lambda f: (f.before, f.after, f.final))(exact.features(probe, k))
           if v is not None]
    return max(mags + own + [1e-300])


def agreement_bundled(cf) -> list[str]:
    """Every expectation's four fields on every bundled circuit, numeric vs exact."""
    from harness.circuitfile import read_circuit
    lines = ["| circuit | fields | worst relative difference | outside 1e-5 | numeric s |",
             "|---|---|---|---|---|"]
    total = bad = 0
    for path in sorted(glob.glob("circuits/**/*.toml", recursive=True)):
        circuit = read_circuit(path)
        started = time.perf_counter()
        num = solve(circuit)
        seconds = time.perf_counter() - started
        exact = cf.solve(circuit)
        worst, count, outside = 0.0, 0, 0
        for ex in circuit.expectations:
            k = circuit.events.index(ex.at)
            fn, fe = num.features(ex.probe, k), exact.features(ex.probe, k)
            scale = _probe_scale(circuit, exact, ex.probe)
            for field in FIELDS:
                a, b = getattr(fn, field), getattr(fe, field)
                if field == "tau" and b is None:
                    continue
                floor = 0.0 if field == "tau" else 1e-9 * scale
                err = _error(a, b, floor)
                count += 1
                outside += err > 1e-5
                worst = max(worst, err)
        total, bad = total + count, bad + outside
        lines.append(f"| {Path(path).stem} | {count} | {worst:.1e} | {outside} | {seconds:.2f} |")
    lines.append(f"| **all {len(lines) - 2} files** | {total} | | {bad} | |")
    return lines


def agreement_random(cf, seeds: int) -> list[str]:
    """All nodes and part currents of random well-posed circuits (tests/simulate_random.py)."""
    from tests.simulate_random import kind_scale, probes, ringing
    worst = {f: 0.0 for f in FIELDS}
    count = {f: 0 for f in FIELDS}
    outside = {f: 0 for f in FIELDS}
    used = 0
    for seed in range(seeds):
        circuit = random_circuit(random.Random(seed))
        exact = cf.solve(circuit)
        if exact.warnings or ringing(circuit, exact):
            continue
        used += 1
        num = solve(circuit)
        for probe in probes(circuit):
            floor = 1e-9 * kind_scale(circuit, probe)
            for k in range(len(circuit.events)):
                fn, fe = num.features(probe, k), exact.features(probe, k)
                swing = abs((fe.after or 0.0) - (fe.final or 0.0))
                for field in FIELDS:
                    a, b = getattr(fn, field), getattr(fe, field)
                    if field == "tau" and (b is None or swing < 1e-3 * floor / 1e-9):
                        continue
                    err = _error(a, b, floor if field != "tau" else 0.0)
                    count[field] += 1
                    outside[field] += err > 1e-5
                    worst[field] = max(worst[field], err)
    lines = [f"{used} random circuits (seeds 0-{seeds - 1}, high-Q rings and circuits the exact "
             "engine warns about left out):", "",
             "| field | compared | worst relative difference | outside 1e-5 |", "|---|---|---|---|"]
    lines += [f"| {f} | {count[f]} | {worst[f]:.1e} | {outside[f]} |" for f in FIELDS]
    return lines


def convergence() -> list[str]:
    """Divider jump and pulse energy against the pulse ratio (halving), rtol 1e-9."""
    after_ref, energy_ref = 0.5, 0.5 * 0.5e-6
    lines = ["| pulse ratio | r_s (ohm) | error of the jump | ratio | error of the pulse energy "
             "| ratio |", "|---|---|---|---|---|---|"]
    prev = None
    for ratio in (4e-3, 2e-3, 1e-3, 5e-4, 2.5e-4):
        sol = solve(divider(), pulse_ratio=ratio, rtol=1e-9)
        ea = abs(sol.features(node("a"), 1).after - after_ref)
        ee = abs(sol.jump(1).energy - energy_ref) / energy_ref
        ra = f"{prev[0] / ea:.1f}" if prev else ""
        re = f"{prev[1] / ee:.1f}" if prev else ""
        lines.append(f"| {ratio:g} | {sol.regularisation.r_series:.3g} | {ea:.2e} | {ra} | "
                     f"{ee:.2e} | {re} |")
        prev = (ea, ee)
    return lines


def pulse_energy() -> list[str]:
    """Charge sharing 1 uF at 1 V into 3 uF at 0 V, r_s over four decades."""
    expected = 0.5 * 1e-6 * 3e-6 / 4e-6
    lines = ["| pulse ratio | r_s (ohm) | dissipated (J) | relative error |", "|---|---|---|---|"]
    for ratio in (1e-5, 1e-6, 1e-7, 1e-8, 1e-9):
        sol = solve(sharing(1e-6, 3e-6, 1.0, 0.0), pulse_ratio=ratio)
        energy = sol.jump(1).energy
        lines.append(f"| {ratio:g} | {sol.regularisation.r_series:.3g} | {energy:.6e} | "
                     f"{abs(energy - expected) / expected:.1e} |")
    return lines


def tolerance_sweep() -> list[str]:
    """The divider (2 capacitors in a source loop, then a 2 ms mode) against rtol."""
    lines = ["| rtol | run time (s) | steps | function evaluations | error of the jump | "
             "error of tau |", "|---|---|---|---|---|---|"]
    for rtol in (1e-5, 1e-6, 1e-7, 1e-8, 1e-9, 1e-10):
        started = time.perf_counter()
        sol = solve(divider(), rtol=rtol)
        seconds = time.perf_counter() - started
        f = sol.features(node("a"), 1)
        stats = sol.stats(1)
        tau_err = abs(f.tau / 2e-3 - 1) if f.tau else math.inf
        lines.append(f"| {rtol:g} | {seconds:.3f} | {stats.steps} | {stats.nfev} | "
                     f"{abs(f.after - 0.5):.1e} | {tau_err:.1e} |")
    return lines


def ladders(cf) -> list[str]:
    """Run time of an n-section RC ladder (1 k, 1 nF, 1 V step), both engines."""
    lines = ["| sections | numeric s | integrator s | share | steps | nfev | LU | exact s |",
             "|---|---|---|---|---|---|---|---|"]
    for n in (10, 20, 50, 100, 200, 500, 1000):
        circuit = ladder(n)
        started = time.perf_counter()
        sol = solve(circuit)
        sol.features(node(f"n{n}"), 0)
        total = time.perf_counter() - started
        st = sol.stats(0)
        exact = ""
        if cf is not None and n <= 200:
            started = time.perf_counter()
            cf.solve(circuit).features(node(f"n{n}"), 0)
            exact = f"{time.perf_counter() - started:.2f}"
        lines.append(f"| {n} | {total:.2f} | {st.seconds:.2f} | {st.seconds / total:.0%} | "
                     f"{st.steps} | {st.nfev} | {st.nlu} | {exact} |")
    return lines


def write(section: str) -> None:
    """Replace (or append) the section under HEADER in RESULTS.md."""
    text = RESULTS.read_text(encoding="utf-8") if RESULTS.exists() else "# Benchmark results\n"
    lines = text.splitlines()
    start = next((i for i, line in enumerate(lines) if line.strip() == HEADER), None)
    if start is None:
        new = text.rstrip("\n") + "\n\n" + section.rstrip("\n") + "\n"
    else:
        end = next((i for i in range(start + 1, len(lines)) if lines[i].startswith("## ")),
                   len(lines))
        new = "\n".join(lines[:start] + section.rstrip("\n").splitlines() + [""] + lines[end:])
        new = new.rstrip("\n") + "\n"
    tmp = RESULTS.with_suffix(".md.tmp")
    tmp.write_text(new, encoding="utf-8")
    tmp.replace(RESULTS)


def main(argv: list[str]) -> int:
    warnings.simplefilter("ignore")
    seeds = int(argv[0]) if argv else 100
    cf = _exact()
    out = [HEADER, "",
           "Measured by `python -m tests.benchmarks.numeric` on this machine (2 shared cores; "
           "times are wall-clock and vary with the load). Default pulse ratio 1e-7, rtol 1e-7. "
           "Relative differences use the issue's floor, 1e-9 of the largest source in the "
           "probe's unit (bundled circuits: of the largest source of the probe's unit, or of the "
           "probe's own largest value where the circuit has none).", ""]
    if cf is not None:
        out += ["**Agreement with the exact engine, bundled circuits** (every expectation's "
                "before/after/final/tau; tau where the exact engine finds the probe first "
                "order):", ""] + agreement_bundled(cf) + [""]
        out += ["**Agreement with the exact engine, random circuits** (every node and every "
                "part's current at every event):", ""] + agreement_random(cf, seeds) + [""]
    out += ["**Convergence of the narrow-pulse model** (capacitive divider C1 = C2 = 1 uF, "
            "R2 = 1 k, 1 V step; halving the pulse ratio halves r_s, L_p and the pulse):", ""]
    out += convergence() + [""]
    out += ["**Pulse energy of charge sharing** (1 uF at 1 V into 3 uF at 0 V; expected "
            "1/2 C1C2/(C1+C2) dV^2 = 375 nJ whatever the resistance):", ""] + pulse_energy()
    out += ["", "**Integrator cost against rtol** (the divider; compare DESIGN.md's table):", ""]
    out += tolerance_sweep() + [""]
    out += ["**RC ladders** (time to solve and extract the far node's features; share = time "
            "inside the integrator's steps):", ""] + ladders(cf) + [""]
    section = "\n".join(out)
    write(section)
    print(section)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
