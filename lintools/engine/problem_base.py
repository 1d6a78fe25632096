"""The part of :class:`lintools.engine.problem.LinearModelProblem` shared by every variant:
the design, its standardisation and centring, the coordinate maps, the linear predictor,
the line search, the gradient and the curvature passes of the design, and the shortcuts of
large problems (see :mod:`lintools.engine.problem` for the objective and the references).

What differs with the number of outputs and with Firth's penalty is decided once, when
the problem is made: ``LinearModelProblem(...)`` returns an instance of the variant for
its loss and penalty (:mod:`lintools.engine.problem_one`, :mod:`lintools.engine.problem_multi`,
:mod:`lintools.engine.problem_firth`), each of which fills in the hooks marked below.
"""

from __future__ import annotations

import math
from typing import Any, ClassVar

import numpy as np

from ..support.linalg import unstandardise
from .base import Evaluation, NonFiniteDesign
from .contracts import Loss
from .kernels import column_moments, uncentred_ok
from .problem_fast import LargeProblemPaths
from .problem_line import _Line
from .problem_passes import SCALE_RANGE, DesignPasses
from .settings import fast_paths
from .shifted import ShiftedColumns

__all__ = ["LinearModelProblem"]

_BLOCK_BYTES = 1 << 25
#: Row blocks of the one-output passes (centring, curvature) are sized to stay in cache.
_CACHE_BYTES = 1 << 21
#: Row blocks of the products X' r.
_PRODUCT_BYTES = 100 * (1 << 16)


