"""The Markdown text of the Performance section, from the measured figures."""

from __future__ import annotations

from .timing import ms

TARGETS = """\
Targets (figures of the run of 2026-12-01 quoted; the tables above are the latest run):

- **Exact engine within 2x of its limit for n >= 100: not met.**  From n = 1000 the remaining
  gap is two pieces outside this task's files: the full SVD in `initial._check_unique` (37 % of
  a 1000-ladder solve, a larger O(n^3) call than the eigh itself) and `Circuit.part`, a linear
  search called once per part by `jumps._significant` (9 %).  With both patched in by the
  benchmark ("what-if") the ratio is 1.6-2.5x at n = 2000 and 2.3-3.4x at n = 1000.  At n = 100
  the LAPACK limit is 0.4-0.7 ms while a solve has ~2 ms of fixed Python cost (stamping,
  union-finds, dataclasses, per-part loops in jumps/energy): 2x there needs those vectorised.
- **Under 2 ms per small circuit: met at the median** (1.8 ms for the library's circuits of
  fewer than 10 nodes, solve + every expectation's features), not for all: the slowest carry
  sign-off features (crossings, zero-value time constants) added in `features`.
- **Features of a higher-order probe** grow as n^3-n^4 through `thevenin_resistances` (one
  least-squares solve and one SVD per storage part, called for the dominant-tau estimate): 1 s
  at 200 sections.  One LU of G~ for all test injections and one null-space test per interval
  would make it O(n^3) in all.
- **Numeric engine within 1.3x of a bare solve_ivp: not met for the whole solve, met for the
  stepping** (0.9-1.5x).  The rest is set-up: the equations are assembled four times (pilot
  model + real model, pre-step + interval) in Python dictionaries per part
  (`coordinates.assemble` ~0.3 s of 0.8 s at n = 1000, half of it `Circuit.part` look-ups),
  and the pilot's eigenvalues.  The assembly of `equations._assemble` was O(parts^2) through
  `Circuit.part` and is now linear (1.15 s -> 0.81 s under the profiler at n = 1000).  Sparse
  Jacobians are in place: the 1000-section ladder integrates in 0.4 s (dense Radau: 14 s).
- **Library --jobs 2 >= 1.7x: not met, and not measurable on this machine while other sessions
  use both cores** (load average ~5: two workers got 0.6-0.8x).  Independently of the load, 75 %
  of a check run is plotting (194 plots at 80-160 ms each, rendered one by one in the parent
  process after the analysis), so by Amdahl's law parallel analysis alone cannot exceed ~1.3x;
  rendering the plots in the workers (or a pool in `report.write_all`) is what would meet it
  (measured 1.9x for the plots alone on an idle moment: 16.8 s -> 8.8 s).
- **BLAS threads**: with the default OpenBLAS threading a 200-ladder solve was 10-14x slower
  than single-threaded on this shared machine; worker processes (and --jobs runs) should set
  one BLAS thread each (`runner`/`pool`, not in this task's files).
"""

CHANGES = """\
Changes made for speed (results unchanged to rounding; tests/test_closedform_*.py pass):

- `harness/closedform/symmetric.py` (new): passive reciprocal pencils (G~ symmetric after
  clearing open-switch columns, C~ symmetric with a positive definite capacitance block) are
  reduced to the capacitor coordinates (Schur complement of the capacitance-free block) and
  decomposed by one `scipy.linalg.eigh(S, C11)`; everything else (controlled sources,
  inductors, capacitor loops with ideal voltage-type parts) falls back to the general route.
  Hooked in `response.pencil_of`.  Verified in tests/test_closedform_symmetric.py.
- `modes.clusters_of`: one eigendecomposition instead of one complex Schur form per mode
  cluster when the eigenvector basis is well conditioned (was O(f^4) for f distinct modes;
  0.44 s -> 0.01 s at f = 200); `group_rates` searches only the magnitude window that can merge
  (was O(f^2) Python); `diagonal_clusters` for the symmetric route.
- `response`: cluster data without per-cluster products, states summed per mode cluster above
  16 modes instead of `expm` of the whole A per time point (O(n f) instead of O(f^3) each).
- `linalg.least_squares`: LU with a condition estimate (LAPACK dgecon) for square, well
  conditioned systems; the SVD-based `lstsq` only where the system is singular or
  ill-conditioned.
- `mna.stamp`: resistor and capacitor stamps write their four entries instead of adding O(n)
  rows; `mna.current_row` looks parts up in a per-circuit name index instead of a linear search.
- `linalg.equilibrate` stops at its fixed point (bit-identical results).
- `harness/simulate/equations.py`: `_assemble` looks parts up in one dict (was O(parts^2)).
- Small circuits (< 32 unknowns) keep the previous routes: `tauproof solve circuits/library
  --closed-form-only --json` is byte-identical before and after these changes.
"""


