"""Problems on an affine subspace of another's coordinates: fixed parameters, removed directions."""

from __future__ import annotations

import numpy as np

from .base import Evaluation
from .problem import LinearModelProblem, _Line

__all__ = ["AffineProblem", "RestrictedProblem"]


class AffineProblem:
    """The problem restricted to an affine subspace ``z = z0 + E u`` of its coordinates.

    The gradient in ``u`` is ``E' grad``.  The stopping rule is the base problem's (the
    gradient per unit weight in its standardised, centred coordinates) when ``keep`` is
    None; with ``keep`` it uses those entries of the caller's gradient, per standardised
    column and unit weight (``LinearModelProblem.unit``), since the other parameters are
    held.  :meth:`to_original` returns the same entries of the caller's parameters.  Two uses: holding parameters fixed
    (:class:`RestrictedProblem`, for profile likelihoods) and removing a direction along
    which the objective is exactly constant (the shared shift of the intercepts of a
    symmetric softmax model), which makes the Hessian non-singular.
    """

    #: declared capabilities (:class:`lintools.engine.contracts.Problem`); ``sketches``
    #: is the base problem's (a sketched Hessian projected to the subspace)
    warm_starts = fast_steps = rounding_known = False

    def __init__(self, problem: LinearModelProblem, z0: np.ndarray, E: np.ndarray,
                 keep: np.ndarray | None = None) -> None:
        self.base, self.z0, self.E, self.keep = problem, z0, E, keep
        self.sketches = problem.sketches
        self.size = E.shape[1]
        self.weight_total, self.weight_scale = problem.weight_total, problem.weight_scale

    def embed(self, u: np.ndarray) -> np.ndarray:
        return self.z0 + self.E @ u

    def start(self) -> np.ndarray:
        return np.zeros(self.size)

    def _kept(self, v: np.ndarray) -> np.ndarray:
        return v if self.keep is None else v[self.keep]

    def evaluate(self, u: np.ndarray) -> Evaluation:
        ev = self.base.evaluate(self.embed(u))
        measure = ev.measure if self.keep is None else (ev.original_gradient * self.base.unit)[self.keep]
        return Evaluation(lambda: ev.value, self.E.T @ ev.gradient, self._kept(ev.original_gradient), ev.eta, measure)

    def hessian(self, u: np.ndarray) -> np.ndarray:
        return self.base.hessian(self.embed(u), E=self.E)

    def sketch_hessian(self, u: np.ndarray) -> np.ndarray | None:
        return self.base.sketch_hessian(self.embed(u), E=self.E)

    def line(self, u: np.ndarray, d: np.ndarray) -> _Line:
        return self.base.line(self.embed(u), self.E @ d)

    def to_original(self, u: np.ndarray) -> np.ndarray:
        return self._kept(self.base.to_original(self.embed(u)))


class RestrictedProblem(AffineProblem):
    """A problem with some caller's-coordinate parameters held at fixed values.

    The free parameters ``u`` enter as ``z = z0 + E u`` (an affine map); the gradient is
    ``E' grad`` and the stopping rule uses the free entries of the caller's gradient per
    standardised column and unit weight.
    Used for profile likelihoods (each parameter in turn held fixed).
    """

    def __init__(self, problem: LinearModelProblem, fixed: dict[int, float]) -> None:
        size = problem.size
        T, M = problem.theta_from_z_matrix(), problem.z_from_theta_matrix()
        free = np.array([j for j in range(size) if j not in fixed], dtype=int)
        theta0 = np.zeros(size)
        for j, v in fixed.items():
            theta0[j] = v
        super().__init__(problem, M @ theta0, M[:, free], keep=free)
        self.free = free
        self.T = T

    def project(self, z: np.ndarray) -> np.ndarray:
        """Free parameters of a full z (its caller's-coordinate entries)."""
        return (self.T @ z)[self.free]
