r"""Losses in the linear predictor: value, gradient and curvature as functions of ``eta``.

A loss knows only the linear predictor ``eta`` and the response.  It never sees the
design, the coefficients or the penalty; :mod:`lintools.engine` combines a loss with a
design and a penalty into a problem in a flat parameter vector.

The loss interface (any object with these members can be handed to the solvers)::

    outputs                 number of columns of eta: 1 (eta has shape (n,)) or K (n, K)
    row_weights()           (n,) total case weight of each row (centring, observation count)
    start_intercept(offset) starting intercept(s): the best constant linear predictor
    value(eta)              float, sum over rows of the weighted loss
    value_change(eta, dl)   value(eta + dl) - value(eta), accurate to rounding of the
                            change itself (line searches compare changes, never values)
    gradient(eta)           d value / d eta, the shape of eta
    curvature(eta)          the per-row second derivative: (n,) IRLS weights when
                            outputs == 1, (n, K, K) Hessian blocks otherwise

Firth's penalty (one output only) also needs ``curvature_slope``, ``curvature_second``
(first and second derivatives of the weights in eta) and ``curvature_change``.
    hessian_vector(eta, u)  per-row Hessian times u (the shape of eta)

Binomial loss (binary labels, or ``y`` successes out of ``m`` trials), case weights ``w``:

.. math::

    \ell(\eta) = \sum_i w_i\,[\,y_i \log(1 + e^{-\eta_i}) + (m_i - y_i)\log(1 + e^{\eta_i})\,]
               = -\sum_i w_i\,[\,y_i \log\mu_i + (m_i - y_i)\log(1 - \mu_i)\,],
    \qquad \mu_i = 1/(1 + e^{-\eta_i}).

Every term is evaluated as a sum of non-negative parts with ``numpy.logaddexp``
(``log(1 + e^x) = max(x, 0) + log1p(e^{-|x|})``), so there is no overflow and no
cancellation for any finite ``eta`` (|eta| up to the largest double).  The gradient
``w [(m - y) mu - y (1 - mu)]`` and the weights ``w m mu (1 - mu)`` use ``mu`` and
``1 - mu`` each computed directly from ``exp(-|eta|)``, never as ``1 - mu``.

References
----------
McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed., ch. 4.
Chapman & Hall.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..support.logistic_function import halves as _halves, sigmoid
from ..support.errors import InputError
from ..support.threads import ELEMENT_CHUNK, add_up, for_rows
from ..support.scaling import case_weight_scale
from ..support.validate import as_labels, as_matrix, as_weights

__all__ = ["BinomialLoss", "log1pexp", "sigmoid", "unpenalised_gradient"]


def log1pexp(x: np.ndarray) -> np.ndarray:
    r"""Return :math:`\log(1 + e^x)` without overflow or cancellation for any finite x."""
    return np.logaddexp(0.0, x)


def _softplus_changes(eta: np.ndarray, delta: np.ndarray, mu: np.ndarray, nu: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per entry ``log1pexp(eta + delta) - log1pexp(eta)`` and the same at ``-eta, -delta``
    (``mu``, ``nu``: the logistic function at ``eta`` and its complement)."""
    small = np.abs(delta) <= 1.0
    d = np.where(small, delta, 0.0)
    up = np.log1p(mu * np.expm1(d))
    down = np.log1p(nu * np.expm1(-d))
    if not small.all():  # large moves: the plain difference is accurate relative to them
        far = ~small
        e, t = eta[far], eta[far] + delta[far]
        up[far] = log1pexp(t) - log1pexp(e)
        down[far] = log1pexp(-t) - log1pexp(-e)
    return up, down


def _log_binomial(m: np.ndarray, y: np.ndarray) -> np.ndarray:
    """``log C(m, y)`` row by row, through ``math.lgamma`` on the distinct values only."""
    def lg(values: np.ndarray) -> np.ndarray:
        uniq, inv = np.unique(values, return_inverse=True)
        return np.array([math.lgamma(float(v) + 1.0) for v in uniq])[inv]

    return lg(m) - lg(y) - lg(m - y)


def _rows_product(*factors: np.ndarray) -> np.ndarray:
    """The elementwise product of equal-length vectors, in chunks on the row threads."""
    out = np.empty(factors[0].shape)

    def part(lo: int, hi: int) -> None:
        np.multiply(factors[0][lo:hi], factors[1][lo:hi], out=out[lo:hi])
        for f in factors[2:]:
            out[lo:hi] *= f[lo:hi]

    for_rows(part, out.shape[0], ELEMENT_CHUNK)
    return out


