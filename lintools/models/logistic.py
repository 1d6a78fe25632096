r"""Binary and grouped-binomial logistic regression: validate, solve, package the record.

Objective (``w`` case weights, ``m`` trials, ``l2 >= 0``; the intercept is never penalised)

.. math::

    \min_{b,\beta}\; -\sum_i w_i\,\ell_i(b + x_i'\beta + o_i) + \tfrac{\lambda}{2}\lVert\beta\rVert^2,
    \qquad \ell_i(\eta) = y_i \log\mu + (m_i - y_i)\log(1-\mu),\ \mu = 1/(1+e^{-\eta}),

or, with ``firth=True`` (Firth 1993), the bias-reduced estimate that maximises
:math:`\ell(\theta) + \tfrac12\log\det I(\theta)` (no ridge).  The fit never returns the
huge coefficients of a separated data set: signs of divergence trigger the exact check
of :mod:`lintools.models.separation`, and separation raises :class:`lintools.SeparationError`.

References
----------
Albert, A. & Anderson, J. A. (1984). On the existence of maximum likelihood estimates in
logistic regression models. Biometrika 71, 1-10.
Firth, D. (1993). Bias reduction of maximum likelihood estimates. Biometrika 80, 27-38.
Heinze, G. & Schemper, M. (2002). A solution to the problem of separation in logistic
regression. Statistics in Medicine 21, 2409-2419.
McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed. Chapman & Hall.
"""

from __future__ import annotations

import math
import numbers
from typing import Any, Callable, Sequence

import numpy as np

from ..support.errors import (
    InputError,
    IterationLimitWarning,
    LintoolsError,
    LintoolsWarning,
    SeparationError,
    warn_caller,
)
from .records import Convergence, LogisticFit
from .responses import binary_response, target_name
from ..support.scaling import (
    check_firth_scale,
    check_l2_scale,
    check_solver,
    scaled_back,
    scaled_case_weights,
    wide_column_error,
)
from ..support.threads import ELEMENT_CHUNK, for_rows, with_row_threads
from ..support.validate import (
    as_matrix,
    as_offset,
    as_weights,
    check_finite,
    check_flag,
    check_names,
    check_nonnegative,
    check_positive_int,
)
from .inference import covariance, likelihood_fields, null_objective, profile_bounds
from ..support.linalg import default_rank_tolerance, dependency_sentence
from ..engine.losses import BinomialLoss
from ..engine import (
    SOLVERS,
    Evaluation,
    ExtremeSpread,
    IterationRecord,
    LinearModelProblem,
    NonFiniteDesign,
    SingularMatrixError,
    SolverResult,
    solve,
)
from ..engine.base import MEASURED, converged_message, limit_message
from ..engine.newton import newton

__all__ = ["logistic"]

#: The default stopping tolerance of every likelihood fit: the max-abs gradient per unit
#: case weight with respect to the intercept and the standardised, centred columns
#: (see :mod:`lintools.engine`).
DEFAULT_TOL = 1e-13

#: |linear predictor| beyond which a row on the side of its outcome is a sign of divergence.
ETA_LIMIT = 30.0
#: At the answer, rows beyond this |eta| plus a large remaining Newton move call for the check.
ETA_SUSPECT = 15.0
#: Remaining Newton move of the linear predictor that, with such rows, signals divergence.
MOVE_SUSPECT = 0.1
#: Designs up to this many entries get the exact check whenever a fit ends unfinished.
SMALL_PROBLEM = 10**6

REMEDIES = (
    "Remedies: firth=True (Firth's bias-reduced estimates, finite under separation) or "
    "l2 > 0 (a ridge penalty on the slopes)"
)


def _check_tol(tol: Any) -> float:
    if isinstance(tol, bool) or not isinstance(tol, numbers.Real) or not math.isfinite(float(tol)) or tol <= 0:
        raise InputError(f"tol must be a finite number > 0 (the {MEASURED} at which to stop); got {tol!r}")
    return float(tol)


def check_parameters_and_rows(k: int, rows: int) -> None:
    """Without a penalty the design needs at least as many rows as parameters."""
    if k > rows:
        raise InputError(
            f"X has {k} columns with the intercept but only {rows} rows with positive weight; the "
            "unpenalised estimate is not unique: add rows, drop columns, or set l2 > 0"
        )


