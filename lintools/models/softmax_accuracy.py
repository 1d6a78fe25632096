r"""The :class:`lintools.models.accuracy.Accuracy` of a softmax fit (in memory or over blocks).

The solver works in the centred, standardised coordinates ``z`` of
:class:`lintools.engine.LinearModelProblem` with ``K'`` outputs (the free classes: all K in
the symmetric form, the K - 1 other than the reference class otherwise), term-major
(``index = j K' + k``).  As for the binary fit (:mod:`lintools.models.glm_accuracy`):

* Solver: the Newton step ``d = H_z^{-1} g_z`` at the answer (in the symmetric form through
  the subspace where each term's class values sum to zero: ``H_z^{-1}`` is then
  ``E (E'HE)^{-1} E'``),
  mapped to the column-scaled coefficients, plus the float64 rounding floor of the
  gradient (rounding ``u`` of the centred design and of each term of ``r_i``) and of the
  stored coefficients (Dennis & Schnabel 1996, sec. 5.2).
* Data: the first-order change of the optimum under relative rounding ``u`` of the entries
  of X (the labels are exact), with ``r_i = w_i (mu_i - e_{y_i})`` and ``W_i = w_i
  (diag(mu_i) - mu_i mu_i')`` over the free classes, on an evenly spaced subsample of the
  rows (:func:`lintools.models.accuracy.sensitivity`).

The figures are of the coefficients as reported: the free classes' intercepts and slopes
(the reference class's are exactly 0 and are not counted), in the symmetric form the
intercepts with mean zero, ordered as ``SoftmaxFit.covariance`` (class by class).

References
----------
Dennis, J. E. & Schnabel, R. B. (1996). Numerical Methods for Unconstrained Optimization
and Nonlinear Equations. SIAM.
Higham, N. J. (2002). Accuracy and Stability of Numerical Algorithms, 2nd ed. SIAM, ch. 20.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .accuracy import Accuracy, Precision, rows_of, subsample
from .glm_accuracy import LikelihoodAnswer, column_rms, likelihood_accuracy, linear_predictor
from ..engine.multinomial import probabilities
from ..support.text import intercept_label

__all__ = ["softmax_accuracy", "softmax_answer", "softmax_derivatives"]


def softmax_answer(problem: Any, z: np.ndarray, Hinv: np.ndarray, gradient: np.ndarray, classes: tuple,
                   order: np.ndarray, ref: int | None, names: tuple[str, ...], rho: np.ndarray) -> LikelihoodAnswer:
    """The :class:`LikelihoodAnswer` of a softmax answer ``z`` of ``problem`` (in memory or
    blocked: ``c``, ``s``, ``intercept``, ``K``, ``p1``, ``to_original``), with the reported
    names and order of ``SoftmaxFit.covariance``."""
    Kf, p1 = problem.K, problem.p1
    first = 0 if ref is None else 1
    terms = ((intercept_label(names),) if problem.intercept else ()) + tuple(names)
    shown = tuple(f"{classes[int(order[first + k])]}:{t}" for k in range(Kf) for t in terms)
    reported = np.array([t * Kf + k for k in range(Kf) for t in range(p1)], dtype=np.int64)
    c = np.asarray(problem.c, dtype=float)
    return LikelihoodAnswer(c, np.asarray(problem.s, dtype=float), rho, bool(problem.intercept), z, Hinv,
                            gradient, problem.to_original(z).reshape(p1, Kf), shown, reported,
                            centre=ref is None)


def softmax_derivatives(eta: np.ndarray, icodes: np.ndarray, w: np.ndarray, reference: bool) -> tuple:
    """``r`` (m, K') and ``W`` (m, K', K') of the rows' losses at ``eta`` (m, K') over the free
    classes (``icodes``: the internal class of each row, the reference first), and the size
    of the terms of ``r``, ``w_i (mu_i + e_{y_i})``."""
    m, Kf = eta.shape
    first = int(reference)
    mu = probabilities(eta, reference)[:, first:]
    Y = np.zeros((m, Kf + first))
    Y[np.arange(m), icodes] = 1.0
    Y = Y[:, first:]
    wc = w[:, None]
    r = wc * (mu - Y)
    W = np.empty((m, Kf, Kf))
    nw = -w
    for k in range(Kf):  # -w mu_k mu_l, and w mu_k on the diagonal: pair by pair (K is small)
        for l in range(Kf):
            np.multiply(mu[:, k], mu[:, l], out=W[:, k, l])
            W[:, k, l] *= nw
        W[:, k, k] += w * mu[:, k]
    Y += mu
    Y *= wc
    return r, W, Y


def softmax_accuracy(*args: Any, **kwargs: Any) -> Accuracy:
    """See :func:`_softmax_accuracy`; arithmetic warnings of extreme data are silent (a figure
    then shows as 0 digits or the float64 limit)."""
    with np.errstate(all="ignore"):
        return _softmax_accuracy(*args, **kwargs)


def _softmax_accuracy(problem: Any, Xa: np.ndarray, loss: Any, offset: np.ndarray | None, z: np.ndarray,
                      gradient_z: np.ndarray, Vz: np.ndarray, classes: tuple, order: np.ndarray, ref: int | None,
                      names: tuple[str, ...], precision: Precision | None = None) -> Accuracy:
    """The accuracy of an in-memory softmax answer ``z`` (``Vz``: the inverse information in
    ``z``, the problem's weights; ``loss``: its multinomial loss; ``offset`` the problem's)."""
    ans = softmax_answer(problem, z, Vz, gradient_z, classes, order, ref, names,
                         column_rms(problem.c, problem.spread))
    idx = subsample(Xa.shape[0])
    Xs = rows_of(Xa, idx)
    eta = linear_predictor(ans, Xs, None if offset is None else offset[idx])
    r, W, size = softmax_derivatives(eta, loss.codes[idx], loss.weights[idx], ref is not None)
    return likelihood_accuracy(ans, Xs, r, W, size, Xa.shape[0], precision)
