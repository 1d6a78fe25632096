"""Temperature scaling of logits (Guo et al. 2017): a one-dimensional Newton fit of
log T.  Re-exported by :mod:`lintools.metrics.recalibration`.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..support.errors import InputError, IterationLimitWarning, LintoolsWarning, SeparationError, warn_caller
from ..support.logistic_function import sigmoid
from ..support.outcomes import binary_outcome, case_weights, class_codes, vector_in
from ..support.scaling import case_weight_scale, scaled_back
from ..support.validate import as_float, check_finite, as_vector, check_positive_int

__all__ = ["TemperatureMap", "temperature_scaling"]


def _softmax(z: np.ndarray) -> np.ndarray:
    e = np.exp(z - z.max(axis=1, keepdims=True))
    return e / e.sum(axis=1, keepdims=True)


@dataclass(frozen=True)
class TemperatureMap:
    """Temperature scaling: ``apply(Z) = softmax(Z / temperature)``.

    Attributes
    ----------
    temperature : float
    classes : int
        Columns of the logit matrix (2 for 1-D binary logits).
    binary : bool
        True when fitted on 1-D logits; ``apply`` then takes and returns 1-D arrays
        (``sigmoid(z / temperature)``).
    log_likelihood : float
        Weighted log-likelihood at the fitted temperature.
    iterations : int
    converged : bool
        True when ``|gradient| <= tol``.
    gradient : float
        Derivative of the mean negative log-likelihood (per unit of total case weight)
        with respect to log T at the answer: the stopping rule's quantity.
    """

    temperature: float
    classes: int
    binary: bool
    log_likelihood: float
    iterations: int
    converged: bool
    gradient: float

    def apply(self, logits: Any) -> np.ndarray:
        """Return recalibrated probabilities for new logits of the same layout as the fit's."""
        if self.binary:
            z, scalar = vector_in(logits, "logits")
            out = sigmoid(z / self.temperature)
            return float(out[0]) if scalar else out
        Z = _logit_matrix(logits)
        if Z.shape[1] != self.classes:
            raise InputError(
                f"logits has {Z.shape[1]} columns but the map was fitted on {self.classes}; "
                "pass one column per class in the same order"
            )
        return _softmax(Z / self.temperature)


def _logit_matrix(logits: Any) -> np.ndarray:
    Z = as_float(logits, "logits")
    if Z.ndim != 2 or Z.size == 0:
        raise InputError(f"logits must be a non-empty (n, K) matrix (or 1-D binary logits); got shape {Z.shape}")
    check_finite(Z, "logits")
    return Z


def _nll_parts(beta: float, Z: np.ndarray, zy: np.ndarray, w: np.ndarray, total: float):
    """Mean NLL at inverse temperature ``beta`` and its first two derivatives in beta."""
    S = beta * Z
    m = S.max(axis=1, keepdims=True)
    e = np.exp(S - m)
    den = e.sum(axis=1)
    lse = m[:, 0] + np.log(den)
    prob = e / den[:, None]
    mean_z = (prob * Z).sum(axis=1)
    var_z = np.maximum((prob * (Z - mean_z[:, None]) ** 2).sum(axis=1), 0.0)
    f = float(w @ (lse - beta * zy)) / total
    d1 = float(w @ (mean_z - zy)) / total
    d2 = float(w @ var_z) / total
    return f, d1, d2


def _unit_logits(Z: np.ndarray) -> tuple[np.ndarray, int]:
    """``(Z', k)``: the logits divided by ``2**k`` and each row shifted by its largest entry,
    so that the largest magnitude of ``Z'`` lies in [1, 2) (the probabilities at ``T`` on
    ``Z`` are those at ``T / 2**k`` on ``Z'``).  The divisions are exact (``ldexp``), and
    dividing before shifting keeps a row of logits near -1e308 and 1e308 finite."""
    def exponent(top: float) -> int:
        return math.frexp(top)[1] - 1 if top > 0 and math.isfinite(top) else 0

    k0 = exponent(float(np.max(np.abs(Z))) if Z.size else 0.0)
    Z = np.ldexp(Z, -k0)
    Z = Z - Z.max(axis=1, keepdims=True)  # the probabilities do not change; exact near the top
    k1 = exponent(float(-Z.min()) if Z.size else 0.0)
    return np.ldexp(Z, -k1), k0 + k1


def _temperature(u: float, shift: int) -> float:
    """``exp(u) * 2**shift``: the temperature on the caller's logits, refused when float64
    cannot hold it (logits near 1e308 or below 1e-300 and a temperature far from 1 on them)."""
    try:
        t = math.ldexp(math.exp(u), shift)
    except OverflowError:
        t = math.inf
    if not (np.finfo(float).tiny <= t < math.inf):
        raise InputError(
            f"the fitted temperature is about 1e{(u + shift * math.log(2.0)) / math.log(10.0):.0f}, beyond what "
            "float64 holds; multiply (or divide) the logits by a power of ten (the temperature scales with them)"
        )
    return t


