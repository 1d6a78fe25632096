r"""Newton-Raphson (IRLS for a canonical-link GLM) with step halving on the objective.

Each iteration solves :math:`H\,d = -\nabla F` by a Jacobi-scaled Cholesky factorisation
of the penalised Hessian (for a binomial loss, :math:`H = X'WX + \lambda D`, formed as one
BLAS product on :math:`\sqrt{W}X` per block of rows: the IRLS normal equations), then
halves the step until the Armijo condition
:math:`F(z + t d) - F(z) \le 10^{-4}\, t\, \nabla F' d` holds; the change on the left is
computed directly (not as a difference of two rounded objective values), so the test
stays meaningful down to the rounding level of the gradient.  It stops when the max-abs
gradient per unit case weight in the standardised, centred coordinates (the rule of
:mod:`lintools.engine`) is at most ``tol``.  Its steps, tests and stopping rule are
invariant to a common factor on the weights.

For large problems (see ``LinearModelProblem.sketch_hessian``) the first iterations use
a Hessian from a fixed row subsample (Newton sketch, Pilanci & Wainwright 2017) until the
gradient has fallen by ``FastPaths.sketch_until``, or at once when a sketched step needs halving;
the final iterations are exact Newton steps, so convergence stays quadratic at the end.

Large problems (``LinearModelProblem`` with many rows) take three more shortcuts, none of
which changes the answer, since the stopping test is always on the exact float64
gradient at a freshly formed linear predictor:

* the start is the optimum on a fixed row subsample (``warm_start``), so the damped early
  iterations cost a fraction of a pass over the data;
* the Hessians of the steps are formed in float32 when a test of conditioning allows
  (``step_hessian``); the covariance is always formed in float64;
* a factorised Hessian is kept for the next step while a full step with it cut the
  gradient by ``FastPaths.reuse_ratio`` (a chord step), and the line search's ``eta + t X d`` is
  carried to the new point instead of a new product with X; the answer's evaluation is
  formed afresh (``Evaluation.fresh``) and rechecked before it is reported.

References
----------
Nocedal, J. & Wright, S. J. (2006). Numerical Optimization, 2nd ed., ch. 3. Springer.
Pilanci, M. & Wainwright, M. J. (2017). Newton sketch. SIAM J. Optimization 27, 205-245.
McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed., sec. 2.5.
"""

from __future__ import annotations

from typing import Any, Callable

import numpy as np

from .contracts import Problem
from .settings import fast_paths
from .base import (
    Evaluation,
    IterationRecord,
    SingularMatrixError,
    SolverResult,
    cholesky,
    finish,
    report_step,
    solve_factored,
    stalled_message,
    stop_before_step,
)

__all__ = ["newton"]

ARMIJO = 1e-4
MAX_HALVINGS = 60
#: Iterations in a row without a decrease beyond rounding before the solver gives up.
STALL_LIMIT = 3
#: A fall of the objective below this times its size counts as rounding noise.
ROUNDING = 1e3 * float(np.finfo(float).eps)
#: (The shortcuts' thresholds - the Newton sketch, Hessian reuse, the carried linear
#: predictor - are the fields of :class:`lintools.engine.settings.FastPaths`.)


def newton(
    problem: Problem,
    *,
    tol: float,
    max_iter: int,
    on_iteration: Callable[[IterationRecord], Any] | None = None,
    monitor: Callable[[np.ndarray, Evaluation], str | None] | None = None,
    start: np.ndarray | None = None,
) -> SolverResult:
    """Minimise ``problem`` by damped Newton steps; see the module docstring."""
    name = "newton"
    z = None
    if start is None and problem.warm_starts:
        z = problem.warm_start()  # large problems: the optimum on a row subsample
    if z is None:
        z = problem.start() if start is None else np.array(start, dtype=float)
    ev = problem.evaluate(z)
    it = stall = 0
    g_start = ev.gradient_norm
    paths = fast_paths()
    sketching = problem.sketches
    step_hessian = problem.step_hessian if problem.fast_steps else problem.hessian
    reuse_allowed = problem.fast_steps and bool(problem.reuse_hessian)
    factors = None  # Cholesky factors of the last Hessian, while it may be reused
    while True:
        gnorm = ev.gradient_norm
        if gnorm <= tol and not ev.fresh:
            ev = problem.evaluate(z, fresh=True)  # converged on a carried-forward eta: check afresh
            gnorm = ev.gradient_norm
        stop = stop_before_step(name, it, gnorm, tol, max_iter)
        if stop:
            return finish(name, z, ev, it, *stop, problem)
        reused = factors is not None
        sketched = False
        try:
            if factors is None and sketching and gnorm > paths.sketch_until * g_start:
                try:
                    H = problem.sketch_hessian(z)
                    factors = None if H is None else cholesky(H)
                    sketched = factors is not None
                except SingularMatrixError:
                    sketching, factors = False, None
            if factors is None:
                factors = cholesky(step_hessian(z))
            d = -solve_factored(factors, ev.gradient)
        except SingularMatrixError as exc:
            return finish(name, z, ev, it, "singular", f"{name}: the Hessian is singular ({exc})", problem)
        slope = float(ev.gradient @ d)
        line = problem.line(z, d)
        t, accepted = 1.0, False
        for _ in range(MAX_HALVINGS):
            change = line.change(t)
            if np.isfinite(change) and change <= ARMIJO * t * min(slope, 0.0):
                accepted = True
                break
            t *= 0.5
        if sketched and t < 1.0:
            sketching = False  # the subsample misled the step: exact Hessians from here on
        if reused and (t < 1.0 or not accepted):
            factors, reused = None, False  # a stale Hessian misled the step: form a fresh one
            if not accepted:
                continue
        if not accepted or not slope < 0:
            stall = STALL_LIMIT
        z_new = z + t * d
        try:
            if accepted:
                if line.carries and gnorm > paths.carry_above * tol:
                    line.adopt(t, z_new)  # the line search's eta(z + t d): no new pass over X
                ev_new = problem.evaluate(z_new)
            else:
                ev_new = ev
        except SingularMatrixError as exc:
            return finish(name, z, ev, it, "singular", f"{name}: {exc}", problem)
        # a Hessian that made the gradient fall by reuse_ratio with a full step may serve again
        if not (reuse_allowed and accepted and t == 1.0 and ev_new.gradient_norm <= paths.reuse_ratio * gnorm):
            factors = None
        if accepted:
            it += 1
            # progress: the gradient halves (as it must near the optimum) or the objective
            # falls by more than its own rounding; anything else, three times, is a stall
            decreased = ev_new.gradient_norm < 0.5 * gnorm or change < -ROUNDING * abs(ev.value)
            stall = 0 if decreased else stall + 1
            z_old, z, ev = z, z_new, ev_new
            why = report_step(problem, it, z_old, z, ev, tol, on_iteration, monitor)
            if why:
                return finish(name, z, ev, it, "diverging", f"{name}: {why}", problem)
        if stall >= STALL_LIMIT and ev.gradient_norm > tol:
            return finish(name, z, ev, it, "stalled", stalled_message(name, it, ev.gradient_norm, tol), problem)
