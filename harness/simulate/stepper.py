"""scipy's Radau step without its per-call wrapping, for a constant Jacobian.

``Radau`` (scipy.integrate; Hairer & Wanner, *Solving Ordinary Differential Equations II*,
sec. IV.8: implicit Runge-Kutta Radau IIA of order 5, simplified Newton iterations on the
transformed collocation system, the embedded error estimate filtered through (I - h g0 J)^-1,
the step-size predictor of Gustafsson) spends a good part of a step at the engine's sizes in
Python wrappers around its arithmetic (the right-hand side's two, the norm's, the
interpolant's, error-state contexts: a step here is 9-14 % cheaper at 10-100 states than
scipy's with the same linear-algebra hooks, 3-4 % at 500-1,000, measured under load).  ``LeanRadau`` takes the same step as ``scipy.integrate.Radau._step_impl`` (scipy
1.17) with a Jacobian given as a constant matrix: the same floating-point operations on the
same arrays in the same order, hence the same steps, states and counters to the last bit
(tests/test_simulate_stepper.py compares both step by step), with those layers left out:

* the right-hand side is called as given (the engine's own float function), counted in
  ``nfev`` as scipy counts it;
* the RMS norm is sqrt(x . x) / sqrt(size), as ``np.linalg.norm`` computes it for a real array;
* the collocation predictor reads the last step's interpolant directly (its ``_call_impl``);
* floating-point errors are not trapped here: the caller steps under ``np.errstate`` and
  checks the state (integrate.py);
* a Newton failure halves the step at once, as scipy does when its Jacobian is current
  (a constant one always is).

The method's constants and the interpolant objects are scipy's own
(``scipy.integrate._ivp.radau``); the predictor and the interpolant's evaluation are restated
here with the same operations.

The step restates scipy's ``scipy/integrate/_ivp/radau.py``, Copyright (c) 2001-2002 Enthought,
Inc. 2003, SciPy Developers, used under scipy's BSD 3-Clause licence, whose text is in
``harness/LICENSE-scipy``.
"""

from __future__ import annotations

import numpy as np
from scipy.integrate import Radau
from scipy.integrate._ivp.radau import (C, E, MAX_FACTOR, MIN_FACTOR, MU_COMPLEX, MU_REAL,
                                        NEWTON_MAXITER, TI, TI_COMPLEX, TI_REAL, T)


def _rms(x: np.ndarray):
    """scipy's ``norm``: np.linalg.norm(x) / x.size ** 0.5, with the norm of a real array
    taken as numpy takes it (sqrt of the dot product of the raveled array with itself)."""
    flat = x.ravel(order="K")
    return np.sqrt(flat.dot(flat)) / x.size ** 0.5


def _predict(h_abs, h_abs_old, error_norm, error_norm_old):
    """scipy's ``predict_factor`` (Gustafsson's predictor), without its error-state context."""
    if error_norm_old is None or h_abs_old is None or error_norm == 0:
        multiplier = 1
    else:
        multiplier = h_abs / h_abs_old * (error_norm_old / error_norm) ** 0.25
    return min(1, multiplier) * error_norm ** -0.25


def _collocate(fun, t, y, h, Z0, scale, tol, LU_real, LU_complex, solve_lu):
    """scipy's ``solve_collocation_system``: (converged, iterations, Z, rate, evaluations)."""
    n = y.shape[0]
    M_real = MU_REAL / h
    M_complex = MU_COMPLEX / h
    W = TI.dot(Z0)
    Z = Z0
    F = np.empty((3, n))
    ch = h * C
    dW_norm_old = None
    dW = np.empty_like(W)
    converged = False
    rate = None
    evals = 0
    for k in range(NEWTON_MAXITER):
        for i in range(3):
            F[i] = fun(t + ch[i], y + Z[i])
        evals += 3
        if not np.isfinite(F).all():
            break
        f_real = F.T.dot(TI_REAL) - M_real * W[0]
        f_complex = F.T.dot(TI_COMPLEX) - M_complex * (W[1] + 1j * W[2])
        dW_real = solve_lu(LU_real, f_real)
        dW_complex = solve_lu(LU_complex, f_complex)
        dW[0] = dW_real
        dW[1] = dW_complex.real
        dW[2] = dW_complex.imag
        dW_norm = _rms(dW / scale)
        if dW_norm_old is not None:
            rate = dW_norm / dW_norm_old
        if (rate is not None and (rate >= 1 or
                                  rate ** (NEWTON_MAXITER - k) / (1 - rate) * dW_norm > tol)):
            break
        W += dW
        Z = T.dot(W)
        if (dW_norm == 0 or
                rate is not None and rate / (1 - rate) * dW_norm < tol):
            converged = True
            break
        dW_norm_old = dW_norm
    return converged, k + 1, Z, rate, evals


