"""The engine's contracts: what a loss, a problem and a line search must offer.

Each optional capability (a shortcut of large problems, a blocked pass of a many-output
loss, a closed-form null model) is **declared** by a flag that every implementation sets,
True or False; the engine reads the flag and then calls the members it promises.  A loss
or problem that does not declare a flag, or declares one without its members, fails with
an ``AttributeError`` at the first use instead of silently losing the shortcut.

Implementations: :class:`lintools.engine.losses.BinomialLoss` and
:class:`lintools.engine.multinomial.MultinomialLoss` (losses);
:class:`lintools.engine.problem.LinearModelProblem` (its variants for one output, several
outputs and Firth's penalty) and
:class:`lintools.engine.affine.AffineProblem` (problems); the block fits' problems of
:mod:`lintools.blocks` (no shortcut).
"""

from __future__ import annotations

from typing import Any, ClassVar, Protocol

import numpy as np

from .base import Evaluation

__all__ = ["Loss", "FirthLoss", "Line", "Problem"]


class Loss(Protocol):
    """A loss in the linear predictor ``eta`` ((n,) for one output, (n, K) for K).

    Declared capabilities (each True promises the members named):

    * ``row_subsets``: ``subset(rows)``, the same loss on some rows (Newton's warm start
      of large problems runs on a row sample);
    * ``row_blocks``: ``pair_weights(eta, rows)``, ``curvature_rows(eta, rows)``,
      ``change_along(eta, direction, t)`` and ``forget()``: passes one block of rows at a
      time, so no (n, K, K) curvature or trial ``eta`` is formed whole;
    * ``closed_null``: ``constant_fit(n, tol)``, the intercept-only fit in closed form.
    """

    outputs: int
    row_subsets: ClassVar[bool]
    row_blocks: ClassVar[bool]
    closed_null: ClassVar[bool]

    def row_weights(self) -> np.ndarray:
        """(n,) total case weight of each row."""

    def start_intercept(self, offset: np.ndarray | None = None) -> Any:
        """The best constant linear predictor(s), less the weighted mean offset."""

    def value(self, eta: Any) -> float:
        """Sum over rows of the weighted loss."""

    def value_change(self, eta: Any, delta: Any) -> float:
        """``value(eta + delta) - value(eta)``, accurate to the rounding of the change."""

    def gradient(self, eta: Any) -> Any:
        """``d value / d eta`` (the shape of eta)."""

    def value_and_gradient(self, eta: Any) -> tuple[float, Any]:
        """Both at once."""

    def curvature(self, eta: Any) -> np.ndarray:
        """(n,) IRLS weights for one output, (n, K, K) blocks for K."""

    def hessian_vector(self, eta: Any, u: Any) -> Any:
        """Per-row second derivative times ``u``."""


class FirthLoss(Loss, Protocol):
    """A one-output loss that Firth's penalty can use (``firth=True``)."""

    def curvature_slope(self, eta: np.ndarray) -> np.ndarray:
        """First derivative of the IRLS weights in eta."""

    def curvature_second(self, eta: np.ndarray) -> np.ndarray:
        """Second derivative of the IRLS weights in eta."""

    def curvature_change(self, eta: np.ndarray, delta: np.ndarray) -> np.ndarray:
        """``curvature(eta + delta) - curvature(eta)`` without cancellation."""


class Line(Protocol):
    """The objective along ``z + t d`` (what :meth:`Problem.line` returns).

    Declared capability ``carries``: ``adopt(t, z_new)`` hands the problem the linear
    predictor of the accepted trial, so the next evaluation needs no product with X."""

    carries: ClassVar[bool]

    def change(self, t: float) -> float:
        """``F(z + t d) - F(z)``, computed directly."""

    def change_and_slope(self, t: float) -> tuple[float, float]:
        """The change and ``d/dt F(z + t d)``."""


class Problem(Protocol):
    """What the solvers of :mod:`lintools.engine` see (see that module's docstring).

    Declared capabilities (each True promises the members named):

    * ``warm_starts``: ``warm_start()``, a start from the optimum on a row sample;
    * ``sketches``: ``sketch_hessian(z)``, a Hessian from a row sample (or None);
    * ``fast_steps``: ``step_hessian(z)`` (a Hessian for steps only, possibly float32)
      and ``reuse_hessian`` (whether a factorised Hessian may serve the next step);
    * ``rounding_known``: ``gradient_rounding(z)``, the rounding level of the stopping
      rule's gradient (stalled fits then name an attainable tol).
    """

    size: int
    weight_total: float
    weight_scale: float
    warm_starts: bool
    sketches: bool
    fast_steps: bool
    rounding_known: bool

    def start(self) -> np.ndarray:
        """The starting z."""

    def evaluate(self, z: np.ndarray) -> Evaluation:
        """Objective and gradients at z."""

    def hessian(self, z: np.ndarray) -> np.ndarray:
        """(size, size) Hessian in z."""

    def line(self, z: np.ndarray, d: np.ndarray) -> Line:
        """The objective along ``z + t d``."""

    def to_original(self, z: np.ndarray) -> np.ndarray:
        """The parameters in the caller's coordinates."""
