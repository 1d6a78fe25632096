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

import numbers
from typing import Any, Callable, Sequence

import numpy as np

from ..support.errors import InputError, LintoolsWarning, warn_caller
from .accuracy import Precision, checked_precision
from .glm_accuracy import binary_accuracy
from .records import Convergence, LogisticFit
from .responses import binary_response, target_name
from ..support.scaling import check_firth_scale, check_l2_scale, scaled_back, scaled_case_weights
from ..support.threads import ELEMENT_CHUNK, for_rows, with_row_threads
from ..support.validate import as_matrix, as_offset, as_weights, check_flag, check_names
from .inference import covariance, likelihood_fields, null_objective, profile_bounds
from .driver import (
    DEFAULT_TOL,
    Measured,
    Solved,
    Watch,
    check_fit_settings,
    check_parameters_and_rows,
    checked_problem,
    constant_columns,
    likelihood_summary,
    lr_statistic,
    rank_message,
    solve_family,
    unless_scipy_missing,
)
from ..engine.losses import BinomialLoss
from ..engine import IterationRecord, LinearModelProblem
from ..engine.newton import newton

__all__ = ["BinaryWatch", "logistic", "logistic_record"]

REMEDIES = (
    "Remedies: firth=True (Firth's bias-reduced estimates, finite under separation) or "
    "l2 > 0 (a ridge penalty on the slopes)"
)


class BinaryWatch(Watch):
    """Divergence monitor of the binary family: rows whose linear predictor runs off on
    the side of their outcome."""

    RUNAWAY = "{count} row(s) have a linear predictor beyond +-{limit:g} (up to {top:.3g}) on the side of their outcome"

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


def _exact_check(Xa, loss, intercept, names):
    """Run the linear programme; return the diagnosis, or None when SciPy is missing."""
    from .separation import separation_from_arrays

    return unless_scipy_missing(separation_from_arrays, Xa, loss.y, loss.trials, loss.weights, intercept, names)


class BinaryFamily:
    """The binary (grouped binomial) logistic family for :func:`lintools.models.driver.solve_family`."""

    remedies = REMEDIES
    separated = "(quasi-)completely separated"
    singular_runaway = False

    def __init__(self, Xa: np.ndarray, loss: BinomialLoss, offset: np.ndarray | None, names: tuple[str, ...],
                 intercept: bool, lam: float, firth: bool) -> None:
        self.Xa, self.loss, self.offset, self.names = Xa, loss, offset, names
        self.intercept, self.lam, self.firth = intercept, lam, firth
        self.size = Xa.size
        self.watch = BinaryWatch(loss, offset) if (lam == 0 and not firth) else None

    def terms(self) -> tuple[str, ...]:
        return (("(intercept)",) if self.intercept else ()) + tuple(self.names)

    def exact_check(self) -> Any:
        return _exact_check(self.Xa, self.loss, self.intercept, self.names)

    def rank_message(self) -> str | None:
        return rank_message(self.Xa, self.loss.row_weights(), self.intercept, self.names) if self.lam == 0 else None

    def covariance(self, problem: LinearModelProblem, target: Any, z: np.ndarray) -> np.ndarray:
        return covariance(problem, z, [f"'{t}'" for t in self.terms()])

    def newton_move(self, problem: LinearModelProblem, ev: Any, V: np.ndarray) -> float:
        d = -(V @ ev.original_gradient) * problem.weight_scale  # the Newton step (scaled gradient)
        db = d[0] if self.intercept else 0.0
        return float(np.max(np.abs(self.Xa @ d[int(self.intercept):] + db)))


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
    data_precision: Precision | None = None,
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
    data_precision : Precision, optional
        The rounding of the data the record's ``accuracy.data_digits`` is stated at
        (default: float64 input, relative rounding ``u = 2**-53`` of every entry): for data
        read from a file, ``table.data_precision()`` of
        ``read_table(..., written_decimals=True)`` (half a unit of each column's least
        precise written decimal); or ``Precision.written([...])``. The labels are exact (``y_*`` are not used).

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
    precision = checked_precision(data_precision, p)
    w = as_weights(weights, n)
    offset_values = None if offset is None else as_offset(offset, n)
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
    # unit weights and trials stay implicit: the loss then forms no products with ones
    loss = BinomialLoss(yy, m if trials is not None else None, w if weights is not None else None)
    problem = checked_problem(Xa, found, names_t, loss, intercept=intercept, l2=lam, offset=offset_values, firth=firth,
                              weight_scale=scale)
    if intercept and p and lam == 0:
        constant_columns(Xa, v > 0, names_t, problem.spread, problem.c)
    family = BinaryFamily(Xa, loss, offset_values, names_t, intercept, lam, firth)
    solved = solve_family(family, problem, solver=solver, tol=tol, max_iter=max_iter, on_iteration=on_iteration)
    return _record(family, problem, solved, (tuple(classes), positive_class, target_name(y)), tol, max_iter,
                   float(profile_level) if profile else None, precision)