def check_fit_settings(intercept: Any, l2: Any, tol: Any, max_iter: Any, on_iteration: Any,
                       solver: Any = "newton") -> tuple[bool, float, float, int]:
    """The settings every likelihood fit shares, checked: ``(intercept, l2, tol, max_iter)``.

    ``solver`` must name one of the solvers (None, or anything else, is an InputError
    naming the choices; the block fits pass their only one, "newton")."""
    intercept = check_flag(intercept, "intercept")
    lam = check_nonnegative(l2, "l2")
    check_solver(solver, SOLVERS)
    tol = _check_tol(tol)
    max_iter = check_positive_int(max_iter, "max_iter")
    if on_iteration is not None and not callable(on_iteration):
        raise InputError(f"on_iteration must be a callable taking one record; got {type(on_iteration).__name__}")
    return intercept, lam, tol, max_iter


def _constant_columns(Xa: np.ndarray, use: np.ndarray, names: tuple[str, ...],
                      spread: np.ndarray | None = None, centre: np.ndarray | None = None) -> None:
    """Raise on a column that is constant on the rows used.

    With the problem's weighted ``spread`` and ``centre`` of each column only the columns
    whose spread could be the rounding noise of a constant column (at most
    ``max(1e-6, 8 n eps)`` times the centre: the error of a weighted mean is below
    ``n eps`` of it) are checked exactly, so the usual case costs no pass over X.
    """
    if spread is not None and centre is not None:
        bound = max(1e-6, 8.0 * Xa.shape[0] * float(np.finfo(float).eps)) * np.abs(centre)
        cols = np.flatnonzero(~(np.isfinite(spread) & (spread > bound)))
        if not cols.size:
            return
    else:
        cols = np.arange(Xa.shape[1])
    rows = Xa[:, cols] if use.all() else Xa[np.ix_(use, cols)]
    const = cols[np.max(rows, axis=0) == np.min(rows, axis=0)]
    if const.size:
        j = int(const[0])
        raise InputError(
            f"X column {j} ('{names[j]}') is constant on the rows used; it is aliased with the "
            "intercept: drop it, or pass intercept=False"
        )


def _rank_message(Xa: np.ndarray, v: np.ndarray, intercept: bool, names: tuple[str, ...]) -> str | None:
    """A sentence naming linearly dependent columns on the rows used, or None (full rank)."""
    use = v > 0
    sw = np.sqrt(v[use])
    Xp = Xa[use]
    c = (v[use] @ Xp) / v[use].sum() if intercept else np.zeros(Xa.shape[1])
    A = (Xp - c) * sw[:, None]
    norms = np.linalg.norm(A, axis=0)
    A /= np.where(norms > 0, norms, 1.0)
    R = np.linalg.qr(A, mode="r")
    return dependency_sentence(R, norms, names, intercept, default_rank_tolerance(*A.shape))


class _Watch:
    """Divergence monitor: rows whose linear predictor runs off on the side of their outcome.

    Subclasses (the softmax fit's) change ``runaway`` and ``RUNAWAY``, the sentence."""

    RUNAWAY = "{count} row(s) have a linear predictor beyond +-{limit:g} (up to {top:.3g}) on the side of their outcome"

    def __init__(self, loss: Any, offset: np.ndarray | None) -> None:
        self.loss, self.offset = loss, offset
        self.live = loss.row_weights() > 0

    def runaway(self, eta: np.ndarray, limit: float) -> tuple[int, float]:
        y, m, offset, live = self.loss.y, self.loss.trials, self.offset, self.live

        def part(lo: int, hi: int) -> tuple[int, float]:
            lin = eta[lo:hi] if offset is None else eta[lo:hi] - offset[lo:hi]
            if hi == lo or (lin.max() <= limit and lin.min() >= -limit):
                return 0, 0.0  # no row beyond the limit on either side (the usual case)
            yb = y[lo:hi]
            hit = live[lo:hi] & (((lin > limit) & (yb == m[lo:hi])) | ((lin < -limit) & (yb == 0)))
            return int(hit.sum()), float(np.max(np.abs(lin[hit]))) if hit.any() else 0.0

        parts = for_rows(part, eta.shape[0], ELEMENT_CHUNK)
        return sum(c for c, _ in parts), max((t for _, t in parts), default=0.0)

    def __call__(self, z: np.ndarray, ev: Evaluation) -> str | None:
        count, top = self.runaway(ev.eta, ETA_LIMIT)
        return self.RUNAWAY.format(count=count, limit=ETA_LIMIT, top=top) if count else None