class LinearModelProblem(DesignPasses, LargeProblemPaths):
    """Loss + linear predictor + penalty, in standardised coordinates (see :mod:`lintools.engine.problem`).

    Parameters
    ----------
    X : ndarray (n, p)
        Design without the intercept column (not copied, not modified).
    loss : loss object (see :mod:`lintools.engine.losses`)
    intercept : bool
        Fit an unpenalised intercept.
    l2 : float
        Ridge strength on the slopes.
    offset : ndarray or None
        Known part of the linear predictor.
    firth : bool
        Firth's penalty ``-1/2 log det I`` instead of the ridge (``l2`` must be 0).
    centre : bool
        Centre the columns at their weighted means (with an intercept; default True).
    weight_scale : float
        The factor ``s`` by which the caller divided the loss's case weights (their
        largest, see :mod:`lintools.support.scaling`).  The problem then minimises ``F / s``:
        the ridge enters as ``l2 / s``, Firth's penalty as
        ``-1/(2 s) log det I`` with ``I`` the information in the caller's weights; its
        values are ``F / s``, its gradients and Hessians those of ``F / s``.  The solvers
        report objectives times ``s`` (the caller's); the fronts scale every
        weight-proportional output back.

    ``LinearModelProblem(...)`` returns the variant for the loss and the penalty
    (:class:`OneOutputProblem`, :class:`MultiOutputProblem`, :class:`FirthProblem`), so
    that what depends on them is decided here, once, and not in every method.
    """

    #: declared capabilities (:class:`lintools.engine.contracts.Problem`): warm_start,
    #: sketch_hessian, step_hessian with reuse_hessian, gradient_rounding
    warm_starts = sketches = fast_steps = rounding_known = True

    #: Firth's penalty (declared by the variant)
    firth: ClassVar[bool] = False
    #: the variant for each kind of problem ("one", "several" outputs, "firth"), filled in
    #: by the variants' classes as they are defined
    variants: ClassVar[dict[str, type]] = {}

    def __init_subclass__(cls, variant: str | None = None, **kwargs: Any) -> None:
        super().__init_subclass__(**kwargs)
        if variant is not None:
            LinearModelProblem.variants[variant] = cls

    def __new__(cls, X: Any = None, loss: Any = None, **settings: Any) -> "LinearModelProblem":
        """``LinearModelProblem(...)`` makes the variant for the loss's outputs and the penalty."""
        if cls is LinearModelProblem:
            kind = "firth" if settings.get("firth") else ("several" if int(loss.outputs) > 1 else "one")
            cls = LinearModelProblem.variants[kind]
        return super().__new__(cls)

    def __init__(
        self,
        X: np.ndarray,
        loss: Loss,
        *,
        intercept: bool = True,
        l2: float = 0.0,
        offset: np.ndarray | None = None,
        firth: bool = False,
        centre: bool = True,
        weight_scale: float = 1.0,
    ) -> None:
        if bool(firth) != self.firth:
            raise ValueError(f"a {type(self).__name__} has the wrong penalty; make problems with "
                             "LinearModelProblem(...), which chooses the variant for the penalty")
        self.X, self.loss, self.intercept = X, loss, bool(intercept)
        self.weight_scale = float(weight_scale)
        self.l2, self.offset = float(l2) / self.weight_scale, offset
        n, p = X.shape
        self.n, self.p, self.K = n, p, int(loss.outputs)
        self.first_slope = int(self.intercept)
        self.p1 = p + self.first_slope
        self.size = self.p1 * self.K
        self.block = max(256, _BLOCK_BYTES // (8 * max(self.p1, 1)))
        self.rows = max(256, _CACHE_BYTES // (8 * max(self.p1, 1)))  # cache-sized row blocks
        self.block_rows = max(1024, _PRODUCT_BYTES // (8 * max(p, 1)))  # blocks of X' r
        v = loss.row_weights()
        total = float(v.sum())
        #: total case weight W (of the loss's weights): the stopping rule is per unit of it
        #: (with Firth's penalty W + k/2, see :meth:`FirthProblem._penalty_weight`)
        self.weight_total = total + self._penalty_weight()
        c, s, finite = column_moments(X, v, self.rows, self.intercept and centre)
        if not finite:
            raise NonFiniteDesign("the design X has a NaN or infinite entry")
        self.c = c
        #: the weighted spread of each column before constant columns are set to 1
        self.spread = s
        # a column whose spread is rounding noise around its centre is treated as constant
        self.s = np.where((s > 1e-13 * np.abs(self.c)) & (s > 0) & np.isfinite(s), s, 1.0)
        self._check_spreads(total)
        #: stopping rule of problems with parameters held fixed (RestrictedProblem)
        self.unit = np.repeat(np.concatenate([np.ones(self.first_slope), 1.0 / self.s]), self.K) / self.weight_total
        #: columns far from zero against their spread, kept centred (see ShiftedColumns)
        self.shifted = ShiftedColumns(X, self.c, self.s, self.intercept and centre)
        self._last: tuple[Any, Any] | None = None  # (z, eta) of the last evaluation
        self._carried = False  # whether that eta came from a line search
        self._warm = True  # whether warm_start may run (not on its own subsample)
        self._sketch: tuple[np.ndarray, Any, float] | None = None  # rows, sub-problem, scale
        self._line: _Line | None = None  # the last line search (kept by K-output problems only)
        # float32 step Hessians: declared (not with Firth's penalty), many rows, and standardised
        # rows bounded well inside float32 range (|x - c| / s <= sqrt(total / v_i) for v_i > 0)
        self.single = False
        #: bound on |x_ij - c_j| / s_j over rows of positive weight: sqrt(total / min weight)
        self.row_bound = math.inf
        if self.fast_steps and n >= fast_paths().single_min_rows and p:
            vmin = float(v.min()) if n else 0.0
            self.single = bool(vmin > 0 and total / vmin < 1e30)
            if self.single:
                self.row_bound = math.sqrt(total / vmin)
        # curvature passes may centre their accumulated products afterwards (see kernels.py),
        # while the column scales are moderate (else each block is standardised first)
        self.extreme = bool(p) and not bool(np.all((self.s >= SCALE_RANGE[0]) & (self.s <= SCALE_RANGE[1])))
        self.uncentred = bool(p) and uncentred_ok(self.c, self.s) and not self.extreme

    # ---- hooks of the variants ----------------------------------------------------------
    def _penalty_weight(self) -> float:
        """What the penalty adds to the total weight of the stopping rule (0: none)."""
        return 0.0

    def _matrix(self, z: np.ndarray) -> Any:
        """``z`` as (p+1,) for one output, (p+1, K) for K."""
        raise NotImplementedError

    def _zero_intercept(self) -> Any:
        """The intercept part of a problem without an intercept."""
        raise NotImplementedError

    def _scale(self) -> np.ndarray:
        """The column scales ``s`` shaped to divide the slopes of :meth:`_matrix`."""
        raise NotImplementedError

    def _join(self, first: Any, slopes: np.ndarray) -> np.ndarray:
        """The flat vector of an intercept part and a slope part, in the order of ``z``."""
        raise NotImplementedError

    def _product(self, beta: np.ndarray, b: Any, offset: np.ndarray | None,
                 far: np.ndarray | None = None) -> np.ndarray:
        """``X beta + b (+ offset)`` (and the far-shifted columns' part)."""
        raise NotImplementedError

    def _rows_product(self, r: Any, lo: int, hi: int) -> np.ndarray:
        """``X[lo:hi]' r[lo:hi]``."""
        raise NotImplementedError

    def _value_and_residual(self, z: np.ndarray, eta: Any) -> tuple[Any, Any]:
        """The objective at ``z`` (a float or a deferred callable) and its derivative in eta."""
        raise NotImplementedError

    def _information(self, W: Any, single: bool = False) -> np.ndarray:
        """``A' W A`` in z coordinates (no penalty)."""
        raise NotImplementedError

    def _curvature(self, eta: Any) -> Any:
        """The curvature at ``eta`` for :meth:`_information`."""
        return self.loss.curvature(eta)

    def _forget(self) -> None:
        """Drop what is remembered at the last linear predictor before a new one is formed
        (nothing for one output)."""

    # ---- coordinates ----------------------------------------------------------------
    def _parts(self, z: np.ndarray) -> tuple[Any, np.ndarray]:
        Z = self._matrix(z)
        a = Z[0] if self.intercept else self._zero_intercept()
        return a, Z[self.first_slope :]

    def coefficients(self, z: np.ndarray) -> tuple[Any, np.ndarray]:
        """``(b, beta)`` in the caller's coordinates."""
        a, g = self._parts(z)
        beta = g / self._scale()
        return a - self.c @ beta, beta

    def to_original(self, z: np.ndarray) -> np.ndarray:
        """Parameter vector ``(b, beta)`` in the caller's coordinates (intercept first)."""
        b, beta = self.coefficients(z)
        if not self.intercept:
            return np.array(beta, dtype=float).ravel()
        return self._join(b, beta)

    def from_original(self, theta: np.ndarray) -> np.ndarray:
        """Inverse of :meth:`to_original`."""
        T = self._matrix(np.asarray(theta, dtype=float))
        beta = T[self.first_slope :]
        g = beta * self._scale()
        if not self.intercept:
            return np.array(g, dtype=float).ravel()
        a = T[0] + self.c @ beta
        return self._join(a, g)

    def start(self) -> np.ndarray:
        """Intercept at the best constant (e.g. the logit of the mean), slopes at zero."""
        z = np.zeros(self.size)
        if self.intercept:
            self._matrix(z)[0] = self.loss.start_intercept(self.offset)
        return z

    def _carry(self, z: np.ndarray, eta: Any) -> None:
        """Remember ``eta`` (from a line search) as the linear predictor at ``z``."""
        self._forget()
        self._last = ((z.tobytes(), True), eta)
        self._carried = True

    def eta(self, z: np.ndarray, with_offset: bool = True) -> Any:
        """Linear predictor at ``z`` (one product with X; the last one is remembered).

        Far-shifted columns enter through their centred copy (:mod:`lintools.engine.shifted`)."""
        key = (z.tobytes(), with_offset)
        if self._last is not None and self._last[0] == key:
            return self._last[1]
        if with_offset:
            self._carried = False
        if self.shifted:
            a, g = self._parts(z)
            b, beta, far = self.shifted.split(a, g / self._scale(), self.c)
        else:
            (b, beta), far = self.coefficients(z), None
        if with_offset:
            self._forget()
        e = self._product(beta, b, self.offset if with_offset else None, far)
        if with_offset:
            self._last = (key, e)
        return e

    # ---- objective --------------------------------------------------------------------
    def _ridge(self, z: np.ndarray) -> float:
        if self.l2 == 0:
            return 0.0
        _, beta = self.coefficients(z)
        return 0.5 * self.l2 * float(np.sum(beta * beta))

    def _penalty_slope(self, z: np.ndarray, d: np.ndarray) -> float:
        if self.l2 == 0:
            return 0.0
        _, beta = self.coefficients(z)
        _, dbeta = self.coefficients(d)
        return self.l2 * float(np.sum(beta * dbeta))

    def _ridge_change(self, line: _Line, t: float) -> float:
        """The ridge's change along the line (``l2 != 0``)."""
        _, beta = self.coefficients(line.z)
        _, db = self.coefficients(line.d)
        return self.l2 * (t * float(np.sum(beta * db)) + 0.5 * t * t * float(np.sum(db * db)))

    def _residual(self, eta: Any, factors: Any = None) -> Any:
        """Derivative of the objective in eta (``factors``: see the Firth problem)."""
        return self.loss.gradient(eta)

    def _change(self, line: _Line, t: float, need_slope: bool) -> tuple[float, float]:
        delta, eta = self._trial(line, t)
        line.trial = (t, eta)
        if eta is None:
            return math.inf, math.nan
        c = self.loss.value_change(line.eta0, delta)
        if self.l2:
            c += self._ridge_change(line, t)
        return self._finish_change(line, t, delta, eta, c, need_slope)

    def _finish_change(self, line: _Line, t: float, delta: Any, eta: Any, c: float, need_slope: bool,
                       factors: Any = None) -> tuple[float, float]:
        """The change ``c`` and, when asked, the slope at the trial ``eta``."""
        if not need_slope:
            return float(c), math.nan
        slope = float(np.sum(self._residual(eta, factors) * line.deta))
        if self.l2:
            slope += self._penalty_slope(line.z + t * line.d, line.d)
        return float(c), slope

    def evaluate(self, z: np.ndarray, fresh: bool = False) -> Evaluation:
        """Objective, gradient in z and in the caller's coordinates (two passes over X).

        ``eta`` may be the one carried from the line search that found ``z``
        (``Evaluation.fresh`` False); ``fresh=True`` forms it anew as ``X beta + b``."""
        if fresh and self._carried:
            self._last, self._carried = None, False
        if self._line is not None:
            self._line.release()
            self._line = None
        eta = self.eta(z)
        carried = self._carried
        f, r = self._value_and_residual(z, eta)
        b, beta = self.coefficients(z)
        Gb = r.sum(axis=0)
        XR = self._transposed_product(r)
        Gbeta = XR + self.l2 * beta if self.l2 else XR
        centred = self._centred_slopes(r, XR, Gb)
        gz_slopes = (centred + self.l2 * beta if self.l2 else centred) / self._scale()
        if self.intercept:
            original, gz = self._join(Gb, Gbeta), self._join(Gb, gz_slopes)
        else:
            original, gz = np.ravel(Gbeta).astype(float), np.ravel(gz_slopes).astype(float)
        # the stopping rule: the gradient in the standardised, centred coordinates per unit weight
        return Evaluation(f, gz, original, eta, gz / self.weight_total, fresh=not carried)

    # ---- curvature ----------------------------------------------------------------------
    def fisher_information(self, z: np.ndarray) -> np.ndarray:
        """Penalised Fisher information ``A'WA + l2 D`` in z (the covariance uses its inverse)."""
        H = self._information(self._curvature(self.eta(z)))
        if self.l2:
            H[np.diag_indices_from(H)] += self._penalty_diagonal()
        return H

    def hessian(self, z: np.ndarray, E: np.ndarray | None = None) -> np.ndarray:
        """Penalised Hessian in z (projected to ``E' H E`` when ``E`` is given)."""
        H = self.fisher_information(z)
        return H if E is None else E.T @ H @ E

    def hessian_vector(self, z: np.ndarray, v: np.ndarray) -> np.ndarray:
        """Penalised Hessian (Firth: Fisher information) times ``v``, without forming it."""
        eta = self.eta(z)
        u = self.loss.hessian_vector(eta, self.eta(v, with_offset=False))
        Gb = u.sum(axis=0)
        Gs = self._centred_slopes(u, self.X.T @ u, Gb) / self._scale()
        out = self._join(Gb, Gs) if self.intercept else np.ravel(Gs)
        return out + self._penalty_diagonal() * v

    def line(self, z: np.ndarray, d: np.ndarray) -> _Line:
        """The objective along ``z + t d``."""
        return _Line(self, z, d)

    def information_original(self, z: np.ndarray) -> np.ndarray:
        """Penalised information (Hessian) in the caller's coordinates, intercept first."""
        Hz = self.hessian(z)
        Tinv = self.z_from_theta_matrix()
        return Tinv.T @ Hz @ Tinv

    def z_from_theta_matrix(self) -> np.ndarray:
        """The matrix M with ``z = M theta`` (theta in the caller's coordinates)."""
        M = np.zeros((self.p1, self.p1))
        M[self.first_slope :, self.first_slope :] = np.diag(self.s)
        if self.intercept:
            M[0, 0] = 1.0
            M[0, 1:] = self.c
        return np.kron(M, np.eye(self.K))  # M itself for one output (a product by 1)

    def theta_from_z_matrix(self) -> np.ndarray:
        """The matrix T with ``theta = T z``."""
        return unstandardise(self.c, self.s, self.intercept, self.K)
