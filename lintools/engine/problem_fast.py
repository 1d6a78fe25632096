"""The shortcuts of large problems of :class:`lintools.engine.problem.LinearModelProblem`
(Newton's warm start on a row subsample, the Newton sketch, float32 step Hessians), each
taken under the conditions of :class:`lintools.engine.settings.FastPaths`; none changes
the answer (see :mod:`lintools.engine.newton`).

References
----------
Pilanci, M. & Wainwright, M. J. (2017). Newton sketch: a near linear-time optimization
algorithm with linear-quadratic convergence. SIAM J. Optimization 27, 205-245.
"""

from __future__ import annotations

import copy
import math
from typing import Any

import numpy as np

from .base import SingularMatrixError
from .samples import sample_rows, take_rows
from .settings import fast_paths

__all__ = ["LargeProblemPaths"]

#: Newton sketch: problems with at least ``FastPaths.sketch_min_rows`` rows may use a
#: row-subsample Hessian of max(SKETCH_PER_PARAMETER * parameters, n / SKETCH_FRACTION)
#: rows (``sample_rows``).
SKETCH_PER_PARAMETER = 40
SKETCH_FRACTION = 8
SKETCH_SEED = 20170101
#: Problems with at least ``FastPaths.single_min_rows`` rows (and no Jeffreys penalty)
#: form the Hessians of their Newton *steps* in float32 when the design is well enough
#: conditioned for it (see ``LinearModelProblem.step_hessian``); the covariance always
#: uses float64.  Problems with at least ``FastPaths.warm_min_rows`` rows start Newton
#: from the fit on a fixed row subsample of max(WARM_PER_PARAMETER * parameters,
#: n / WARM_FRACTION) rows (``sample_rows``), solved until its max-abs gradient has
#: fallen by WARM_UNTIL.
WARM_PER_PARAMETER = 40
WARM_FRACTION = 16
#: its own seed: a warm-start sample inside the sketch's would correlate the start's error
#: with the sketched Hessian (measured: one more Newton iteration)
WARM_SEED = 20170102
WARM_UNTIL = 1e-4
#: A subsample optimum with a linear predictor beyond this anywhere is not used as a start.
WARM_ETA_LIMIT = 30.0
#: float32 step Hessians are used while ``||Hs^-1|| * sqrt(size) * SINGLE_LEVEL <= 1e-2``
#: for the Jacobi-scaled Hessian ``Hs`` (``SINGLE_LEVEL``: the rounding level of one scaled
#: entry of a float32 product, with room): the relative error of the step stays below 1e-2.
SINGLE_LEVEL = 64 * float(np.finfo(np.float32).eps)