def _exact_check(Xa, loss, intercept, names):
    """Run the linear programme; return the diagnosis, or None when SciPy is missing."""
    from .separation import separation_from_arrays

    try:
        return separation_from_arrays(Xa, loss.y, loss.trials, loss.weights, intercept, names)
    except LintoolsError as exc:
        if "SciPy" in str(exc):
            return None
        raise


def _raise_separation(diag) -> None:
    raise SeparationError(f"{diag.describe()}. {REMEDIES}.", diagnosis=diag)


@with_row_threads
def logistic(
    X: Any,
    y: Any,
    *,
    weights: Any = None,
    offset: Any = None,
    trials: Any = None,
    intercept: bool = True,
    l2: float = 0.0,
    firth: bool = False,
    solver: str = "newton",
    tol: float = DEFAULT_TOL,
    max_iter: int = 100,
    names: Sequence[str] | None = None,
    on_iteration: Callable[[IterationRecord], Any] | None = None,
    positive: Any = None,
    profile: bool = False,
    profile_level: float = 0.95,
) -> LogisticFit:
    r"""Fit a logistic regression by (penalised) maximum likelihood, or Firth's method.

    .. math::

        \min_{b,\beta}\; -\sum_i w_i\,[\,y_i\log\mu_i + (m_i - y_i)\log(1-\mu_i)\,]
        + \tfrac{\lambda}{2}\lVert\beta\rVert_2^2,\qquad
        \mu_i = \frac{1}{1 + e^{-(b + x_i'\beta + o_i)}},\quad \lambda = \texttt{l2}.

    With ``firth=True`` the objective is :math:`-\ell(\theta) - \tfrac12\log\det I(\theta)`
    (Firth 1993; Heinze & Schemper 2002), whose minimiser is finite even under separation.

    Parameters
    ----------
    X : array-like (n, p)
        Design without the intercept column; DataFrame-like column labels become names.
    y : array-like (n,)
        Two labels of any one type (bool, 0/1, numbers, strings); or, with ``trials``,
        success counts (whole numbers ``0 <= y <= trials``).
    weights : array-like (n,), optional
        Case weights ``w >= 0``: a row of weight 2 counts as two identical rows.
    offset : array-like (n,), optional
        Known part ``o`` of the linear predictor.
    trials : array-like (n,), optional
        Trials per row (whole numbers from 0 to 2**53): grouped binomial data.
    intercept : bool
        Fit an unpenalised intercept (default True).
    l2 : float
        Ridge strength on the slopes (``l2 = 1/C`` maps scikit-learn's ``C``).
    firth : bool
        Firth's bias-reduced estimates; cannot be combined with ``l2 > 0`` (they are two
        different remedies; choose one).
    solver : {"newton", "lbfgs", "gradient"}
        Newton / IRLS with step halving (default), L-BFGS with a strong-Wolfe line
        search, or accelerated gradient with backtracking and restarts.  All stop on the
        same rule; first-order solvers usually need a larger ``max_iter``.
    tol : float
        Stop when the max-abs gradient of the objective **per unit of total case weight**
        (``sum w m``), with respect to the intercept and the coefficients of the
        standardised, centred columns ``(x_j - c_j) / s_j`` (weighted mean and standard
        deviation), is <= tol.  Multiplying the weights, multiplying a column or adding a
        constant to a column does not change this quantity, so none of them decides
        whether the fit stops, and it does not grow with the number of rows.  Promise: to
        first order every standardised coefficient is within ``||Hbar^{-1}||_inf * tol`` of
        the exact optimum (``Hbar`` the information per unit weight in those coordinates;
        a caller's slope within that divided by ``s_j``).  With ``firth=True`` the divisor
        is ``W + k/2`` (``k`` parameters): Firth's penalty does not scale with the weights
        and weighs like ``k/2`` observations.  Default 1e-13: about three
        orders above the float64 rounding level of this quantity (which does not grow
        with the number of rows), and as tight as the earlier rule (1e-10 on the sums)
        was on a thousand rows; Newton usually ends far below it.
    max_iter : int
        Iteration limit; a fit that reaches it is marked ``converged=False`` and an
        :class:`lintools.IterationLimitWarning` is issued.
    names : sequence of str, optional
        Coefficient names (default: DataFrame column labels, else x1..xp).
    on_iteration : callable, optional
        Called with an :class:`lintools.engine.IterationRecord` after each iteration.
    positive : label, optional
        The class whose probability is modelled (default: the larger label).
    profile : bool
        Also compute profile-likelihood intervals (penalised profile for Firth) at
        ``profile_level``; stored in ``profile_intervals``.
    profile_level : float
        Coverage of the profile intervals (default 0.95).

    Returns
    -------
    LogisticFit

    Raises
    ------
    InputError
        Bad input (the message names the argument, the row or column, and the remedy),
        including a rank-deficient design when ``l2 == 0``.
    SeparationError
        The classes are (quasi-)completely separated, so the unpenalised estimate does not
        exist; the error carries the diagnosis of :func:`lintools.check_separation`.

    Notes
    -----
    ``log_likelihood`` is the full binomial log-likelihood, including
    :math:`\sum_i w_i \log\binom{m_i}{y_i}` for grouped data (zero for binary data), as
    statsmodels' GLM reports it; ``deviance`` is twice the distance to the saturated
    model, so it does not depend on that constant.  ``n_observations = sum(w * m)``.
    AIC and BIC count ``p + intercept`` parameters and use the log-likelihood.  Under
    ``l2 > 0`` the covariance is the inverse penalised information, and the
    likelihood-ratio fields are NaN.  Separation is checked only when the iterations show
    signs of divergence (rows whose linear predictor passes +-30 on the side of their
    outcome, or a fit that ends with such rows beyond +-15 while a further Newton step
    would still move them, or a fit that ends unfinished with such rows or a design of at
    most a million entries); the check needs SciPy, and without it the divergence itself
    is reported in the :class:`SeparationError`.
    """
    Xa, found = as_matrix(X, "X", check_finite=False)  # checked by the problem's first pass
    n, p = Xa.shape
    names_t = check_names(names, p, found)
    w = as_weights(weights, n)
    off = None if offset is None else as_offset(offset, n)
    yy, m, classes, positive_class = binary_response(y, trials, positive, n)
    intercept, lam, tol, max_iter = check_fit_settings(intercept, l2, tol, max_iter, on_iteration, solver)
    firth = check_flag(firth, "firth")
    profile = check_flag(profile, "profile")
    if not (isinstance(profile_level, numbers.Real) and 0.0 < float(profile_level) < 1.0):
        raise InputError(f"profile_level must lie strictly between 0 and 1; got {profile_level!r}")
    if firth and lam > 0:
        raise InputError(
            "firth=True together with l2 > 0: both are remedies for separation and combining "
            "them defines neither estimate; pass one of them (firth=True with l2=0, or l2 > 0)"
        )
    # the weights divided by the largest one (see lintools.support.scaling): outputs are scaled back
    w, scale = scaled_case_weights(w)
    check_l2_scale(lam, scale)
    if firth:
        check_firth_scale(scale)
    v = w * m
    total, successes = float(v.sum()), float(w @ yy)
    if total <= 0:
        raise InputError("trials (times weights) are zero on every row; there is nothing to fit")
    if successes <= 0 or successes >= total:
        which = "no successes" if successes <= 0 else "no failures"
        raise InputError(f"y has {which} on the rows with positive weight; a logistic model needs both outcomes")
    if lam == 0:
        check_parameters_and_rows(p + int(intercept), int(np.count_nonzero(v > 0)))
    loss = BinomialLoss(yy, m if trials is not None else None, w)
    problem = checked_problem(Xa, found, names_t, loss, intercept=intercept, l2=lam, offset=off, jeffreys=firth,
                              weight_scale=scale)
    if intercept and p and lam == 0:
        _constant_columns(Xa, v > 0, names_t, problem.spread, problem.c)
    watch = _Watch(loss, off) if (lam == 0 and not firth) else None
    try:
        res, checked = run_with_check(problem, solver, tol, max_iter, on_iteration, watch,
                                      lambda: _exact_check(Xa, loss, intercept, names_t))
    except SingularMatrixError as exc:
        _diagnose_singular(Xa, loss, intercept, names_t, lam, firth, watch, False, f"the information matrix is singular ({exc})")

    if res.status == "singular":
        _diagnose_singular(Xa, loss, intercept, names_t, lam, firth, watch, checked, res.message)
    z = res.z
    try:
        V = covariance(problem, z, [f"'{t}'" for t in (("(intercept)",) if intercept else ()) + names_t])
    except SingularMatrixError:
        _diagnose_singular(Xa, loss, intercept, names_t, lam, firth, watch, checked,
                           "the information matrix is singular at the answer")
    ev = final_evaluation(problem, res)
    if watch is not None and not checked:
        _final_check(res, ev, V, problem, watch, Xa, loss, intercept, names_t)
    return _package(problem, loss, res, ev, V, z, Xa, off, names_t, classes, positive_class, lam, firth,
                    trials is not None, intercept, solver, tol, max_iter, profile, float(profile_level), y)