def temperature_scaling(
    y: Any, logits: Any, *, weights: Any = None, tol: float = 1e-12, max_iter: int = 100
) -> TemperatureMap:
    r"""Temperature scaling of multiclass logits (Guo et al. 2017).

    Finds the temperature :math:`T > 0` minimising the weighted mean negative
    log-likelihood

    .. math:: L(T) = \frac1W \sum_i w_i\left[\log\sum_k e^{z_{ik}/T} - z_{i y_i}/T\right]

    by Newton's method on :math:`u = \log T` (step halving whenever a step does not
    lower :math:`L`; a gradient step where the curvature in :math:`u` is not positive),
    from :math:`T = 1`.  :math:`L` is convex in :math:`1/T`, so the minimiser is unique
    when it exists: it exists exactly when the average observed logit is above the
    average row mean (:math:`L'` < 0 at :math:`1/T = 0`) and some case's observed class
    does not hold the largest logit.  Stops when :math:`|dL/du| \le` ``tol``: the
    gradient per unit of total case weight with respect to :math:`\log T`, the stopping
    rule of the other fits (:mod:`lintools.engine`) in the one coordinate that does not
    depend on the scale of the logits (multiplying every logit by ``c`` moves
    :math:`\log T` by :math:`\log c`).  The weights are divided by the largest one first,
    each row of logits is shifted by its largest entry (the probabilities do not
    change), and the shifted logits are divided by the power of two that brings their
    largest magnitude into [1, 2) (exactly; the iterations start from :math:`T` equal to
    that power), so neither the scale of the weights, nor a common shift of a row's
    logits, nor the scale of the logits (logits of 1e-300 or 1e300 included) changes the
    answer beyond the factor, the verdict or the iteration count.  A temperature that
    float64 cannot hold is refused.

    ``logits`` is an (n, K) matrix, column k for the k-th class in sorted label order,
    or a 1-D vector of binary logits (log-odds of the positive class, read as the
    matrix ``[0, z]``).

    Parameters
    ----------
    y : array-like
        Labels (K classes for a matrix, two for 1-D logits).
    logits : array-like
        (n, K) logits or 1-D binary logits.
    weights : array-like, optional
        Case weights.
    tol : float
        Stop when the derivative of :math:`L` with respect to :math:`\log T` is at most
        ``tol`` in absolute value; to first order :math:`\log T` is then within
        ``tol / L''(log T)`` of the optimum.
    max_iter : int
        Iteration limit (an ``IterationLimitWarning`` is issued when it is reached).

    Returns
    -------
    TemperatureMap

    Raises
    ------
    SeparationError
        When every case's observed class has the largest logit: the likelihood keeps
        rising as T goes to 0.
    InputError
        When the logits are on average no better than uniform (the optimum is T = inf).

    References
    ----------
    Guo, C., Pleiss, G., Sun, Y. & Weinberger, K. Q. (2017). On calibration of modern
    neural networks. ICML 2017.
    """
    given = tol
    tol = float(tol) if isinstance(tol, numbers.Real) and not isinstance(tol, bool) else -1.0
    if not (tol > 0 and math.isfinite(tol)):
        raise InputError(f"tol must be a positive finite number (e.g. 1e-12); got {given!r}")
    max_iter = check_positive_int(max_iter, "max_iter")
    raw = as_float(logits, "logits")
    binary = raw.ndim == 1
    if binary:
        z = as_vector(raw, "logits")
        o, _ = binary_outcome(y, None, n=z.shape[0])
        Z = np.column_stack([np.zeros_like(z), z])
        codes = o.astype(np.intp)
    else:
        Z = _logit_matrix(raw)
        if Z.shape[1] < 2:
            raise InputError("logits has 1 column; pass one column per class (or 1-D binary logits)")
        codes, _ = class_codes(y, Z.shape[0], Z.shape[1], "logits")
    n = Z.shape[0]
    w = case_weights(weights, n)
    live = w > 0
    scale = case_weight_scale(w)
    Z, codes, w = Z[live], codes[live], w[live] / scale
    Z, shift = _unit_logits(Z)
    total = float(w.sum())
    zy = Z[np.arange(Z.shape[0]), codes]
    if float(w @ (Z.max(axis=1) - zy)) == 0.0:
        raise SeparationError(
            "every case's observed class has the largest logit, so the likelihood keeps "
            "rising as the temperature goes to 0; no finite temperature exists"
        )
    if float(w @ (Z.mean(axis=1) - zy)) >= 0.0:
        raise InputError(
            "logits give the observed classes no more than their row average, so the "
            "likelihood is best at an infinite temperature; check the column order of logits"
        )
    u, converged, stalled, it, step = 0.0, False, False, 0, math.nan
    f, d1, d2 = _nll_parts(1.0, Z, zy, w, total)
    while True:
        beta = math.exp(-u)
        g1 = -beta * d1  # dL/du
        if abs(g1) <= tol:
            converged = True
            break
        if it >= max_iter or stalled:
            break
        it += 1
        g2 = beta * beta * d2 + beta * d1
        newton = g2 > 0
        step = -g1 / g2 if newton else -math.copysign(1.0, g1)
        step = max(-2.0, min(2.0, step))
        noise = 8.0 * np.finfo(float).eps * (abs(f) + 1.0)  # rounding floor of L
        for _ in range(60):
            f_new, d1_new, d2_new = _nll_parts(math.exp(-(u + step)), Z, zy, w, total)
            if f_new <= f + 1e-4 * step * g1 + noise or abs(step) < 1e-15:
                break
            step *= 0.5
        stalled = u + step == u  # a step below the rounding of log T: no further progress
        u += step
        f, d1, d2 = f_new, d1_new, d2_new
    if not converged:
        why = ("log T no longer moves beyond rounding" if stalled else
               f"the iteration limit ({max_iter}) was reached; raise max_iter")
        warn_caller(
            f"temperature_scaling stopped after {it} iterations with |dL/d log T| per unit weight "
            f"{abs(g1):.3g} > tol {tol:.3g}: {why}; NOT converged",
            LintoolsWarning if stalled else IterationLimitWarning,
        )
    return TemperatureMap(
        temperature=_temperature(u, shift),
        classes=Z.shape[1],
        binary=binary,
        log_likelihood=scaled_back(-f * total, scale, "log-likelihood"),
        iterations=it,
        converged=converged,
        gradient=g1,
    )
