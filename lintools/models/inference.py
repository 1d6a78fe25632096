r"""Inference for likelihood fits: covariance, null model, likelihood-ratio test, profiles.

* **Covariance**: the inverse of the (penalised) information at the estimate,
  :math:`V = (X_1' W X_1 + \lambda D)^{-1}` with :math:`X_1 = [1, X]` and ``D`` the
  identity on the slopes (0 for the intercept).  For the logit link the observed and
  expected information agree.  Under ``l2 > 0`` this is the Bayesian (posterior) reading
  of the ridge and the Wald intervals are approximate.  Firth fits use the Fisher
  information at the Firth estimate (Heinze & Schemper 2002).
* **Null model**: intercept only (with the same offset and case weights); without an
  intercept, ``eta = offset`` with no parameters.  Firth fits compare with the Firth
  intercept-only fit.
* **Likelihood-ratio test**: :math:`2\,[\ell(\hat\theta) - \ell(\hat\theta_0)]` on ``p``
  degrees of freedom against :math:`\chi^2_p` (penalised log-likelihoods for Firth).
* **Profile-likelihood intervals** (Venzon & Moolgavkar 1988; Heinze & Schemper 2002 for
  the penalised version): the set of values :math:`v` of parameter ``j`` with
  :math:`2\,[\max\ell - \max_{\theta_j = v}\ell] \le \chi^2_{1,\text{level}}`.  Each end
  is found by a bracketing secant search on the signed root
  :math:`\operatorname{sign}(v - \hat\theta_j)\sqrt{2\,\Delta\ell(v)}`, which is nearly
  linear in :math:`v`; every evaluation is a Newton fit of the other parameters with
  :math:`\theta_j` held at :math:`v`.

References
----------
Venzon, D. J. & Moolgavkar, S. H. (1988). A method for computing profile-likelihood-based
confidence intervals. Applied Statistics 37, 87-94.
Heinze, G. & Schemper, M. (2002). A solution to the problem of separation in logistic
regression. Statistics in Medicine 21, 2409-2419.
Wilks, S. S. (1938). The large-sample distribution of the likelihood ratio for testing
composite hypotheses. Annals of Mathematical Statistics 9, 60-62.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np

from ..support import distributions as dist
from ..support.scaling import caller_covariance
from ..engine import LinearModelProblem, RestrictedProblem, SingularMatrixError, inverse_spd
from ..engine.newton import newton

__all__ = ["covariance", "null_objective", "likelihood_ratio", "likelihood_fields", "profile_bounds"]

#: Profile searches stop when the signed root is within this of its target.
PROFILE_TOLERANCE = 1e-9
MAX_PROFILE_STEPS = 80


def covariance(problem: LinearModelProblem, z: np.ndarray, terms: Sequence[str]) -> np.ndarray:
    """Inverse penalised information in the caller's coordinates and weights (intercept first).

    The problem's information is that of its scaled weights (``problem.weight_scale``);
    the caller's covariance is its inverse divided by that scale
    (:func:`lintools.support.scaling.caller_covariance`, which refuses a variance float64 cannot
    hold, naming ``terms[j]``).  Raises :class:`lintools.engine.SingularMatrixError`
    when the information is singular.
    """
    spreads = np.concatenate([np.full(problem.first_slope, np.nan), problem.s]) if problem.K == 1 else None
    return caller_covariance(problem.theta_from_z_matrix(), inverse_spd(problem.fisher_information(z)),
                             problem.weight_scale, terms, spreads)


def null_objective(loss: Any, n: int, offset: np.ndarray | None, intercept: bool, firth: bool,
                   tol: float, max_iter: int, weight_scale: float = 1.0) -> tuple[float, np.ndarray]:
    """Minimised objective of the null model (in the caller's weights: the loss holds the
    weights divided by ``weight_scale``) and its linear predictor."""
    if not intercept:
        eta = np.zeros(n) if offset is None else offset
        return loss.value(eta) * weight_scale, eta
    if offset is None and not firth and loss.closed_null:
        fitted = loss.constant_fit(n, tol)
        if fitted is not None:
            return fitted[0] * weight_scale, fitted[1]
    P = LinearModelProblem(np.zeros((n, 0)), loss, intercept=True, offset=offset, firth=firth,
                           weight_scale=weight_scale)
    res = newton(P, tol=tol, max_iter=max(max_iter, 50))
    return res.objective, P.eta(res.z)


def likelihood_ratio(statistic: float, df: int) -> float:
    """Upper chi-square tail of the likelihood-ratio statistic."""
    if df <= 0 or not math.isfinite(statistic):
        return float("nan")
    return float(dist.chi2_sf(max(statistic, 0.0), df))


def likelihood_fields(log_likelihood: float, parameters: int, n_observations: float, lr: float,
                      lr_df: int) -> dict[str, float]:
    """AIC, BIC and the likelihood-ratio fields shared by the classifier records.

    ``AIC = -2 l + 2 k`` and ``BIC = -2 l + k log n`` with ``k`` free parameters; the
    p-value is NaN when the statistic is (under a penalty)."""
    return {
        "aic": -2.0 * log_likelihood + 2.0 * parameters,
        "bic": -2.0 * log_likelihood + math.log(n_observations) * parameters,
        "lr_statistic": lr,
        "lr_p_value": likelihood_ratio(lr, lr_df) if math.isfinite(lr) else float("nan"),
        "lr_degrees_of_freedom": int(lr_df),
    }


def profile_bounds(
    problem: LinearModelProblem,
    z_hat: np.ndarray,
    standard_errors: np.ndarray,
    level: float,
    tol: float,
    max_iter: int,
) -> np.ndarray:
    """Profile-likelihood interval ends for every parameter (caller's coordinates).

    ``z_hat`` is the optimum (the problem's coordinates).  The rise of the objective from
    it to each profile point is computed directly along the line between them (the
    problem's ``line(...).change``), not as a difference of two objective values, so the
    ends are found however large the objective is against that rise (case weights of
    1e77 make the objective about 1e79 and the rise at an end about 2).  Returns a (k, 2)
    array; an end that the profile never reaches is infinite, one whose inner fits failed
    is NaN.
    """
    theta = problem.to_original(z_hat)
    target = math.sqrt(float(dist.chi2_quantile(level, 1)))
    out = np.full((theta.size, 2), np.nan)
    for j in range(theta.size):
        for k, side in enumerate((-1.0, 1.0)):
            out[j, k] = _one_end(problem, z_hat, theta, j, side, target, standard_errors[j], tol, max_iter)
    return out


def _one_end(problem, z_hat, theta, j, side, target, se, tol, max_iter):
    warm = {"u": np.delete(theta, j)}

    def h(delta):
        v = theta[j] + side * delta
        R = RestrictedProblem(problem, {j: v})
        try:
            res = newton(R, tol=tol, max_iter=max_iter, start=warm["u"])
        except SingularMatrixError:
            return math.nan
        if res.status not in ("converged", "stalled"):
            return math.nan
        warm["u"] = res.z
        rise = problem.line(z_hat, R.embed(res.z) - z_hat).change(1.0) * problem.weight_scale
        return math.sqrt(max(2.0 * rise, 0.0)) - target

    scale = se if math.isfinite(se) and se > 0 else 1.0 + abs(theta[j])
    lo, h_lo = 0.0, -target
    hi = target * scale
    h_hi = h(hi)
    steps = 0
    while math.isfinite(h_hi) and h_hi < 0:  # expand until the profile passes the target
        steps += 1
        if steps > MAX_PROFILE_STEPS or hi > 1e8 * (scale + abs(theta[j])):
            return side * math.inf
        # secant extrapolation through (lo, h_lo), (hi, h_hi), at least doubling
        slope = (h_hi - h_lo) / (hi - lo)
        guess = hi - h_hi / slope if slope > 0 else 2.0 * hi
        lo, h_lo = hi, h_hi
        hi = max(guess * 1.1, 2.0 * hi) if guess > hi else 2.0 * hi
        h_hi = h(hi)
    if not math.isfinite(h_hi):
        return math.nan
    side_kept = 0
    for _ in range(MAX_PROFILE_STEPS):  # Illinois (modified regula falsi) on [lo, hi]
        mid = hi - h_hi * (hi - lo) / (h_hi - h_lo)
        if not lo < mid < hi:
            mid = 0.5 * (lo + hi)
        h_mid = h(mid)
        if not math.isfinite(h_mid):
            return math.nan
        if abs(h_mid) <= PROFILE_TOLERANCE or (hi - lo) <= 1e-13 * (abs(theta[j]) + hi):
            return theta[j] + side * mid
        if h_mid > 0:
            hi, h_hi = mid, h_mid
            if side_kept == -1:
                h_lo *= 0.5
            side_kept = -1
        else:
            lo, h_lo = mid, h_mid
            if side_kept == 1:
                h_hi *= 0.5
            side_kept = 1
    return theta[j] + side * 0.5 * (lo + hi)