def _limits(text: str, data: dict, prof) -> str:
    rows = data["rows"]
    big = [r for r in rows if r["unknowns"] >= 100 and r.get("limit")]
    worst = max(big, key=lambda r: r["solve"] / r["limit"]) if big else None
    fit = data["fit"]
    out = [text, "",
           f"Growth exponents (last three sizes): ladder solve n^{fit['ladder']:.2f} vs its "
           f"limit n^{fit['ladder_limit']:.2f}; random networks solve n^{fit['random']:.2f} vs "
           f"limit n^{fit['random_limit']:.2f}.", ""]
    if worst is not None:
        met = all(r["solve"] <= 2 * r["limit"] for r in big)
        out.append(f"Target solve <= 2 x limit for n >= 100: **{'met' if met else 'not met'}**"
                   f" (worst {worst['circuit']}: {worst['solve'] / worst['limit']:.1f} x).")
    if prof is not None:
        total, top = prof
        out += ["", f"Where a solve of the largest ladder goes (cProfile, {total:.2f} s under "
                    f"the profiler, own time):", ""]
        out += [f"- `{name}`: {t:.3f} s ({100 * t / total:.0f} %)" for name, t in top]
    return "\n".join(out)


def compose(parts: dict, meta: dict) -> str:
    out = [f"Machine: {meta['cpu']}; {meta['versions']}; OpenBLAS threads: {meta['threads']}.",
           f"Load average at start / end: {meta['load'][0]} / {meta['load'][1]} (2 cores, shared "
           f"with other sessions: every figure is a median of repeated runs and every ratio is "
           f"measured in the same run, but absolute times scatter by 2-3 x between runs).  "
           f"Whole run {meta['seconds']:.0f} s.", ""]
    if "threads" in parts:
        out += ["### 0. BLAS threads on this shared machine", "",
                "Multi-threaded OpenBLAS spin-waits for a second core that other sessions hold: "
                "with the default thread count small dense calls can be many times slower "
                "than single-threaded.  The rest of this section is measured with the threads "
                "setting shown above.", "", parts["threads"][0], ""]
    if "limits" in parts:
        text, data = parts["limits"]
        out += ["### 1. Exact engine vs its linear-algebra limit", "",
                "limit = the bare LAPACK calls on the same matrices: LU of the algebraic block "
                "and `eigh(S, C11)` of the symmetric route.  general route = the same solve "
                "with the symmetric route switched off (shift-invert, ordered Schur, "
                "Sylvester).  dense eig = `numpy.linalg.eig(C11^-1 S)`; QZ = "
                "`scipy.linalg.eig(G~, C~)` on the full MNA pencil.  what-if = solve with two changes "
                "outside this task's files, patched in by the benchmark only: the DC uniqueness "
                "check `initial._check_unique` gated by an LU condition estimate (its full SVD "
                "skipped for a regular DC matrix) and `Circuit.part` through a name index "
                "(`jumps._significant` calls the linear search once per part, O(parts^2)).",
                "",
                _limits(text, data, data.get("profile")), ""]
    if "small" in parts:
        out += ["### 1b. Small circuits", "", parts["small"][0], ""]
    if "features" in parts:
        out += ["### 1c. Features of a higher-order probe", "",
                "`features` of a probe that is not first order also computes the zero-value "
                "time-constant estimate (the sum of R_th C over every storage part, "
                "`thevenin_resistances`: one least-squares solve and one SVD per storage "
                "part, O(n^4) in all).", "", parts["features"][0], ""]
    if "events" in parts:
        out += ["### 3. Scaling with the number of events", "", parts["events"][0], ""]
    if "numeric" in parts:
        out += [parts["numeric"][0], ""]
    if "library" in parts:
        out += ["### 4. Library throughput", "", parts["library"][0], ""]
    if "alt" in parts:
        out += ["### 5. What a user would do instead", "", parts["alt"][0], ""]
    out += ["### Targets and what would meet them", "", TARGETS, "### Changes", "", CHANGES]
    return "\n".join(out)
