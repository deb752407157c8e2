"""Sparse or dense Jacobian in the numerical engine, measured side by side in one run.

    python -m tests.benchmarks.jacobian_bench [--print-only]

For each circuit: the CPU time of ``simulate.solve`` with the engine's rule (sparse above
SPARSE_ABOVE states only while the LU of I - h J stays within SPARSE_LU_FILL), with every
Jacobian forced sparse (the size-only rule it replaced) and forced dense; beside them the fill
of J and of its trial LU.  Writes the "## Numerical engine: sparse or dense" section.
"""

from __future__ import annotations

import argparse
import resource
from pathlib import Path

import scipy.sparse as sp
import scipy.sparse.linalg as spla

from harness import simulate
from harness.simulate import equations

from .circuits import random_rc, rc_ladder
from .timing import load_average, publish

RESULTS = Path(__file__).with_name("RESULTS.md")
HEADING = "## Numerical engine: sparse or dense"


def _cpu() -> float:
    r = resource.getrusage(resource.RUSAGE_SELF)
    return r.ru_utime + r.ru_stime


def _timed(circuit, rule) -> tuple[float, list]:
    """CPU s of one solve with ``equations._stays_sparse`` replaced by ``rule``, and the
    Jacobians it built."""
    original, seen = equations._stays_sparse, []

    def spy(jac):
        seen.append(jac)
        return rule(jac)
    equations._stays_sparse = spy
    try:
        start = _cpu()
        simulate.solve(circuit)
        return _cpu() - start, seen
    finally:
        equations._stays_sparse = original


def _fill(jac) -> tuple[float, float]:
    n = jac.shape[0]
    scale = float(abs(jac.diagonal()).max())
    lu = spla.splu((sp.identity(n, format="csc") - jac / scale).tocsc())
    return jac.nnz / n / n, (lu.L.nnz + lu.U.nnz) / n / n


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--print-only", action="store_true")
    args = parser.parse_args(argv)
    load0 = load_average()
    rows = ["| circuit | states | J fill | LU fill | rule s | all sparse s | all dense s | "
            "rule's choice | sparse / dense |", "|---|---|---|---|---|---|---|---|---|"]
    size_rule = (lambda jac: jac.shape[0] > equations.SPARSE_ABOVE)
    for circuit in (rc_ladder(300), rc_ladder(1000), random_rc(100, seed=3),
                    random_rc(300, seed=3), random_rc(1000, seed=3)):
        rule, seen = _timed(circuit, equations._stays_sparse)
        sparse, _ = _timed(circuit, size_rule)
        dense, _ = _timed(circuit, lambda jac: False)
        big = max(seen, key=lambda j: j.shape[0])
        jfill, lufill = _fill(big)
        chose = "sparse" if equations._stays_sparse(big) else "dense"
        rows.append(f"| {circuit.title} | {big.shape[0]} | {jfill:.3f} | {lufill:.3f} | "
                    f"{rule:.2f} | {sparse:.2f} | {dense:.2f} | {chose} | "
                    f"{sparse / dense:.2f} |")
        print(rows[-1], flush=True)
    text = (f"`python -m tests.benchmarks.jacobian_bench`: CPU seconds of one `simulate.solve` "
            f"(OPENBLAS_NUM_THREADS as set; load average {load0} / {load_average()}), the "
            f"engine's rule (sparse above {equations.SPARSE_ABOVE} states while the trial LU "
            f"of I - J/max|J_ii| fills at most {equations.SPARSE_LU_FILL:g} of the dense "
            f"matrix) against every Jacobian sparse (the size-only rule) and every one "
            f"dense.\n\n" + "\n".join(rows))
    return publish(RESULTS, HEADING, text, args.print_only)


if __name__ == "__main__":
    raise SystemExit(main())
