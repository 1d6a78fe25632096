r"""Limited-memory BFGS (two-loop recursion) with a strong-Wolfe line search, in NumPy.

The search direction is :math:`d = -H_k \nabla F` with :math:`H_k` the L-BFGS inverse
Hessian built from the last ``memory`` pairs :math:`(s, y)` by the two-loop recursion and
initial scaling :math:`s'y / y'y` (Nocedal & Wright 2006, Algorithm 7.4).  The step
satisfies the strong Wolfe conditions

.. math::

    F(z + t d) \le F(z) + c_1 t \nabla F' d, \qquad
    |\nabla F(z + t d)' d| \le c_2 |\nabla F' d|, \qquad c_1 = 10^{-4},\; c_2 = 0.9,

found by bracketing and a safeguarded cubic-interpolation zoom (Algorithms 3.5 and 3.6);
the change :math:`F(z + t d) - F(z)` is computed directly rather than as a difference of
rounded values (in the spirit of Hager & Zhang 2005), so the search still works where
decreases are far below ``eps |F|``.  Trial steps reuse ``X d``: no pass over the design.
The first step (and a restart) is :math:`-\nabla F / \max(W, \lVert\nabla F\rVert_\infty)`
with ``W`` the total case weight, so the path does not depend on the scale of the
weights.  It stops when the gradient per unit case weight (see
:class:`lintools.engine.Evaluation`) has max-abs at most ``tol``.

References
----------
Liu, D. C. & Nocedal, J. (1989). On the limited memory BFGS method for large scale
optimization. Mathematical Programming 45, 503-528.
Nocedal, J. & Wright, S. J. (2006). Numerical Optimization, 2nd ed. Springer.
Hager, W. W. & Zhang, H. (2005). A new conjugate gradient method with guaranteed descent
and an efficient line search. SIAM J. Optimization 16, 170-192.
"""

from __future__ import annotations

import math
from collections import deque
from typing import Any, Callable

import numpy as np

from .base import (
    EPS,
    Evaluation,
    IterationRecord,
    SingularMatrixError,
    SolverResult,
    finish,
    report_step,
    stalled_message,
    stop_before_step,
)

__all__ = ["lbfgs", "wolfe_search"]

C1, C2 = 1e-4, 0.9
MAX_EVALUATIONS = 40
#: Iterations in a row with neither a decrease beyond rounding nor a new smallest gradient.
PATIENCE = 20


def _cubic_min(a, fa, ga, b, fb, gb):
    """Minimiser of the cubic through (a, fa, ga) and (b, fb, gb), or None."""
    d1 = ga + gb - 3.0 * (fa - fb) / (a - b)
    disc = d1 * d1 - ga * gb
    if disc < 0 or not math.isfinite(disc):
        return None
    d2 = math.copysign(math.sqrt(disc), b - a)
    denom = gb - ga + 2.0 * d2
    if denom == 0:
        return None
    return b - (b - a) * (gb + d2 - d1) / denom


def wolfe_search(line: Any, g0: float, t: float = 1.0) -> tuple[float, float, bool]:
    """Return ``(t, F(z + t d) - F(z), ok)`` with ``t`` meeting the strong Wolfe conditions.

    ``g0 < 0`` is the slope at ``t = 0``; ``line.change_and_slope(t)`` gives the change of
    the objective and its slope at ``t``.
    """
    f0 = 0.0

    def decrease_ok(tt, ft):
        return ft <= f0 + C1 * tt * g0

    def zoom(lo, flo, glo, hi, fhi, ghi, evals):
        while evals < MAX_EVALUATIONS:
            width = hi - lo
            tj = _cubic_min(lo, flo, glo, hi, fhi, ghi) if math.isfinite(fhi) else None
            lo_b, hi_b = sorted((lo + 0.1 * width, hi - 0.1 * width))
            if tj is None or not (lo_b <= tj <= hi_b):
                tj = 0.5 * (lo + hi)
            fj, gj = line.change_and_slope(tj)
            evals += 1
            if not decrease_ok(tj, fj) or fj > flo:
                hi, fhi, ghi = tj, fj, gj
            else:
                if abs(gj) <= -C2 * g0:
                    return tj, fj, True
                if gj * (hi - lo) >= 0:
                    hi, fhi, ghi = lo, flo, glo
                lo, flo, glo = tj, fj, gj
            if abs(hi - lo) <= EPS * max(abs(lo), abs(hi)):
                break
        ok = lo > 0 and decrease_ok(lo, flo)
        return lo, flo, ok

    t_prev, f_prev, g_prev = 0.0, f0, g0
    for i in range(MAX_EVALUATIONS):
        ft, gt = line.change_and_slope(t)
        if not math.isfinite(ft):
            return zoom(t_prev, f_prev, g_prev, t, math.inf, math.inf, i + 1)
        if not decrease_ok(t, ft) or (i > 0 and ft > f_prev):
            return zoom(t_prev, f_prev, g_prev, t, ft, gt, i + 1)
        if abs(gt) <= -C2 * g0:
            return t, ft, True
        if gt >= 0:
            return zoom(t, ft, gt, t_prev, f_prev, g_prev, i + 1)
        t_prev, f_prev, g_prev = t, ft, gt
        t *= 2.0
    return t_prev, f_prev, t_prev > 0


