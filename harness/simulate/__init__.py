"""The independent numerical engine: a narrow-pulse model integrated with a stiff method.

It reads only the immutable circuit model (harness.model) and shares no code with the exact
engine (harness.closedform); tests/test_independence.py enforces that neither imports the other.
``solve(circuit, pulse_ratio=None, rtol=None)`` returns a NumericSolution (harness.results
Solution protocol, engine "numeric").

Model (equations.py; each kind's branch current in branches.py)
    Nodal equations M y' = -K y + b over the non-ground node voltages, the inductor currents, the
    internal voltage w of each op-amp with a gain-bandwidth product ((1/ω_t) w' = v_cp − v_cn
    − w/A0, its output a carrier of w) and one current per *carrier* (voltage source, vcvs, ccvs,
    op-amp, ideal switch).  Regularisation:

    * a carrier is its ideal voltage in series with r_s || L_p (L_p = r_s t_pulse): its current
      is u / r_s + i_p with L_p i_p' = u, u = v_p - v_n - (ideal voltage).  A step that needs an
      impulse of current (capacitors in a loop with carriers) becomes a pulse of width ~ r_s C
      through r_s; at DC and for the slow response the element is a short, so operating points
      are exactly the ideal circuit's and a loop of inductors and carriers keeps its flux.  An
      ideal open switch is open (its i_p decays with t_pulse);
    * every inductor has a shunt r_shunt, so a current forced by a cutset (current source,
      opening switch) changes in a pulse of width L / r_shunt;
    * a capacitor-less node that in some interval reaches neither ground nor a capacitor gets a
      parasitic capacitance c_base to ground; no other node has one.

    The ODE is written in tree coordinates (coordinates.py): a spanning forest of closed carriers
    and capacitors, one coordinate per node (its tree edge's voltage; for the output of an
    op-amp with a gain-bandwidth product, that voltage less w: its u), KCL per fundamental
    cutset, each branch stamped with integer path multipliers and exactly rounded sums, so 1/r_s
    cancels exactly from every cutset but its carrier's own.  Coordinates without capacitance
    (capacitor-less nodes, the common mode of a capacitor group without ground) are eliminated
    (Kron reduction).  J = -M_dd^-1 K_r is the exact constant Jacobian of each interval
    (scipy.sparse above 50 states).  Intervals with the same switch states share these
    matrices and factorisations (only the constant terms, linear in the source values, are
    recomputed); with the same source values too they share one System.

Regularisation rule (regularise.py), eps = ``pulse_ratio`` (default 1e-7)
    t_fast, a lower estimate of the fastest real time constant: half the fastest mode of a
    coarse pilot model (eps = 1e-3, eigenvalues of its Jacobians below 0.03 / t_pulse; up to
    300 states), else from part values (0.25 min over capacitor nodes of C_min/(2 G_node),
    L_min / R_sum, sqrt(L_min C_min) / 2 pi, 1/ω_t of an op-amp pole, divided by 1 + the
    controlled sources' gains); at
    most the shortest event gap.  Then t_pulse = eps t_fast and

    * r_s = min(eps R_min, t_pulse / (4 C_loop)) but at least 1e-9 R_min (below that 1/r_s
      swamps 1/R in double precision; t_pulse is then raised to 4 r_s C_loop); C_loop is the
      capacitance in loops of carriers and capacitors (regularise.loop_capacitance), the only
      capacitors whose charge passes through r_s alone;
    * L_p = r_s t_pulse (the pulse's tail L_p / r_s is t_pulse; with r_s C <= t_pulse / 4 the
      r_s || L_p - C loop is over-damped);
    * r_shunt = max(R_sum / eps, L_max / t_pulse);
    * c_base = min(eps C_min, t_pulse / (R_sum nodes), L_min / (8 r_shunt^2),
      t_pulse / (4 r_s nodes)).

    No value comes from the exact engine.  The pulse has died after s_a = 100 t_pulse; the settle
    horizon of an interval is 1e3 t_slow (t_slow: R_sum C_sum, L_sum / R_min,
    2 pi sqrt(L_sum C_sum), (R_sum / R_min) / ω_t of an op-amp pole, the longest event gap, times
    the gain factor).  rtol = eps (within
    [1e-8, 1e-4]); atol = 1e-4 rtol times the voltage or current scale (largest source, initial
    or 0- value), for a carrier current at least 1e-14 (sum of |u coefficients|) V_scale / r_s,
    the rounding of u seen through 1/r_s (tighter makes the steps stall); for a node voltage at
    most the current atol times the smallest resistance at the node (a current through a
    milliohm switch resolved like an inductor current), at least 1e-14 V_scale.  Radau's
    error scale is atol + rtol |z| on the deviation z from the origin, except that a state
    still moving from its start (the largest |y| it has reached below |z|) is held to atol +
    rtol times that value, and that every other state's absolute tolerance is at least 3e-2
    rtol times its largest |z| after the pulse (integrate._step_tolerances, SWING_FLOOR).

Initial state (initial.py)
    This engine's own DC solve of the ideal MNA system (refined in extended precision,
    linsolve.py), DESIGN.md "Initial state": held capacitors as voltage constraints, held
    inductors as fixed currents; an undefined node, a loop of voltage-fixing parts or
    contradictory inductor currents are InitialStateErrors naming the part.

Integration (integrate.py)
    Radau (order 5, L-stable) with the analytic Jacobian, in local time from each event, on the
    deviation z from the interval's own operating point (where none exists: a constant driving
    term, growth).  An operating point is accepted up to engine.PLAUSIBLE times what the
    circuit's sources can drive (voltages times the gain factor; that voltage through the
    smallest resistance), its residual judged with each state counted at least at its
    tolerance; an interval that settles although no operating point was established gives no
    final value and the ``unsettled`` diagnostic (detail no-origin), and its values are read
    against the integrated state, never against the solve's discarded one.  Three runs: through the pulse and the post-pulse fit window (first step
    1e-3 t_pulse, at least 16 steps), to the next event (whose state starts the next interval),
    then the held continuation until every capacitor voltage and inductor current has
    |rate| * elapsed time <= 1e-11 of its scale, or the horizon, 50000 steps or a 1e9-fold
    growth (then final None and a warning).  Each interval has a work budget
    (engine.STEP_BUDGET steps, engine.EVAL_BUDGET evaluations) and the solve one over all
    intervals (engine.SOLVE_STEP_BUDGET, engine.SOLVE_EVAL_BUDGET: about a minute at most,
    ~1,000 RC intervals); an interval that exhausts either, or whose integrator
    breaks down (overflow), or whose regularised model has a growing pulse-scale mode (a
    controlled source defeating r_s; checked by eigenvalues up to 300 states), is not reported,
    nor are the later ones, and a warning says where the engine stopped.

Extraction (features.py)
    before = the value at t_k- (end of the previous interval's run); after = a quadratic
    least-squares polynomial fitted to the post-pulse segment [s_a, s_a + W] (W = min(20 s_a,
    1e-3 t_fast)) and evaluated at the event: extrapolation back to t_k; final = the settled
    tail; tau = a weighted log-linear fit of x - x_inf when one exponential matches the whole
    held response within 3e-6 of the probe's scale (or the integration's error in the probe),
    else None with the slowest time constant of the tail in ``modes``; never where x - x_inf
    stays within that error (the ``flat-response`` note), which a visible deviation first
    narrows by its own re-solve at tighter tolerances (twice the change, as
    ``refined_resolution``); order is left None (the exact engine decides it).  Pulse charges
    integrate each part's current over [0, s_a] minus its post-pulse polynomial; the energy
    integrates r i^2 over the regularising resistances likewise.  A current through a carrier
    is read from KCL at a terminal whose other parts are not carriers (probes.py).
"""

from .engine import solve
from .integrate import IntervalStats
from .regularise import DEFAULT_PULSE_RATIO, Regularisation
from .solution import NumericSolution

__all__ = ["solve", "NumericSolution", "IntervalStats", "Regularisation", "DEFAULT_PULSE_RATIO"]