def checked_problem(Xa: np.ndarray, found: Any, names: tuple[str, ...], loss: Any,
                    **settings: Any) -> LinearModelProblem:
    """The fit's problem; its first pass over ``Xa`` (the column moments) doubles as the
    finiteness check of the design, and a NaN or infinity is then named by row and column.
    A column whose spread float64 cannot standardise is refused naming it (``names``)."""
    try:
        return LinearModelProblem(Xa, loss, **settings)
    except NonFiniteDesign:
        check_finite(Xa, "X", found)
        raise
    except ExtremeSpread as exc:
        term = f"'{names[exc.column]}'"
        if exc.top is not None:
            raise wide_column_error(exc.column, names[exc.column], exc.top) from None
        if exc.log10_variance is None:
            raise InputError(
                f"X column {exc.column} ({term}) has a weighted spread of {exc.spread:.3g}, so small that the ridge "
                f"on its standardised coefficient (l2 / spread^2) exceeds 1.8e308: rescale that column by a power "
                "of ten so that its spread is nearer 1 (its coefficient then scales by the inverse factor; the "
                "same l2 then penalises it in the new units), or fit without l2"
            ) from None
        raise InputError(
            f"the variance of the coefficient of {term} would be at least 1e{exc.log10_variance:.0f}, above "
            f"1.8e308, which float64 cannot hold (its column's weighted spread is {exc.spread:.3g}): rescale that "
            "column by a power of ten so that its spread is nearer 1 (its coefficient and standard error then "
            "scale by the inverse factor)"
        ) from None


