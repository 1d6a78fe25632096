"""The :class:`lintools.models.accuracy.Accuracy` of the blocked fits.

The estimators are those of the in-memory fits (:mod:`lintools.models.lsq_accuracy`,
:mod:`lintools.models.glm_accuracy`, :mod:`lintools.models.softmax_accuracy`):

* Solver: TSQR's last refinement correction (computed by the residual pass at the answer,
  not applied) with the rounding floor of a residual formed in extended precision; for the
  likelihood fits the Newton step ``H_z^{-1} g_z`` at the answer from the information and
  gradient the last pass formed there, with the float64 floor.
* Data: the first-order change of the optimum under relative rounding ``u`` of X (and y
  for least squares), summed over the sample of rows the first evaluation pass took
  (:mod:`lintools.blocks.sample`: ``SAMPLE_ROWS`` rows by a hash of each row, no extra
  pass) and scaled to all rows; the sentence says so when the sample is not all rows.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..engine import inverse_spd
from ..models.accuracy import Accuracy
from ..models.glm_accuracy import LikelihoodAnswer, binary_derivatives, likelihood_accuracy, linear_predictor
from ..models.lsq_accuracy import least_squares_accuracy
from ..models.lsq_record import PathAnswer
from ..models.lsq_scale import Units
from ..models.softmax_accuracy import softmax_answer, softmax_derivatives
from ..support.validate import INTERCEPT_NAME

__all__ = ["blocked_binary_accuracy", "blocked_least_squares_accuracy", "blocked_softmax_accuracy"]

#: How the blocked fits' sample is drawn (the sentence names it).
HOW = "a uniform sample drawn by a hash of each row"


def _weights(sample: dict, scale: float = 1.0) -> np.ndarray:
    w = sample["w"]
    return np.ones(sample["X"].shape[0]) if w is None else w / scale


def _rms(c: np.ndarray, s: np.ndarray) -> np.ndarray:
    rho = np.sqrt(s * s + c * c)
    return np.where(rho > 0, rho, 1.0)


def blocked_binary_accuracy(problem: Any, z: np.ndarray, names: tuple[str, ...], rows: int) -> Accuracy:
    """The accuracy of a blocked binary logistic answer ``z`` (``rows``: all rows)."""
    with np.errstate(all="ignore"):
        ev = problem.evaluate(z)
        c, s = np.asarray(problem.c, dtype=float), np.asarray(problem.s, dtype=float)
        terms = ((INTERCEPT_NAME,) if problem.intercept else ()) + tuple(names)
        ans = LikelihoodAnswer(c, s, _rms(c, s), bool(problem.intercept), z,
                               inverse_spd(problem.fisher_information(z)), ev.gradient,
                               problem.to_original(z)[:, None], terms)
        sm = problem.sample
        eta = linear_predictor(ans, sm["X"], None)[:, 0]
        r, W, size = binary_derivatives(eta, sm["y"], _weights(sm, problem.weight_scale))
        return likelihood_accuracy(ans, sm["X"], r, W, size, rows, how=HOW)


def blocked_softmax_accuracy(problem: Any, z: np.ndarray, Vz: np.ndarray, classes: tuple, order: np.ndarray,
                             ref: int | None, names: tuple[str, ...], rows: int) -> Accuracy:
    """The accuracy of a blocked softmax answer ``z`` (``Vz``: the inverse information in z)."""
    with np.errstate(all="ignore"):
        ev = problem.evaluate(z)
        c, s = np.asarray(problem.c, dtype=float), np.asarray(problem.s, dtype=float)
        ans = softmax_answer(problem, z, Vz, ev.gradient, classes, order, ref, names, _rms(c, s))
        sm = problem.sample
        eta = linear_predictor(ans, sm["X"], None)
        icodes = np.argsort(order)[sm["y"].astype(np.intp)]  # sorted-class codes -> internal order
        r, W, size = softmax_derivatives(eta, icodes, _weights(sm, problem.weight_scale), ref is not None)
        return likelihood_accuracy(ans, sm["X"], r, W, size, rows, how=HOW)


def blocked_least_squares_accuracy(sample: dict, fit: PathAnswer, units: Units, intercept: bool, W1: float,
                                   rows: int) -> Accuracy:
    """The accuracy of TSQR's answer ``fit`` (in the units ``units``; ``W1`` the total unit
    weight) from the sample of the rows."""
    y1 = np.ldexp(sample["y"], -units.ey)
    w1 = None if sample["w"] is None else np.ldexp(sample["w"], -units.ew)
    return least_squares_accuracy(sample["X"], y1, w1, fit, units, intercept, W1, sample=(rows, HOW))