def _null_model(family: BinaryFamily, problem: LinearModelProblem, tol: float, max_iter: int) -> tuple[float, float]:
    """The null model's objective (Firth: penalised) and deviance, in the caller's weights."""
    loss, scale = family.loss, problem.weight_scale
    f0, eta0 = null_objective(loss, problem.n, family.offset, family.intercept, family.firth, tol, max_iter, scale)
    return f0, scaled_back(loss.deviance(eta0), scale, "null deviance")


def _profile(family: BinaryFamily, problem: LinearModelProblem, z: np.ndarray, se: np.ndarray, level: float,
             tol: float, max_iter: int) -> np.ndarray:
    """Profile-likelihood interval ends; an end not found is NaN, with a warning naming it."""
    bounds = profile_bounds(problem, z, se, level, tol, max_iter)
    if np.isnan(bounds).any():
        terms = family.terms()
        lost = [terms[j] for j in range(len(terms)) if np.isnan(bounds[j]).any()]
        warn_caller(
            f"profile interval: an end for {', '.join(repr(t) for t in lost)} was not found (a fit with the "
            "coefficient held fixed did not converge); it is NaN in profile_intervals: use the Wald interval "
            "for it, or refit with a larger max_iter", LintoolsWarning)
    return bounds


def _record(family: BinaryFamily, problem: LinearModelProblem, solved: Solved, labels: tuple[tuple, Any, Any],
            tol: float, max_iter: int, level: float | None, precision: Precision | None = None) -> LogisticFit:
    """The :class:`LogisticFit` of a solved binary family; ``labels`` holds the classes, the
    positive class and the target's name; ``level`` the profile level (None: no profile)."""
    loss, V = family.loss, solved.covariance
    se = np.sqrt(np.clip(np.diag(V), 0.0, None))
    loglik, dev, n_obs = likelihood_summary(problem, loss, solved.evaluation, "sum of weights times trials")
    objective = solved.evaluation.value * problem.weight_scale
    f0, null_dev = _null_model(family, problem, tol, max_iter)
    if family.firth:
        lr = 2.0 * (f0 - objective)
    else:
        lr = null_dev - dev if family.lam == 0 else float("nan")
    bounds = _profile(family, problem, solved.z, se, level, tol, max_iter) if level is not None else None
    classes, positive_class, target = labels
    accuracy = binary_accuracy(problem, family.Xa, loss, family.offset, solved.z, solved.evaluation.gradient, V,
                               family.terms(), precision)
    return logistic_record(  # the accuracy as a field: one record built, not two
        problem, solved.z, V, solved.convergence, Measured(loglik, dev, n_obs, null_dev, lr),
        names=family.names, l2=family.lam, classes=classes, positive_class=positive_class,
        penalised_log_likelihood=loss.log_binomial_total() * problem.weight_scale - objective,
        firth=bool(family.firth), profile_intervals=bounds, profile_level=level if level is not None else float("nan"),
        grouped=bool(loss.grouped), has_offset=family.offset is not None, target=target, accuracy=accuracy,
    )


def logistic_record(problem: Any, z: np.ndarray, V: np.ndarray, convergence: Convergence, measured: Measured,
                    **fields: Any) -> LogisticFit:
    """The :class:`LogisticFit` of a solved binary problem, in memory or over blocks.

    ``problem`` gives the coordinate map ``to_original``, ``intercept`` and ``p``; ``V``
    is the covariance in the caller's coordinates (intercept first); ``fields`` are the
    record's own fields (``names``, ``l2``, ``classes``, ``positive_class``,
    ``penalised_log_likelihood``, ``firth``, ``grouped``, ``has_offset``, ``target``, the
    profile intervals)."""
    intercept = problem.intercept
    theta = problem.to_original(z)
    se = np.sqrt(np.clip(np.diag(V), 0.0, None))
    loglik, n_obs = measured.log_likelihood, measured.n_observations
    return LogisticFit(
        coefficients=theta[int(intercept):].copy(),
        intercept=float(theta[0]) if intercept else 0.0,
        standard_errors=se[int(intercept):],
        intercept_standard_error=float(se[0]) if intercept else None,
        covariance=V,
        log_likelihood=loglik,
        deviance=measured.deviance,
        n_observations=n_obs,
        convergence=convergence,
        with_intercept=bool(intercept),
        null_deviance=measured.null_deviance,
        **likelihood_fields(loglik, theta.size, n_obs, lr_statistic(measured.lr), problem.p),
        **fields,
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
