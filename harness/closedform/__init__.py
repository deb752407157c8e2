"""The exact closed-form engine: x(t) = x_inf + sum a_i e^(lambda_i (t - t_k)) per interval.

Method (no time stepping; plain dense linear algebra).

1. Equations.  Modified nodal analysis (``mna``) over the node voltages (ground removed) and one
   branch current per voltage source, vcvs, ccvs, inductor and switch gives C x' + G x = b for
   each interval between events.  Every switch keeps its current variable in every interval
   (open ideal: i = 0; open with off-resistance: v = R_off i; closed ideal: v = 0; closed with
   on-resistance: v = R_on i), so the layout never changes.  ccvs/cccs sense a branch variable or
   a resistor's (vp - vn)/R.  Node groups that reach ground only through open switches or
   current sources (undefined common voltage) are tied to ground by R0 and reported.
   Each part kind's entries come from its stamp in ``stamps.STAMPS``; an op-amp with a
   gain-bandwidth product puts −(v(p) − v(n))/ω_t on its branch row of C, so its output voltage
   is a state like a capacitor's (the null basis of C joins its output terminals).
2. Scaling.  Currents in units of V/R0 and time in units of T, R0 the geometric mean of the
   resistances, T the geometric mean of R0*C over capacitors, L/R0 over inductors and 1/ω_t
   over op-amp poles, so the
   scaled matrices and modes are O(1) for typical values.
3. State at 0- (``initial``).  DC steady state of the pre-step circuit, or, where parts carry
   ``initial``, the DC solve with those capacitors held as voltage sources and those inductors
   as current sources; contradictions and undefined storage values raise InitialStateError
   naming the part and field (the SVD that finds free storage values is taken only where an LU
   condition estimate does not already show the DC matrix regular; without initial values and
   DC-floating groups the DC matrix is the pre-step pencil's G~, and one kept solve, with its
   equilibration, LU and condition estimate, serves both).  The values at 0- of all
   other quantities are the right limit of
   the pre-step circuit's own exact response started from that storage state (the resistive
   network at 0- with capacitors as their voltages and inductors as their currents, capacitor
   currents included).  At later events the state before is the previous interval's exact
   solution at t_k.
4. Per interval (``interval``, ``response``).  Particular solution x_p by least squares on
   G x = b: singular G is trapped charge (fixed below by the conserved charge); a non-zero
   residual is unbounded growth (warning naming the nodes and the feeding parts), solved exactly
   in the augmented form [x; 1].  Shift-invert M = (G + s0 C)^-1 C (s0 = 1 in scaled time,
   moved to the geometric centre of the modes when they lie far away, retried when G + s0 C is
   singular or a mode sits on it), on the pencil equilibrated for |G| + s0 |C| (Ruiz scaling).
   The exact null space of C (from the capacitor graph) is deflated first, so the algebraic
   directions of capacitor/voltage-source loops and inductor cutsets are simple zeros rather
   than Jordan blocks; the rest is put in ordered real Schur form with the |mu| > 1e-11/s0
   block first (finite modes lambda = s0 - 1/mu) and decoupled by a Sylvester equation.  With
   e = x(t_k-) - x_p: z0 = [I, -X] U^T R^T e (only the charges and fluxes of e enter) and for
   t > t_k exactly x(t) = x_p + Q1 expm(A (t - t_k)/T) z0, A = s0 I - S11^-1.  This includes
   every jump: the infinite directions carry the impulses and vanish after t_k.  Decompositions
   are cached per switch configuration.  Reciprocal RC pencils (G~ and C~ symmetric, from 32
   unknowns on) take a faster exact route to the same representation (``symmetric``): the
   capacitance-free unknowns are eliminated by a Schur complement and one symmetric-definite
   eigenproblem eigh(S, C11) gives the modes; anything else falls back to the route above.
5. Modes (``modes``).  A is split by eigenvalue cluster (from one eigendecomposition where
   its eigenvector basis is well conditioned, else by ordered complex Schur + Sylvester; on the
   symmetric route A is diagonal and the clusters are index selections):
   the zero cluster (|lambda| <= 1e-10 s0: trapped charge or flux, part of x_inf; a rate below
   that but above its own rounding, re-read from the pencil on the general route and eigh's
   on the symmetric one, is a slow real mode, resolved at a shift moved down to it; where the
   circuit has no controlled part the exact number of zero modes comes from its graph,
   ``nullity``: islands cut off from ground at DC plus loops of zero-resistance branches (with
   one, it is 0 where the DC matrix is provably nonsingular, ``nullity.nonsingular``), and
   a zero cluster larger than that holds slow modes below rounding (14-16 decades under the
   fastest), looked for at the lowest shift that keeps the fastest finite and resolved at the
   centre of both, the symmetric route handing them to the general one), and clusters
   of eigenvalues equal to tolerances.MODE_MERGE (identical modes merged; defective ones give
   polynomial x exponential terms).  Complex pairs report their envelope tau and frequency.
6. Features (``features``, ``probes``).  Every probe is c.x + d.x' + a constant per interval.
   A capacitor's current takes its cut-space part from KCL on the values, A^+ (b - G x), and
   only its loop part from C dv/dt of the exponential form, so it stays accurate when a small
   and a large capacitance share a node.  before/after are the left/right limits of the exact
   waveform; final is x_p plus the zero cluster, None where a growing mode, an undamped swing
   or a ramp is visible; a mode is visible when its amplitude exceeds MODE_VISIBILITY times the
   probe's scale (its largest value at the events; its mode amplitudes where those are below
   a floor); order counts visible decaying modes (pair = 2, defective = its
   multiplicity); tau only when exactly one real one.  span(k) ends at t_k + 10 x the slowest
   tau (10 T without modes), and at least at the next event.
7. Jumps (``jumps``).  Integrating the equations over the instant: C (x+ - x-) + G q = 0 with
   C q = 0 fixes the impulsive charges and fluxes q; energy dissipated = stored energy lost +
   work of the independent sources during the impulse (None if a controlled source or resistor
   carries an impulse).  An inductor current cut by an opening switch is a warning.
8. Thevenin (``thevenin``).  Per storage part: sources zeroed, other capacitors open, other
   inductors shorted, controlled sources kept, a 1 A test injection: R_th = v / 1 A.  One LU
   of the interval's G~ serves every test injection (an inductor's own "open" row by a
   bordered solve), O(n^3) per interval; where G~ is not provably regular, one least-squares
   solve per part with one shared null-space test.

Limits: with the shift at the geometric centre of the modes, one interval classifies time
constants spanning up to ~1e20 (slow ones must stay above the zero threshold 1e-10 s0, fast ones
below 1e11 s0, beyond which they count as instantaneous; 1 ps with 1000 s is tested).  In
unbounded (augmented) intervals the zero threshold is 1e-6 s0, because the ramp forms a Jordan
block at lambda = 0.  Values lose about eps * (C_large / C_small) relative accuracy where a
group of nodes joined by a large capacitance meets the rest only through a small one (the
charge of that group is a small difference of large terms): ~1e-8 at a ratio of 1e8.

Public API: ``solve(circuit) -> ClosedFormSolution`` (harness.results.Solution plus
``thevenin(k)``, ``time_constants(k)``, ``interval_modes(k)``, and ``periodic(probe,
fraction)``: the exact periodic steady state of a repeating window, module ``periodic``).
"""

from .modes import Mode
from .solution import ClosedFormSolution, solve

__all__ = ["solve", "ClosedFormSolution", "Mode"]