class LargeProblemPaths:
    """The shortcuts of large problems of :class:`lintools.engine.problem.LinearModelProblem`
    (a part of that class; its attributes are set by its constructor)."""

    @property
    def reuse_hessian(self) -> bool:
        """Whether Newton may keep a Hessian for the next step (large problems only)."""
        return self.n >= fast_paths().single_min_rows

    def subsample(self, rows: np.ndarray) -> Any:
        """The same problem on the given rows, in the same coordinates (same ``c`` and ``s``)."""
        sub = copy.copy(self)
        sub.X, sub.n, sub.loss = take_rows(self.X, rows), int(rows.size), self.loss.subset(rows)
        sub.offset = None if self.offset is None else self.offset[rows]
        sub.shifted = self.shifted.subset(rows)
        sub.weight_total = float(sub.loss.row_weights().sum())
        sub.unit = self.unit * (self.weight_total / sub.weight_total) if sub.weight_total > 0 else self.unit
        sub._last, sub._carried, sub._sketch, sub._warm, sub._line = None, False, None, False, None
        return sub

    def warm_start(self) -> np.ndarray | None:
        """A starting ``z`` for Newton: the optimum on a fixed row subsample (or None).

        Only for large problems (``n >= FastPaths.warm_min_rows``, slopes present, no Jeffreys
        penalty, a loss with ``subset``): the early, damped Newton iterations then run on
        ``1/WARM_FRACTION`` of the rows, and the full-data iterations start within the
        sampling error of the optimum.  The answer is unchanged (the stopping rule is on
        the full gradient); a subsample fit that fails (e.g. separated) gives None.
        """
        if (not self._warm or not self.warm_starts or self.n < fast_paths().warm_min_rows or self.p == 0
                or not self.loss.row_subsets):
            return None
        m = max(WARM_PER_PARAMETER * self.size, self.n // WARM_FRACTION)
        if 2 * m > self.n:
            return None
        rows = sample_rows(self.n, m, WARM_SEED)
        sub = self.subsample(rows)
        if not float(sub.loss.row_weights().sum()) > 0:
            return None
        from .newton import newton

        z0 = sub.start()
        g0 = sub.evaluate(z0).gradient_norm
        try:
            res = newton(sub, tol=WARM_UNTIL * g0, max_iter=30, start=z0)
        except (SingularMatrixError, FloatingPointError):
            return None
        if not (res.converged and np.all(np.isfinite(res.z))):
            return None
        # a subsample that is (nearly) separated "converges" far out: not a start worth having
        lin = sub.eta(res.z, with_offset=False)
        return res.z if float(np.max(np.abs(lin))) <= WARM_ETA_LIMIT else None

    def _sample_design(self, sub: Any, rows: np.ndarray) -> None:
        """Give the Newton sketch's sub-problem the sampled rows of the design."""
        sub.X = take_rows(self.X, rows)

    def _sampled_curvature(self, eta: Any, rows: np.ndarray) -> Any:
        """The curvature at ``eta`` on the sampled rows, for the sub-problem's :meth:`_information`."""
        if self.loss.row_blocks:
            return self.loss.curvature_rows(eta, rows)
        return self.loss.curvature(eta)[rows]

    def sketch_hessian(self, z: np.ndarray, E: np.ndarray | None = None) -> np.ndarray | None:
        """Penalised Hessian with the loss part estimated from a fixed row subsample.

        The Newton sketch of Pilanci & Wainwright (2017) in a simple form: a fixed
        sample of the rows (``sample_rows``: random runs of consecutive rows, a fixed
        seed, copied once, so fits are reproducible), their curvature scaled by the ratio
        of total to sampled row weight.  Cost: ``m / n`` of :meth:`hessian`.
        Returns None for problems too small to gain from it (``n < FastPaths.sketch_min_rows``, or no
        slopes: an intercept-only model, such as the null model of a fit with an offset) and
        for a problem that does not declare ``sketches`` (Firth's).  The solver uses it only while far from the optimum; the
        last iterations and the covariance use the exact Hessian.
        """
        if not self.sketches or self.n < fast_paths().sketch_min_rows or self.p == 0:
            return None
        if self._sketch is not None and self._sketch[1].rows32 and not self.single:
            self._sketch = None  # float32 rows were kept for float32 products: keep float64 ones now
        if self._sketch is None:
            m = min(self.n, max(SKETCH_PER_PARAMETER * self.size, self.n // SKETCH_FRACTION))
            rows = sample_rows(self.n, m, SKETCH_SEED)
            sub = copy.copy(self)
            m = int(rows.size)
            sub.n, sub._last, sub._sketch, sub._line, sub.rows32 = m, None, None, None, False
            self._sample_design(sub, rows)
            v = self.loss.row_weights()
            sub_total = float(v[rows].sum())
            self._sketch = (rows, sub, float(v.sum()) / sub_total if sub_total > 0 else 0.0)
        rows, sub, scale = self._sketch
        if scale == 0.0:
            return None
        W = self._sampled_curvature(self.eta(z), rows)
        H = sub._information(W, single=self.single) * scale
        if self.l2:
            H[np.diag_indices_from(H)] += self._penalty_diagonal()
        return H if E is None else E.T @ H @ E

    def step_hessian(self, z: np.ndarray, E: np.ndarray | None = None) -> np.ndarray:
        """Penalised Hessian for a Newton *step*: formed in float32 when that is safe.

        Used (see ``self.single``) for large problems whose Jacobi-scaled float32 Hessian
        ``Hs`` passes a test of conditioning, ``||Hs^-1|| sqrt(size) SINGLE_LEVEL <= 1e-2``
        (``||Hs^-1|| = 1 / lambda_min(Hs)``, and ``sqrt(size) SINGLE_LEVEL`` is the level of
        the scaled rounding error of a float32 product, measured about 30 times smaller on
        the benchmark problems), so the step is within 1% of the exact Newton step and the
        iteration still contracts fast; the stopping test is on the exact float64 gradient,
        so the answer does not change.  Otherwise (and after one failed test, for good) it
        is the float64 :meth:`hessian`.  The covariance never uses this.
        """
        if not self.single:
            return self.hessian(z, E)
        H = self._information(self._curvature(self.eta(z)), single=True)
        if self.l2:
            H[np.diag_indices_from(H)] += self._penalty_diagonal()
        if E is not None:
            H = E.T @ H @ E
        d = np.sqrt(np.diag(H))
        norm_inv = math.inf
        if np.all(np.isfinite(H)) and np.all(d > 0):
            low = float(np.linalg.eigvalsh(H / np.multiply.outer(d, d))[0])
            norm_inv = 1.0 / low if low > 0 else math.inf
        if not norm_inv * math.sqrt(H.shape[0]) * SINGLE_LEVEL <= 1e-2:
            self.single = False  # too ill-conditioned for float32: float64 from here on
            return self.hessian(z, E)
        return H