def _two_loop(g: np.ndarray, S: deque, Y: deque) -> np.ndarray:
    q = g.copy()
    alphas = []
    for s, y in reversed(list(zip(S, Y))):
        rho = 1.0 / float(y @ s)
        a = rho * float(s @ q)
        q -= a * y
        alphas.append((rho, a))
    if S:
        s, y = S[-1], Y[-1]
        q *= float(s @ y) / float(y @ y)
    for (s, y), (rho, a) in zip(zip(S, Y), reversed(alphas)):
        b = rho * float(y @ q)
        q += (a - b) * s
    return -q


def lbfgs(
    problem: Any,
    *,
    tol: float,
    max_iter: int,
    on_iteration: Callable[[IterationRecord], Any] | None = None,
    monitor: Callable[[np.ndarray, Evaluation], str | None] | None = None,
    start: np.ndarray | None = None,
    memory: int = 10,
) -> SolverResult:
    """Minimise ``problem`` by L-BFGS; see the module docstring."""
    name = "lbfgs"
    z = problem.start() if start is None else np.array(start, dtype=float)
    ev = problem.evaluate(z)
    S: deque = deque(maxlen=memory)
    Y: deque = deque(maxlen=memory)
    it = stall = 0
    best = ev.gradient_norm

    def done(status, message):
        return finish(name, z, ev, it, status, message, problem)

    # a first (or restarted) steepest-descent step of -g / W (the Hessian per unit case
    # weight is O(1) in the standardised coordinates), or of unit length when that is
    # longer: the same path whatever the scale of the weights
    total = float(problem.weight_total)

    def first_step(g: np.ndarray) -> float:
        return 1.0 / max(total, float(np.max(np.abs(g))))

    while True:
        gnorm = ev.gradient_norm
        stop = stop_before_step(name, it, gnorm, tol, max_iter)
        if stop:
            return done(*stop)
        g = ev.gradient
        if S:
            d, t0 = _two_loop(g, S, Y), 1.0
        else:
            d, t0 = -g, first_step(g)
        slope = float(g @ d)
        if not slope < 0:  # memory gone bad: restart with steepest descent
            S.clear(), Y.clear()
            d, slope, t0 = -g, -float(g @ g), first_step(g)
        t, ft, ok = wolfe_search(problem.line(z, d), slope, t0)
        if not ok and S:
            S.clear(), Y.clear()
            d, slope = -g, -float(g @ g)
            t, ft, ok = wolfe_search(problem.line(z, d), slope, first_step(g))
        if not ok:
            return done("stalled", stalled_message(name, it, gnorm, tol))
        z_new = z + t * d
        try:
            ev_new = problem.evaluate(z_new)
        except SingularMatrixError as exc:
            return done("singular", f"{name}: {exc}")
        s, y = z_new - z, ev_new.gradient - g
        if float(s @ y) > 1e-12 * float(np.linalg.norm(s) * np.linalg.norm(y)):
            S.append(s), Y.append(y)
        it += 1
        decreased = ft < 0 or ev_new.gradient_norm < best
        best = min(best, ev_new.gradient_norm)
        stall = 0 if decreased else stall + 1
        z_old, z, ev = z, z_new, ev_new
        why = report_step(problem, it, z_old, z, ev, tol, on_iteration, monitor)
        if why:
            return done("diverging", f"{name}: {why}")
        if stall >= PATIENCE and ev.gradient_norm > tol:
            return done("stalled", stalled_message(name, it, ev.gradient_norm, tol))
