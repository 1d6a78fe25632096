r"""Newton-Raphson (IRLS for a canonical-link GLM) with step halving on the objective.

Each iteration solves :math:`H\,d = -\nabla F` by a Jacobi-scaled Cholesky factorisation
of the penalised Hessian (for a binomial loss, :math:`H = X'WX + \lambda D`, formed as one
BLAS product on :math:`\sqrt{W}X` per block of rows: the IRLS normal equations), then
halves the step until the Armijo condition
:math:`F(z + t d) - F(z) \le 10^{-4}\, t\, \nabla F' d` holds; the change on the left is
computed directly (not as a difference of two rounded objective values), so the test
stays meaningful down to the rounding level of the gradient.  It stops when the max-abs
gradient in the caller's coordinates is at most ``tol``.

For large problems (see ``LinearModelProblem.sketch_hessian``) the first iterations use
a Hessian from a fixed row subsample (Newton sketch, Pilanci & Wainwright 2017) until the
gradient has fallen by ``SKETCH_UNTIL``, or at once when a sketched step needs halving;
the final iterations are exact Newton steps, so convergence stays quadratic at the end.

References
----------
Nocedal, J. & Wright, S. J. (2006). Numerical Optimization, 2nd ed., ch. 3. Springer.
Pilanci, M. & Wainwright, M. J. (2017). Newton sketch. SIAM J. Optimization 27, 205-245.
McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed., sec. 2.5.
"""

from __future__ import annotations

from typing import Any, Callable

import numpy as np

from . import Evaluation, IterationRecord, SingularMatrixError, SolverResult, solve_spd

__all__ = ["newton"]

ARMIJO = 1e-4
MAX_HALVINGS = 60
#: Iterations in a row without a decrease beyond rounding before the solver gives up.
STALL_LIMIT = 3
#: A fall of the objective below this times its size counts as rounding noise.
ROUNDING = 1e3 * float(np.finfo(float).eps)
#: Large problems use a row-subsample Hessian (Newton sketch) until the max-abs gradient
#: is below this fraction of its starting value; exact Hessians finish the job.
SKETCH_UNTIL = 1e-3


def _finish(name, z, ev, it, status, message):
    return SolverResult(
        z=z, converged=status == "converged", iterations=it, objective=ev.value,
        gradient_norm=ev.gradient_norm, status=status, message=message, solver=name,
    )


def converged_message(name: str, it: int, gnorm: float, tol: float) -> str:
    return f"{name}: converged in {it} iteration(s); max |gradient| {gnorm:.3g} <= tol {tol:.3g}"


def limit_message(name: str, it: int, gnorm: float, tol: float) -> str:
    advice = "raise max_iter" if name == "newton" else "raise max_iter or choose solver='newton'"
    return (
        f"{name}: stopped at the iteration limit ({it}) with max |gradient| {gnorm:.3g} > tol "
        f"{tol:.3g}; NOT converged: {advice}"
    )


def stalled_message(name: str, it: int, gnorm: float, tol: float) -> str:
    return (
        f"{name}: stalled after {it} iteration(s): the objective no longer decreases beyond "
        f"rounding while max |gradient| is {gnorm:.3g} > tol {tol:.3g}; NOT converged: tol is "
        "probably below what float64 rounding allows for this problem (loosen tol, or "
        "rescale the columns)"
    )


def newton(
    problem: Any,
    *,
    tol: float,
    max_iter: int,
    on_iteration: Callable[[IterationRecord], Any] | None = None,
    monitor: Callable[[np.ndarray, Evaluation], str | None] | None = None,
    start: np.ndarray | None = None,
) -> SolverResult:
    """Minimise ``problem`` by damped Newton steps; see the module docstring."""
    name = "newton"
    z = problem.start() if start is None else np.array(start, dtype=float)
    ev = problem.evaluate(z)
    it = stall = 0
    g_start = ev.gradient_norm
    sketching = hasattr(problem, "sketch_hessian")
    while True:
        gnorm = ev.gradient_norm
        if gnorm <= tol:
            return _finish(name, z, ev, it, "converged", converged_message(name, it, gnorm, tol))
        if it >= max_iter:
            return _finish(name, z, ev, it, "iteration_limit", limit_message(name, it, gnorm, tol))
        try:
            H = problem.sketch_hessian(z) if (sketching and gnorm > SKETCH_UNTIL * g_start) else None
            sketched = H is not None
            if H is None:
                H = problem.hessian(z)
            d = -solve_spd(H, ev.gradient)
        except SingularMatrixError as exc:
            return _finish(name, z, ev, it, "singular", f"{name}: the Hessian is singular ({exc})")
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
        if not accepted or not slope < 0:
            stall = STALL_LIMIT
        z_new = z + t * d
        try:
            ev_new = problem.evaluate(z_new) if accepted else ev
        except SingularMatrixError as exc:
            return _finish(name, z, ev, it, "singular", f"{name}: {exc}")
        if accepted:
            it += 1
            step = float(np.max(np.abs(problem.to_original(z_new) - problem.to_original(z)))) if z.size else 0.0
            # progress: the gradient halves (as it must near the optimum) or the objective
            # falls by more than its own rounding; anything else, three times, is a stall
            decreased = ev_new.gradient_norm < 0.5 * gnorm or change < -ROUNDING * abs(ev.value)
            stall = 0 if decreased else stall + 1
            z, ev = z_new, ev_new
            if on_iteration is not None:
                on_iteration(IterationRecord(it, ev.value, ev.gradient_norm, step))
            if monitor is not None and ev.gradient_norm > tol:
                why = monitor(z, ev)
                if why:
                    return _finish(name, z, ev, it, "diverging", f"{name}: {why}")
        if stall >= STALL_LIMIT and ev.gradient_norm > tol:
            return _finish(name, z, ev, it, "stalled", stalled_message(name, it, ev.gradient_norm, tol))