def final_evaluation(problem: Any, res: SolverResult) -> Evaluation:
    """The solver's (fresh) evaluation at its answer, or a new one."""
    ev = res.evaluation
    if ev is not None and ev.fresh and ev.eta is problem.eta(res.z):
        return ev
    return problem.evaluate(res.z, fresh=True)


def run_with_check(problem, solver, tol, max_iter, on_iteration, watch, check, start=None, on_separated=None):
    """Solve; on a divergence alarm run ``check()`` (the exact separation check, which
    returns a diagnosis or None without SciPy), raise if separated, else go on.

    ``on_separated(diagnosis)`` raises the error (default: the binary model's).
    Returns the solver result and whether the exact check ran."""
    res = solve(problem, solver, tol=tol, max_iter=max_iter, on_iteration=on_iteration, monitor=watch,
                start=start)
    if res.status != "diverging":
        return res, False
    diag = check()
    if diag is not None and diag.separated:
        (on_separated or _raise_separation)(diag)
    done = res.iterations

    def shifted(record):
        on_iteration(IterationRecord(record.iteration + done, record.objective, record.gradient_norm, record.step))

    more = solve(problem, solver, tol=tol, max_iter=max(max_iter - done, 0),
                 on_iteration=shifted if on_iteration is not None else None, start=res.z)
    total = more.iterations + done
    if more.status == "converged":
        message = converged_message(more.solver, total, more.gradient_norm, tol)
    elif more.status == "iteration_limit":
        message = limit_message(more.solver, total, more.gradient_norm, tol)
    else:
        message = more.message
    merged = SolverResult(z=more.z, converged=more.converged, iterations=total, objective=more.objective,
                          gradient_norm=more.gradient_norm, status=more.status, message=message,
                          solver=more.solver, evaluation=more.evaluation)
    return merged, diag is not None