def _predicted(sol, t) -> np.ndarray:
    """The last step's interpolant at the times t, shape (n, len(t)) (its ``_call_impl``:
    the powers x, x^2, x^3 as its running product (x x) x, the same floats)."""
    x = (t - sol.t_old) / sol.h
    p = np.empty((sol.order + 1, x.size))
    p[0] = x
    for k in range(1, sol.order + 1):
        np.multiply(p[k - 1], x, out=p[k])
    y = np.dot(sol.Q, p)
    y += sol.y_old[:, None]
    return y


class LeanRadau(Radau):
    """``scipy.integrate.Radau`` whose step is ``_step_impl`` below (module docstring).

    Only for a Jacobian given as a constant matrix (``jac`` an array or sparse matrix): its
    ``jac`` is then None and its Jacobian always current.  ``fun`` is called directly (the
    caller's own array function); ``nfev`` counts it as scipy's wrapper would."""

    def __init__(self, fun, t0, y0, t_bound, **options) -> None:
        super().__init__(fun, t0, y0, t_bound, **options)
        if self.jac is not None:
            raise ValueError("LeanRadau takes a constant Jacobian")
        self._raw = fun

    def _start(self):
        """(h_abs, h_abs_old, error_norm_old, min_step) of the next step: the last step's
        proposal, held within [min_step, max_step] (the history dropped where it is not)."""
        t = self.t
        min_step = 10 * np.abs(np.nextafter(t, self.direction * np.inf) - t)
        if self.h_abs > self.max_step:
            return self.max_step, None, None, min_step
        if self.h_abs < min_step:
            return min_step, None, None, min_step
        return self.h_abs, self.h_abs_old, self.error_norm_old, min_step

    def _step_impl(self):
        t, y, f = self.t, self.y, self.f
        atol, rtol, J, fun = self.atol, self.rtol, self.J, self._raw
        h_abs, h_abs_old, error_norm_old, min_step = self._start()
        LU_real, LU_complex = self.LU_real, self.LU_complex
        rejected = False
        while True:
            if h_abs < min_step:
                return False, self.TOO_SMALL_STEP
            h = h_abs * self.direction
            t_new = t + h
            if self.direction * (t_new - self.t_bound) > 0:
                t_new = self.t_bound
            h = t_new - t
            h_abs = np.abs(h)
            if self.sol is None:
                Z0 = np.zeros((3, y.shape[0]))
            else:
                Z0 = _predicted(self.sol, np.asarray(t + h * C)).T - y
            scale = atol + np.abs(y) * rtol
            if LU_real is None or LU_complex is None:
                LU_real = self.lu(MU_REAL / h * self.I - J)
                LU_complex = self.lu(MU_COMPLEX / h * self.I - J)
            converged, n_iter, Z, rate, evals = _collocate(
                fun, t, y, h, Z0, scale, self.newton_tol, LU_real, LU_complex, self.solve_lu)
            self.nfev += evals
            if not converged:          # a constant Jacobian is current: halve the step
                h_abs *= 0.5
                LU_real = LU_complex = None
                continue
            y_new = y + Z[-1]
            ZE = Z.T.dot(E) / h
            error = self.solve_lu(LU_real, f + ZE)
            scale = atol + np.maximum(np.abs(y), np.abs(y_new)) * rtol
            error_norm = _rms(error / scale)
            safety = 0.9 * (2 * NEWTON_MAXITER + 1) / (2 * NEWTON_MAXITER + n_iter)
            if rejected and error_norm > 1:
                self.nfev += 1
                error = self.solve_lu(LU_real, fun(t, y + error) + ZE)
                error_norm = _rms(error / scale)
            if error_norm <= 1:
                break
            factor = _predict(h_abs, h_abs_old, error_norm, error_norm_old)
            h_abs *= max(MIN_FACTOR, safety * factor)
            LU_real = LU_complex = None
            rejected = True
        factor = min(MAX_FACTOR, safety * _predict(h_abs, h_abs_old, error_norm, error_norm_old))
        if factor < 1.2:
            factor = 1
        else:
            LU_real = LU_complex = None
        self.nfev += 1
        self.f = fun(t_new, y_new)
        self.h_abs_old, self.error_norm_old = self.h_abs, error_norm
        self.h_abs = h_abs * factor
        self.y_old, self.t, self.y, self.Z = y, t_new, y_new, Z
        self.LU_real, self.LU_complex = LU_real, LU_complex
        self.t_old = t
        self.sol = self._compute_dense_output()
        return True, None
