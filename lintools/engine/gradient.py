r"""Accelerated gradient (Nesterov / FISTA) with backtracking and adaptive restarts.

From the extrapolated point :math:`y_k` the step is :math:`x_{k+1} = y_k - \nabla F(y_k)/L`,
with :math:`L` doubled until the sufficient-decrease (majorisation) condition
:math:`F(x_{k+1}) - F(y_k) \le -\lVert\nabla F(y_k)\rVert^2 / (2L)` holds (the change is
computed directly, not from rounded values) and shrunk by 0.9 before each new search, so the step can grow
again.  The momentum :math:`y_{k+1} = x_{k+1} + \frac{t_k - 1}{t_{k+1}}(x_{k+1} - x_k)`,
:math:`t_{k+1} = (1 + \sqrt{1 + 4 t_k^2})/2`, is reset (:math:`t = 1`) whenever
:math:`\nabla F(y_k)'(x_{k+1} - x_k) > 0` (the gradient restart scheme of O'Donoghue &
Candes 2015), which restores linear convergence on
strongly convex problems.  :math:`L` starts at the total case weight :math:`W`.  The
returned answer is the last point whose gradient was evaluated; the stopping rule is on
its gradient per unit case weight (see :class:`lintools.engine.Evaluation`).

References
----------
Nesterov, Y. (1983). A method for solving the convex programming problem with convergence
rate O(1/k^2). Soviet Mathematics Doklady 27, 372-376.
Beck, A. & Teboulle, M. (2009). A fast iterative shrinkage-thresholding algorithm for
linear inverse problems. SIAM J. Imaging Sciences 2, 183-202.
O'Donoghue, B. & Candes, E. (2015). Adaptive restart for accelerated gradient schemes.
Foundations of Computational Mathematics 15, 715-732.
"""

from __future__ import annotations

import math
from typing import Any, Callable

import numpy as np

from .base import (
    Evaluation,
    IterationRecord,
    SingularMatrixError,
    SolverResult,
    finish,
    report_step,
    stalled_message,
    stop_before_step,
)

__all__ = ["accelerated_gradient"]

MAX_BACKTRACKS = 100
SHRINK = 0.9
#: Iterations in a row with neither a decrease beyond rounding nor a new smallest gradient.
PATIENCE = 50


def accelerated_gradient(
    problem: Any,
    *,
    tol: float,
    max_iter: int,
    on_iteration: Callable[[IterationRecord], Any] | None = None,
    monitor: Callable[[np.ndarray, Evaluation], str | None] | None = None,
    start: np.ndarray | None = None,
) -> SolverResult:
    """Minimise ``problem`` by restarted accelerated gradient; see the module docstring."""
    name = "gradient"
    x = problem.start() if start is None else np.array(start, dtype=float)
    y, ev = x, problem.evaluate(x)
    # the Lipschitz constant starts at the total case weight W (the Hessian per unit weight
    # is O(1) in standardised coordinates): the path does not depend on the weights' scale
    L, tk = float(problem.weight_total), 1.0
    it = stall = 0
    best_g = ev.gradient_norm

    def done(status, message):
        return finish(name, y, ev, it, status, message, problem)

    while True:
        gnorm = ev.gradient_norm
        stop = stop_before_step(name, it, gnorm, tol, max_iter)
        if stop:
            return done(*stop)
        g = ev.gradient
        gg = float(g @ g)
        line = problem.line(y, -g)
        L *= SHRINK
        for _ in range(MAX_BACKTRACKS):
            change = line.change(1.0 / L)
            if math.isfinite(change) and change <= -0.5 * gg / L:
                break
            L *= 2.0
        else:
            return done("stalled", stalled_message(name, it, gnorm, tol))
        x_new = y - g / L
        if float(g @ (x_new - x)) > 0:
            tk, y_new = 1.0, x_new
        else:
            t_next = 0.5 * (1.0 + math.sqrt(1.0 + 4.0 * tk * tk))
            y_new = x_new + ((tk - 1.0) / t_next) * (x_new - x)
            tk = t_next
        x = x_new
        try:
            ev_new = problem.evaluate(y_new)
        except SingularMatrixError as exc:
            return done("singular", f"{name}: {exc}")
        it += 1
        improved = change < 0 or ev_new.gradient_norm < best_g
        best_g = min(best_g, ev_new.gradient_norm)
        stall = 0 if improved else stall + 1
        y_old, y, ev = y, y_new, ev_new
        why = report_step(problem, it, y_old, y, ev, tol, on_iteration, monitor)
        if why:
            return done("diverging", f"{name}: {why}")
        if stall >= PATIENCE and ev.gradient_norm > tol:
            return done("stalled", stalled_message(name, it, ev.gradient_norm, tol))
