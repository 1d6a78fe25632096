"""Least squares with case weights, ridge, and full inference.

Objective (``w`` case weights, ``l2 >= 0``; the intercept ``b`` is never penalised)::

    minimise  1/2 * sum_i w_i (y_i - b - x_i' beta)^2  +  l2/2 * |beta|^2

Units.  Before any arithmetic y, the weights and every column are divided by powers of
two (exact) so that their largest entries lie in ``[1, 2)``, and the answer is mapped
back exactly at the end (:mod:`lintools.models.lsq_scale`).  Multiplying y, the weights or a
column by a constant therefore changes the answer only as the mathematics says; a figure
whose true value lies beyond the largest float64 number is refused with an
:class:`InputError` that names it and the input whose scale drives it.

Two paths compute the fit; a test of conditioning chooses between them.  Problems with
at most ``_gram.SMALL_PROBLEM`` entries always take the accurate path.

Fast path: the Gram matrix (:mod:`lintools.models.lsq_gram`).  One blocked pass over the rows
accumulates the Gram matrix of the shifted, weighted columns and the residual of a
starting value fitted on a subsample.  The pass uses symmetric rank-k updates and never
copies X whole.  Then come a Cholesky factorisation, the condition number of the scaled
design, and a corrected step: the corrected semi-normal equations (Bjorck 1987).  A
second blocked pass evaluates the residual of the answer in float64.  Its correction
certifies the answer, and the pass also gives the RSS, the gradient and, only on
request, the sandwich "meat" and the leverages.  The path is taken only when the scaled
condition number is at most ``_gram.KAPPA_MAX`` and the worst-case contraction of the
refinement is small; the certificate must also be met.  Otherwise the fit takes the
accurate path below.

Accurate path: QR (:mod:`lintools.models.lsq_qr`).  With an intercept the columns are centred
at their weighted means in two parts (the rounded mean, then the mean of what it left),
which removes the intercept from the factorisation to the last bit of each column's
spread, so a column far from zero (a time stamp) loses nothing; rows are multiplied by
``sqrt(w_i)``, and every column is scaled to unit length.  The ridge term enters as
``p`` extra rows ``sqrt(l2) / s_j`` (augmentation), so the penalised problem is an
ordinary least-squares problem.  Householder QR (LAPACK ``dgeqrf`` through
``numpy.linalg.qr``) of that matrix gives the solution; then one step of iterative
refinement recomputes the residual in extended precision (``numpy.longdouble``, 80-bit
on x86-64 Linux; plain float64 where the platform has nothing wider) and solves for a
correction with the same factors.  The refinement works on the augmented system
``[I M; M' 0][r; theta] = [c; 0]`` in centred coordinates (Bjorck 1967), so it also
recovers digits when the residual is large, which plain refinement of the solution
(Golub & Wilkinson 1966) does not; at most ``MAX_REFINE`` steps are taken.  The RSS, the
sandwich covariances, Cook's distance and the gradient use those centred residuals.

Rank.  Column ``j`` is aliased when the part of its scaled, centred column orthogonal
to the columns before it has length at most ``tol = max(n, p) * eps`` (unit column
length after scaling), and a column that is constant on the rows with positive weight,
or whose centred length is at most ``16 eps`` of its raw length (it varies only by
rounding: :data:`lintools.support.linalg.CONSTANT_TOLERANCE`), is aliased with the intercept.
The earliest columns of a dependent set are kept.  A constant or aliased column always
sends the fit to the QR path, which names it.  With ``rank_deficient="minimum_norm"`` the
coefficients that are not identified (their unit vector is not orthogonal to the null
space of the design) get NaN standard errors; the covariance is that of the
minimum-norm estimator, valid for estimable combinations.

References
----------
Golub, G. H. & Wilkinson, J. H. (1966). Note on the iterative refinement of least
squares solution. Numerische Mathematik 9, 139-148.
Bjorck, A. (1967). Iterative refinement of linear least squares solutions I. BIT 7,
257-278.
Bjorck, A. (1987). Stability analysis of the method of seminormal equations for linear
least squares problems. Linear Algebra and its Applications 88/89, 31-48.
Bjorck, A. (1996). Numerical Methods for Least Squares Problems. SIAM.
White, H. (1980). A heteroskedasticity-consistent covariance matrix estimator and a
direct test for heteroskedasticity. Econometrica 48, 817-838.
MacKinnon, J. G. & White, H. (1985). Some heteroskedasticity-consistent covariance
matrix estimators with improved finite sample properties. J. Econometrics 29, 305-325.
Cook, R. D. (1977). Detection of influential observation in linear regression.
Technometrics 19, 15-18.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np

from . import lsq_gram as _gram
from ..support.errors import InputError
from .accuracy import Precision, checked_precision
from .lsq_accuracy import least_squares_accuracy
from .lsq_qr import qr_path
from .lsq_record import PathAnswer, Setting, linear_record, residual_degrees
from .lsq_scale import Units, to_caller
from .records import LinearFit, with_accuracy
from .responses import target_name
from ..support.threads import whole_blas, with_row_threads
from ..support.validate import (
    as_matrix,
    check_finite,
    as_vector,
    as_weights,
    check_choice,
    check_flag,
    check_names,
    check_nonnegative,
)
from ..support.linalg import CONSTANT_TOLERANCE

__all__ = ["least_squares"]

COVARIANCE_TYPES = ("classical", "HC0", "HC1", "HC2", "HC3")


@with_row_threads
def least_squares(
    X: Any,
    y: Any,
    *,
    weights: Any = None,
    intercept: bool = True,
    l2: float = 0.0,
    covariance: str = "classical",
    names: Sequence[str] | None = None,
    weight_type: str = "case",
    rank_deficient: str = "raise",
    diagnostics: bool = False,
    data_precision: Precision | None = None,
) -> LinearFit:
    r"""Fit a linear model by weighted (and optionally ridge-penalised) least squares.

    .. math::

        \min_{b,\beta}\; \tfrac12 \sum_i w_i (y_i - b - x_i^\top\beta)^2
        + \tfrac{\lambda}{2}\lVert\beta\rVert_2^2 ,\qquad \lambda = \texttt{l2}.

    Parameters
    ----------
    X : array-like, shape (n, p)
        Design without the intercept column. DataFrame-like column labels become names.
    y : array-like, shape (n,)
        Response.
    weights : array-like, shape (n,), optional
        Non-negative weights with a positive total (default: all 1).
    intercept : bool
        Fit an unpenalised intercept (default True).
    l2 : float
        Ridge strength ``lambda >= 0`` on the slopes.
    covariance : {"classical", "HC0", "HC1", "HC2", "HC3"}
        ``"classical"``: ``s^2 (X'WX + lambda I)^{-1}``.  ``"HC0"``..``"HC3"``: the White
        (1980) and MacKinnon & White (1985) sandwich estimators.
    names : sequence of str, optional
        Coefficient names (default: DataFrame column labels, else ``x1..xp``).
    weight_type : {"case", "precision"}
        ``"case"`` (default): weights count observations; a row of weight 2 is the same as
        two copies of the row, the number of observations is ``sum(w)``, and every
        statistic equals that of the expanded data (so ``w -> c w`` multiplies the
        observations by ``c``: the covariance scales by about ``1/c``, and the fit is refused
        when ``c sum(w)`` is not more than the parameters).  ``"precision"``: weights are
        inverse variances, ``Var(y_i) = sigma^2 / w_i`` (analytic weights); observations
        are the rows with ``w > 0``; ``w -> c w`` changes only the unit of ``sigma^2``
        (residual standard error times ``sqrt(c)``, deviance times ``c``; coefficients,
        standard errors, covariance and log-likelihood unchanged).  The coefficients are
        the same either way; degrees of freedom, standard errors and the log-likelihood
        differ.
    rank_deficient : {"raise", "minimum_norm"}
        A rank-deficient design raises :class:`InputError` naming the aliased columns
        (default), or returns the minimum-norm solution (smallest ``|beta|`` in the
        caller's units) with ``rank < p`` recorded and NaN standard errors for the
        coefficients that are not identified.
    diagnostics : bool
        Also compute leverage (hat values) and Cook's distance per row.
    data_precision : Precision, optional
        The rounding of the data the record's ``accuracy.data_digits`` is stated at
        (default: float64 input, relative rounding ``u = 2**-53`` of every entry): for data
        read from a file, ``table.data_precision()`` of
        ``read_table(..., written_decimals=True)`` (half a unit of each column's least
        precise written decimal); or ``Precision.written([...])``. The rounding of y counts too (``y_absolute``).

    Returns
    -------
    LinearFit

    Notes
    -----
    The fit is computed by the Gram matrix (Cholesky, corrected semi-normal equations)
    when X has more than ``2**16`` entries, the scaled condition number is at most
    ``1e3`` and the refinement is certified to reach the rounding floor; otherwise by
    Householder QR with refinement in extended precision.  ``convergence.message`` and
    ``convergence.solver`` ("cholesky" or "qr") say which; ``condition_number`` is
    reported either way.

    Scale: y, the weights and each column are divided by powers of two before any
    arithmetic and the answer mapped back exactly, so ``y -> c y`` scales coefficients,
    standard errors and the residual standard error by ``c`` and variances by ``c^2``, and
    ``x_j -> c x_j`` gives the reparametrised fit; a reported figure beyond the float64
    range (for example the covariance of ``y * 1e300``) raises :class:`InputError` naming
    it and the input to rescale, and one below it rounds as float64 rounds (gradual
    underflow).  Shifted columns are centred in two parts: ``x_j -> x_j + 1e12`` changes
    the slopes, standard errors (every covariance type), leverage and Cook's distance in
    no more than the last few bits.

    Residual degrees of freedom are ``N - k`` with ``N`` the number of observations
    and ``k`` the number of estimated mean parameters (rank, plus the intercept).  The
    log-likelihood is the Gaussian one at the maximum-likelihood variance ``RSS/N``
    (plus ``1/2 sum log w_i`` for precision weights); AIC and BIC count ``k + 1``
    parameters (the variance included).  Under a ridge penalty the covariance is the
    inverse penalised information (a Bayesian reading) and the intervals are approximate.
    """
    return _fit(
        X, y, weights=weights, intercept=intercept, l2=l2, covariance=covariance, names=names,
        weight_type=weight_type, rank_deficient=rank_deficient, diagnostics=diagnostics,
        data_precision=data_precision,
    )


def _fit(
    X, y, *, weights=None, intercept=True, l2=0.0, covariance="classical", names=None,
    weight_type="case", rank_deficient="raise", diagnostics=False, method="auto", block_rows=None,
    data_precision=None,
):
    """:func:`least_squares` with two switches for tests.

    ``method``: "auto" (the documented choice), "qr" (skip the fast path) or "gram" (try
    the fast path whatever the size; its conditioning test and certificate still decide).
    ``block_rows``: rows per block on the fast path.
    """
    # finiteness of X is left to the Gram pass (a NaN or inf makes its sums non-finite and
    # sends the fit to the QR path), so large fits read X once less; QR checks it first
    Xa, found = as_matrix(X, "X", check_finite=False)
    n, p = Xa.shape
    ya = as_vector(y, "y", n)
    w = None if weights is None else as_weights(weights, n)
    lam = check_nonnegative(l2, "l2")
    check_choice(covariance, "covariance", COVARIANCE_TYPES)
    check_choice(weight_type, "weight_type", ("case", "precision"))
    check_choice(rank_deficient, "rank_deficient", ("raise", "minimum_norm"))
    check_choice(diagnostics, "diagnostics", (True, False))
    setting = Setting(check_flag(intercept, "intercept"), lam, covariance, weight_type, diagnostics, w)
    names_t = check_names(names, p, found)
    target = target_name(y)
    precision = checked_precision(data_precision, p)

    pos = None if w is None else w > 0
    n_pos = n if pos is None else int(pos.sum())
    k_max = p + int(setting.intercept)
    yp = ya if pos is None else ya[pos]
    refuse_degenerate(n_pos, k_max, lam, setting.intercept, bool(np.ptp(yp) == 0), yp[0], not np.any(yp))
    del yp

    # units: y and the weights divided by powers of two (exact); the columns get theirs on
    # the path that solves (see lintools.models.lsq_scale)
    y1, ey = Units.response(ya)
    w1, ew = Units.weights(w)
    W1, n_obs, lam_w = _totals(n, w, w1, ew, setting, n_pos)

    def residual_df(rank: int) -> float:
        return residual_degrees(n_obs, rank + int(setting.intercept), weight_type, n_pos)

    use_gram = method == "gram" or (method == "auto" and n * p > _gram.SMALL_PROBLEM)
    fit = _solve(Xa, found, y1, w1, n_pos, lam_w, setting, names_t, rank_deficient, residual_df,
                 use_gram and n_obs - k_max > 0, block_rows)
    units = Units(ey, ew, fit.col_exp, names_t, target)
    record = linear_record(fit, units, setting, W1, n_obs, residual_df(fit.rank))
    # after the record (which refuses figures beyond float64): the accuracy of a fit that stands
    return with_accuracy(record, least_squares_accuracy(Xa, y1, w1, fit, units, setting.intercept, W1,
                                                          precision))


def _totals(n: int, w, w1, ew: int, setting: Setting, n_pos: int) -> tuple[float, float, float]:
    """The total unit weight, the number of observations and the ridge per unit weight;
    an InputError when the observations or the ridge leave the float64 range."""
    W1 = float(n) if w1 is None else float(w1.sum())
    n_obs = float(to_caller(W1, ew)) if setting.case else float(n_pos)
    if not math.isfinite(n_obs):
        raise InputError(
            f"the case weights add up to more than the largest float64 number (their largest is "
            f"{float(np.max(w)):.3g}); case weights count observations: divide them by a constant, "
            "or pass weight_type='precision' for relative weights"
        )
    lam = setting.l2
    lam_w = float(to_caller(lam, -ew))
    if not math.isfinite(lam_w):
        raise InputError(
            f"l2 = {lam:g} is beyond the float64 range against weights as small as these (largest "
            f"{float(np.max(w)):.3g}); the penalty would set every slope to 0: lower l2 or rescale the weights"
        )
    return W1, n_obs, lam_w


def _solve(Xa, found, y1, w1, n_pos, lam_w, setting, names_t, rank_deficient, residual_df, try_gram,
           block_rows) -> PathAnswer:
    """The answer of the fast path when it is tried and certifies it, else of the QR path."""
    sol = None
    if try_gram:
        # a NaN, an inf or an overflow shows as non-finite sums: the path then declines
        # (returns None) and the QR path names the entry, so its arithmetic warnings are noise
        with np.errstate(invalid="ignore", over="ignore", divide="ignore", under="ignore"):
            sol = _gram.solve_by_gram(
                Xa, y1, w1, n_pos, lam_w, setting.intercept, CONSTANT_TOLERANCE,
                covariance=setting.covariance, weight_type=setting.weight_type, diagnostics=setting.diagnostics,
                block_rows=block_rows, case_weights=setting.weights,
            )
    if sol is not None:
        return _from_gram(sol)
    n = Xa.shape[0]
    w = setting.weights
    check_finite(Xa, "X", found)
    with whole_blas():  # one LAPACK factorisation: the BLAS's own threads split it
        return qr_path(
            Xa, y1, np.ones(n) if w1 is None else w1, np.ones(n) if w is None else w, lam_w,
            setting.intercept, names_t, rank_deficient, setting.covariance, setting.weight_type, residual_df,
        )


def refuse_degenerate(n_pos: int, k_max: int, lam: float, intercept: bool, y_constant: bool, y_first: float,
                      y_zero: bool) -> None:
    """Refuse fewer rows of positive weight than parameters (without a ridge), a constant
    response with an intercept, and a response that is zero everywhere without one.

    ``y_constant``, ``y_zero``: whether the response is constant, or zero, on the rows of
    positive weight; ``y_first``: its value on the first of them."""
    if lam == 0 and n_pos < k_max:
        raise InputError(
            f"X has {n_pos} rows with positive weight but the model has {k_max} parameters; "
            "add rows, drop columns, or set l2 > 0"
        )
    if intercept and y_constant:
        raise InputError(
            f"y is constant (every row with positive weight equals {y_first:g}); there is "
            "nothing to explain: check the target column"
        )
    if not intercept and y_zero:
        raise InputError("y is zero on every row with positive weight; check the target column")


def _from_gram(sol) -> PathAnswer:
    """The fast path's answer in the form the record builder uses."""
    err = f"{sol.error_estimate:.1e}"
    steps = "one corrected step" if sol.steps == 1 else f"{sol.steps} corrected steps"
    message = (
        f"solved directly: Cholesky of the Gram matrix (semi-normal equations) with {steps} "
        f"from a subsample start, residuals in float64; estimated relative error {err}"
    )
    return PathAnswer(
        beta=sol.beta, b0=sol.intercept, rank=sol.beta.shape[0], s=sol.scale, xbar=sol.mean, G=sol.cov_scaled,
        cond=sol.condition, rss=sol.rss, tss=sol.tss, grad=sol.gradient, lam1=sol.lam_vec, col_exp=sol.col_exp,
        iterations=sol.steps, solver="cholesky", message=message, e=sol.residuals, hat=sol.hat,
        meat_z=sol.meat_z, leverage_one_row=sol.leverage_one_row, w1=sol.w1, correction=sol.last_correction,
    )