class BinomialLoss:
    r"""Negative weighted binomial log-likelihood in the linear predictor (logit link).

    Parameters
    ----------
    y : ndarray, shape (n,)
        Successes: 0/1 for binary data, counts ``0 <= y <= m`` for grouped data.
    trials : ndarray, shape (n,), optional
        Trials ``m`` per row (default 1).
    weights : ndarray, shape (n,), optional
        Case weights ``w >= 0`` (default 1).

    The arrays are assumed checked (the fronts check them); they are not copied or
    modified.  ``value`` is :math:`\ell(\eta)` of the module docstring.
    """

    outputs = 1
    #: declared capabilities (:class:`lintools.engine.contracts.Loss`)
    row_subsets, row_blocks, closed_null = True, False, True

    def __init__(self, y: np.ndarray, trials: np.ndarray | None = None, weights: np.ndarray | None = None) -> None:
        n = y.shape[0]
        self.y = y
        self.trials = np.ones(n) if trials is None else trials
        self.weights = np.ones(n) if weights is None else weights
        self.grouped = trials is not None
        plain = trials is None and weights is None  # unit weights and trials: no products to form
        self._wy = y if plain else self.weights * y
        self._wf = 1.0 - y if plain else self.weights * (self.trials - y)  # weighted failures
        self._wm = self.trials if plain else self.weights * self.trials
        self._cache: tuple | None = None  # (eta, (e, mu, nu)) of the last linear predictor
        self._value: tuple | None = None  # (eta, value(eta)) of the last value asked for
        # one trial per row with a 0/1 outcome: each row has one softplus term in the
        # margin u = sgn * eta (sgn = 1 - 2y), value w log(1 + e^u), gradient w sgn q and
        # curvature w q (1 - q) with q = 1 / (1 + e^-u): no selection by outcome per row
        self._binary = bool(trials is None and np.all((y == 0) | (y == 1)))
        self._sgn = 1.0 - 2.0 * y if self._binary else None
        self._wsgn = (self._sgn if weights is None else self.weights * self._sgn) if self._binary else None

    def _parts(self, eta: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """``(exp(-|eta|), mu, 1 - mu)``, kept for the last ``eta``: the solvers ask for the
        value, gradient and curvature at one linear predictor in turn, and each needs them.
        For 0/1 outcomes the first entry is None (only ``value`` needs it, and forms it)."""
        cached = self._cache
        if cached is not None and cached[0] is eta:
            return cached[1]
        if self._binary:  # (None, q, 1 - q) in the margin: q is mu for y = 0 and 1 - mu for y = 1
            q, qc = np.empty(eta.shape), np.empty(eta.shape)
            for_rows(lambda lo, hi: self.margin_rows(lo, hi, eta, q, qc), eta.shape[0], ELEMENT_CHUNK)
            parts = (None, q, qc)  # exp(-|eta|) is formed by value() when it is asked for
            self._cache = (eta, parts)
            return parts
        e = np.exp(-np.abs(eta))
        # mu = 1 / (1 + e^-eta) and 1 - mu = 1 / (1 + e^eta), each directly to a few ulp; an
        # overflowing exp (|eta| > 709) gives the correct limit 0 for the tiny one
        with np.errstate(over="ignore"):
            mu = np.exp(-eta)
            mu += 1.0
            np.reciprocal(mu, out=mu)
            nu = np.exp(eta)
            nu += 1.0
            np.reciprocal(nu, out=nu)
        parts = (e, mu, nu)
        self._cache = (eta, parts)
        return parts

    # ---- row ranges (0/1 outcomes): the bodies of the chunked passes
    def margin_rows(self, lo: int, hi: int, eta: np.ndarray, q: np.ndarray, qc: np.ndarray) -> None:
        """Write ``q = 1 / (1 + e^-u)`` and ``1 - q = 1 / (1 + e^u)`` (``u = sgn eta``, the
        margin) into rows ``lo:hi`` of ``q`` and ``qc``, each directly to a few ulp."""
        qb, qcb = q[lo:hi], qc[lo:hi]
        u = np.multiply(self._sgn[lo:hi], eta[lo:hi], out=qcb)  # the margin, in 1 - q's place
        with np.errstate(over="ignore"):  # an overflowing exp gives the right limit 0
            np.negative(u, out=qb)
            np.exp(qb, out=qb)
            qb += 1.0
            np.reciprocal(qb, out=qb)
            np.exp(u, out=qcb)
            qcb += 1.0
            np.reciprocal(qcb, out=qcb)

    def change_rows(self, lo: int, hi: int, eta: np.ndarray, delta: np.ndarray, q: np.ndarray) -> float:
        """Rows ``lo:hi`` of :meth:`value_change` (``q``: the margin's ``q`` at ``eta``)."""
        d, s = delta[lo:hi], self._sgn[lo:hi]
        change = np.clip(d, -1.0, 1.0)
        change *= s
        np.expm1(change, out=change)
        change *= q[lo:hi]
        np.log1p(change, out=change)
        far = np.flatnonzero(np.abs(d) > 1.0) if d.size and (d.max() > 1.0 or d.min() < -1.0) else ()
        if len(far):  # large moves: the plain difference is accurate relative to them
            u = s[far] * eta[lo:hi][far]
            change[far] = log1pexp(u + s[far] * d[far]) - log1pexp(u)
        return float(self.weights[lo:hi] @ change)

    def value_rows(self, lo: int, hi: int, eta: np.ndarray) -> float:
        """Rows ``lo:hi`` of :meth:`value` for 0/1 outcomes: ``w (max(u, 0) + log1p(e^-|eta|))``,
        the softplus of the margin ``u = (1 - 2y) eta``, both parts non-negative."""
        t = np.abs(eta[lo:hi])
        np.negative(t, out=t)
        np.exp(t, out=t)
        np.log1p(t, out=t)  # log1p(exp(-|eta|))
        u = self._sgn[lo:hi] * eta[lo:hi]
        np.maximum(u, 0.0, out=u)
        u += t
        return float(self.weights[lo:hi] @ u)

    def subset(self, rows: np.ndarray) -> "BinomialLoss":
        """The same loss on the given rows."""
        return BinomialLoss(self.y[rows], self.trials[rows] if self.grouped else None, self.weights[rows])

    # ---- interface -------------------------------------------------------------
    def row_weights(self) -> np.ndarray:
        """``w * m``: the number of Bernoulli observations each row stands for."""
        return self._wm

    def start_intercept(self, offset: np.ndarray | None = None) -> float:
        """The logit of the weighted success rate, less the weighted mean offset."""
        total = float(self._wm.sum())
        rate = float(self._wy.sum()) / total
        rate = min(max(rate, 1e-12), 1.0 - 1e-12)
        b = math.log(rate) - math.log1p(-rate)
        if offset is not None:
            b -= float(self._wm @ offset) / total
        return b

    def constant_fit(self, n: int, tol: float) -> tuple[float, np.ndarray] | None:
        r"""The intercept-only fit without offset in closed form: ``(value, eta)`` or None.

        The optimum is :math:`b = \mathrm{logit}(S / T)` with :math:`S = \sum w y` and
        :math:`T = \sum w m`, and the value there is :math:`S\,\mathrm{softplus}(-b) +
        (T - S)\,\mathrm{softplus}(b)`.  None when the gradient per unit weight
        :math:`\mu(b) - S / T` at the (clamped) rate is above ``tol`` (a rate within 1e-12 of
        0 or 1; the stopping rule of :mod:`lintools.engine`); then solve."""
        b = self.start_intercept()
        S, T = float(self._wy.sum()), float(self._wm.sum())
        mu = 1.0 / (1.0 + math.exp(-b))
        if not abs(T * mu - S) <= tol * T:
            return None
        f = S * float(log1pexp(np.float64(-b))) + (T - S) * float(log1pexp(np.float64(b)))
        eta = np.full(n, b)
        self._value = (eta, f)
        return f, eta

    def value(self, eta: np.ndarray) -> float:
        """Sum of the weighted negative log-likelihood terms (without the binomial coefficient).

        With ``log(1 + e^x) = max(x, 0) + log1p(e^{-|x|})`` the two softplus terms of a row
        share one ``log1p(exp(-|eta|))``, all parts non-negative."""
        cached = self._value
        if cached is not None and cached[0] is eta:
            return cached[1]
        if self._binary:
            parts = for_rows(lambda lo, hi: self.value_rows(lo, hi, eta), eta.shape[0], ELEMENT_CHUNK)
            f = float(add_up(parts, 0.0))
        else:
            e = self._parts(eta)[0]
            f = float(self._wy @ np.maximum(-eta, 0.0) + self._wf @ np.maximum(eta, 0.0) + self._wm @ np.log1p(e))
        self._value = (eta, f)  # the record asks for it again (log-likelihood, deviance)
        return f

    def value_change(self, eta: np.ndarray, delta: np.ndarray) -> float:
        r"""``value(eta + delta) - value(eta)``, accurate even when it is far below ``eps * value``.

        Row by row, :math:`\log(1+e^{a+\delta}) - \log(1+e^a) = \log1p(\mu_a\,\mathrm{expm1}(\delta))`
        for :math:`|\delta| \le 1` (the argument stays above -0.64, so log1p is exact to
        rounding); larger moves use the plain difference, which is then accurate relative
        to the change.
        """
        if self._binary:
            return self._binary_change(eta, delta)
        _, mu, nu = self._parts(eta)
        up, down = _softplus_changes(eta, delta, mu, nu)
        return float(self._wy @ down + self._wf @ up)

    def _binary_change(self, eta: np.ndarray, delta: np.ndarray) -> float:
        """``value_change`` for 0/1 outcomes: one softplus change per row, in the margin.

        With ``u = sgn eta`` and ``q = 1 / (1 + e^-u)`` a row changes by
        ``log1p(q expm1(sgn delta))`` (the form of :func:`_softplus_changes`)."""
        _, q, _ = self._parts(eta)
        parts = for_rows(lambda lo, hi: self.change_rows(lo, hi, eta, delta, q), eta.shape[0], ELEMENT_CHUNK)
        return float(add_up(parts, 0.0))

    def gradient(self, eta: np.ndarray) -> np.ndarray:
        """``d value / d eta = w [(m - y) mu - y (1 - mu)] = w (m mu - y)``."""
        _, mu, nu = self._parts(eta)
        if self._binary:  # (here mu is q of the margin)
            return _rows_product(self._wsgn, mu)
        return self._wf * mu - self._wy * nu

    def value_and_gradient(self, eta: np.ndarray) -> tuple[float, np.ndarray]:
        """``(value(eta), gradient(eta))`` sharing one evaluation of ``mu``."""
        return self.value(eta), self.gradient(eta)

    def curvature(self, eta: np.ndarray) -> np.ndarray:
        """IRLS weights ``w m mu (1 - mu)`` (the second derivative of each term)."""
        _, mu, nu = self._parts(eta)
        return _rows_product(self._wm, mu, nu)

    def curvature_slope(self, eta: np.ndarray) -> np.ndarray:
        """Derivative of the IRLS weights in eta: ``w m mu (1 - mu) (1 - 2 mu)`` (Firth's correction).

        ``1 - 2 mu = -tanh(eta / 2)`` exactly, which keeps full accuracy near eta = 0.
        """
        mu, nu = _halves(eta)
        return -self._wm * mu * nu * np.tanh(0.5 * eta)

    def curvature_change(self, eta: np.ndarray, delta: np.ndarray) -> np.ndarray:
        r"""``curvature(eta + delta) - curvature(eta)`` without cancellation.

        With :math:`\mu\nu = 1 / (4\cosh^2(\eta/2))` and
        :math:`\cosh^2 x - \cosh^2 y = \sinh(x + y)\sinh(x - y)`:
        :math:`\Delta(\mu\nu) = -4\sinh(\eta + \delta/2)\sinh(\delta/2)\,(\mu\nu)(\eta+\delta)\,(\mu\nu)(\eta)`.
        Far out (|eta| > 300) the weights are below 1e-130 and the plain difference is used.
        """
        a = eta + delta
        mu_a, nu_a = _halves(a)
        mu_b, nu_b = _halves(eta)
        near = (np.abs(a) < 300) & (np.abs(eta) < 300)
        mid = np.where(near, eta + 0.5 * delta, 0.0)
        half = np.where(near, 0.5 * delta, 0.0)
        prod = -4.0 * np.sinh(mid) * np.sinh(half) * (mu_a * nu_a) * (mu_b * nu_b)
        return self._wm * np.where(near, prod, mu_a * nu_a - mu_b * nu_b)

    def curvature_second(self, eta: np.ndarray) -> np.ndarray:
        """Second derivative of the IRLS weights in eta: ``w m mu (1 - mu) (1 - 6 mu (1 - mu))``."""
        mu, nu = _halves(eta)
        v = mu * nu
        return self._wm * v * (1.0 - 6.0 * v)

    def hessian_vector(self, eta: np.ndarray, u: np.ndarray) -> np.ndarray:
        """Per-row second derivative times ``u``."""
        return self.curvature(eta) * u

    # ---- binomial facts --------------------------------------------------------------
    def mean(self, eta: np.ndarray) -> np.ndarray:
        """Success probability ``mu`` per row."""
        return _halves(eta)[0]

    def log_binomial_total(self) -> float:
        r"""``sum_i w_i log C(m_i, y_i)`` (zero for binary data)."""
        if not self.grouped:
            return 0.0
        return float(self.weights @ _log_binomial(self.trials, self.y))

    def log_likelihood(self, eta: np.ndarray) -> float:
        r"""Full binomial log-likelihood :math:`\sum_i w_i[\log\binom{m_i}{y_i} + y_i\log\mu_i + (m_i-y_i)\log(1-\mu_i)]`."""
        return self.log_binomial_total() - self.value(eta)

    def deviance(self, eta: np.ndarray) -> float:
        r"""Twice the log-likelihood ratio against the saturated model (``mu_i = y_i / m_i``)."""
        if self._binary:
            # saturated log-likelihood 0: twice the value, whose terms are all >= 0
            return 2.0 * self.value(eta)
        m, y = self.trials, self.y
        f = m - y
        with np.errstate(divide="ignore", invalid="ignore"):
            ly = np.where(y > 0, np.log(np.where(y > 0, y, 1.0) / np.where(m > 0, m, 1.0)), 0.0)
            lf = np.where(f > 0, np.log(np.where(f > 0, f, 1.0) / np.where(m > 0, m, 1.0)), 0.0)
        # y log(y / (m mu)) + f log(f / (m (1 - mu))), with -log mu = log1pexp(-eta)
        terms = self._wy * (ly + log1pexp(-eta)) + self._wf * (lf + log1pexp(eta))
        return float(2.0 * np.maximum(terms, 0.0).sum())


def unpenalised_gradient(
    model: str, X: np.ndarray, y: Any, weights: np.ndarray, beta: Any, intercept: Any
) -> tuple[np.ndarray, Any]:
    r"""Gradient of the negative log-likelihood at given coefficients (no penalty).

    ``model="logistic"``: ``y`` holds two labels, the larger one is the positive class;
    ``eta = intercept + X beta`` (``intercept=None``: no intercept).  Returns
    ``(X' g, sum(g))`` with ``g = w (mu - y)``; the second entry is 0 without intercept.

    ``model="softmax"``: ``beta`` is (p, K) with one column per sorted class of ``y`` and
    ``intercept`` (K,) or None; returns ``(X' G, column sums of G)`` with
    ``G = w (pi - onehot)`` (zeros without intercept).  Used by
    :func:`lintools.exchange.crosscheck.implied_l2`.
    """
    if model not in ("logistic", "softmax"):
        raise InputError(f"model={model!r}: the likelihood losses are 'logistic' and 'softmax'")
    Xa, _ = as_matrix(X, "X")
    n = Xa.shape[0]
    classes, codes = as_labels(y, "y", n)
    w = as_weights(weights, n)
    scale = case_weight_scale(w)  # products of w / scale cannot underflow; the sums are scaled back
    w = w / scale
    b = np.asarray(beta, dtype=float)
    if model == "logistic":
        if len(classes) != 2:
            raise InputError(f"y has {len(classes)} distinct labels; a logistic model needs exactly two")
        eta = Xa @ b + (0.0 if intercept is None else float(intercept))
        g = BinomialLoss(codes.astype(float), weights=w).gradient(eta)
        return (Xa.T @ g) * scale, (float(g.sum()) * scale if intercept is not None else 0.0)
    from .multinomial import MultinomialLoss

    K = len(classes)
    if b.ndim != 2 or b.shape[1] != K:
        raise InputError(f"coefficients has shape {b.shape}; a softmax model on these {K} classes needs "
                         f"({Xa.shape[1]}, {K}): one column per class in sorted order")
    a = np.zeros(K) if intercept is None else np.asarray(intercept, dtype=float).reshape(K)
    G = MultinomialLoss(codes, K, w, reference=False).gradient(Xa @ b + a)
    return (Xa.T @ G) * scale, (G.sum(axis=0) * scale if intercept is not None else np.zeros(K))