def _diagnose_singular(Xa, loss, intercept, names, lam, firth, watch, checked, why):
    msg = _rank_message(Xa, loss.row_weights(), intercept, names) if lam == 0 else None
    if msg:
        raise InputError(msg)
    if watch is not None and not checked:
        diag = _exact_check(Xa, loss, intercept, names)
        if diag is not None and diag.separated:
            _raise_separation(diag)
    raise LintoolsError(
        f"{why}: the design is full rank but too ill-conditioned for the fitted weights; "
        "rescale or drop nearly collinear columns, or set l2 > 0"
    )


def _final_check(res, ev, V, problem, watch, Xa, loss, intercept, names):
    """At the answer: a remaining Newton move on runaway rows means divergence."""
    count, top = watch.runaway(ev.eta, ETA_SUSPECT)
    # an unfinished fit is checked when rows ran away or when the programme is cheap
    suspicious = res.status in ("iteration_limit", "stalled") and (count > 0 or Xa.size <= SMALL_PROBLEM)
    move = 0.0
    if count:
        d = -(V @ ev.original_gradient) * problem.weight_scale  # the Newton step (scaled gradient)
        db = d[0] if intercept else 0.0
        move = float(np.max(np.abs(Xa @ d[int(intercept):] + db)))
        suspicious = suspicious or move > MOVE_SUSPECT
    if not suspicious:
        return
    diag = _exact_check(Xa, loss, intercept, names)
    if diag is not None:
        if diag.separated:
            _raise_separation(diag)
        return
    if count and move > MOVE_SUSPECT:
        raise SeparationError(
            f"the fit diverges: after {res.iterations} iteration(s) {count} row(s) have a linear "
            f"predictor beyond +-{ETA_SUSPECT:g} (up to {top:.3g}) on the side of their outcome and "
            f"a further Newton step would move it by {move:.3g}: the classes appear "
            "(quasi-)completely separated, so the maximum-likelihood estimate does not exist "
            "(Albert & Anderson 1984). The exact check needs SciPy (scipy.optimize.linprog), "
            f"which is not installed. {REMEDIES}."
        )


def convergence_record(res: SolverResult, ev: Evaluation, problem: Any, z: np.ndarray, solver: str,
                       note: str = "") -> Convergence:
    """The fit's :class:`Convergence`; warns (our own classes) when the fit did not converge.

    A stalled fit's message names an attainable tol when the problem can estimate the
    rounding level of its gradient; ``note`` is appended to the message."""
    message = res.message
    rounding = getattr(problem, "gradient_rounding", None)
    if res.status == "stalled" and rounding is not None:
        level = rounding(z)
        if math.isfinite(level):
            message += (f" (worst-case rounding level of this gradient {level:.1e}: "
                        f"tol = {10 * level:.0e} is attainable)")
    message += note
    conv = Convergence(
        converged=bool(res.converged), iterations=int(res.iterations), gradient_norm=ev.gradient_norm,
        objective=scaled_back(ev.value, problem.weight_scale, "objective"), solver=solver, message=message,
    )
    if res.status == "iteration_limit":
        warn_caller(message, IterationLimitWarning)
    elif not res.converged:
        warn_caller(message, LintoolsWarning)
    return conv


def _package(problem, loss, res, ev, V, z, Xa, off, names, classes, positive_class, lam, firth,
             grouped, intercept, solver, tol, max_iter, profile, level, y):
    n, p = Xa.shape
    theta = problem.to_original(z)
    k = theta.size
    b = float(theta[0]) if intercept else 0.0
    beta = theta[int(intercept):].copy()
    se = np.sqrt(np.clip(np.diag(V), 0.0, None))
    eta = ev.eta
    scale = problem.weight_scale  # the loss holds the caller's weights / scale (lintools.support.scaling)
    loglik = scaled_back(loss.log_likelihood(eta), scale, "log-likelihood")
    dev = scaled_back(loss.deviance(eta), scale, "deviance")
    n_obs = scaled_back(float(loss.row_weights().sum()), scale, "number of observations (sum of weights times trials)")
    objective = ev.value * scale
    f0, eta0 = null_objective(loss, n, off, intercept, firth, tol, max_iter, scale)
    null_dev = scaled_back(loss.deviance(eta0), scale, "null deviance")
    lr_df = p
    if firth:
        lr = 2.0 * (f0 - objective)
    elif lam == 0:
        lr = null_dev - dev
    else:
        lr = float("nan")
    lr = max(lr, 0.0) if math.isfinite(lr) else lr
    conv = convergence_record(res, ev, problem, z, solver)
    bounds = profile_bounds(problem, z, se, level, tol, max_iter) if profile else None
    if bounds is not None and np.isnan(bounds).any():
        terms = (("(intercept)",) if intercept else ()) + tuple(names)
        lost = [terms[j] for j in range(len(terms)) if np.isnan(bounds[j]).any()]
        warn_caller(
            f"profile interval: an end for {', '.join(repr(t) for t in lost)} was not found (a fit with the "
            "coefficient held fixed did not converge); it is NaN in profile_intervals: use the Wald interval "
            "for it, or refit with a larger max_iter", LintoolsWarning)
    return LogisticFit(
        coefficients=beta,
        intercept=b if intercept else 0.0,
        standard_errors=se[int(intercept):],
        intercept_standard_error=float(se[0]) if intercept else None,
        covariance=V,
        log_likelihood=loglik,
        deviance=dev,
        n_observations=n_obs,
        names=names,
        convergence=conv,
        with_intercept=bool(intercept),
        l2=lam,
        classes=tuple(classes),
        positive_class=positive_class,
        null_deviance=null_dev,
        **likelihood_fields(loglik, k, n_obs, lr, lr_df),
        firth=bool(firth),
        penalised_log_likelihood=loss.log_binomial_total() * scale - objective,
        profile_intervals=bounds,
        profile_level=level if profile else float("nan"),
        grouped=bool(grouped),
        has_offset=off is not None,
        target=target_name(y),
    )


def score_and_information(fit: LogisticFit, X: Any, y: Any, weights: Any, coef: Any, b: Any,
                          free_intercept: bool) -> tuple[np.ndarray, np.ndarray]:
    """Score of the penalised log-likelihood and the information at ``(b, coef)``.

    Order: intercept first when the fit has one.  With ``free_intercept`` the intercept
    is first set to its maximum-likelihood value given ``coef``.  The plain (not Firth)
    likelihood is used.  ``y`` holds the fit's two labels, one per row.
    """
    if fit.grouped:
        raise InputError("the score test needs one outcome per row; this fit used grouped data (trials=)")
    Xa = fit._design(X)
    n = Xa.shape[0]
    yy, _, classes, _ = binary_response(y, None, fit.positive_class, n)
    if tuple(classes) != tuple(fit.classes):
        raise InputError(f"y has the labels {classes} but the fit was made on {fit.classes}; pass the same labels")
    w, scale = scaled_case_weights(as_weights(weights, n))
    loss = BinomialLoss(yy, None, w)
    coef = np.asarray(coef, dtype=float)
    eta = Xa @ coef
    if fit.with_intercept:
        if free_intercept:
            P = LinearModelProblem(np.zeros((n, 0)), loss, intercept=True, offset=eta)
            b = float(P.to_original(newton(P, tol=DEFAULT_TOL, max_iter=100).z)[0])
        eta = eta + float(b)
        A = np.column_stack([np.ones(n), Xa])
        theta = np.concatenate([[float(b)], coef])
    else:
        A, theta = Xa, coef
    r, W = loss.gradient(eta), loss.curvature(eta)
    pen = np.full(theta.size, fit.l2)
    if fit.with_intercept:
        pen[0] = 0.0
    U = -((A.T @ r) * scale + pen * theta)  # the loss holds the weights / scale
    info = (A.T @ (A * W[:, None])) * scale + np.diag(pen)
    return U, info
