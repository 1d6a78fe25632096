r"""The linear-predictor problem behind every fit: loss, design, penalty, coordinates.

:class:`LinearModelProblem` is the problem for ``eta = offset + b + X beta`` (or, for a
loss with ``K`` outputs, ``eta = offset + 1 b' + X B`` with ``z`` the (p+1, K) array
flattened row by row)::

    F(b, beta) = loss(eta) + l2/2 |beta|^2                      (firth=False)
    F(b, beta) = loss(eta) - 1/2 log det I(b, beta)             (firth=True, Firth 1993)

with ``I = [1 X]' W [1 X]`` the Fisher information.  It works in standardised
coordinates: with centres ``c`` (weighted column means when there is an intercept) and
scales ``s`` (weighted standard deviations),
``z = (a, g)`` with ``beta = g / s`` and ``b = a - c' beta``.  The design is never copied
whole: products with ``X`` go straight to BLAS, and the Hessian is accumulated over
blocks of rows as ``B' B`` with ``B = sqrt(W) [1, (X - c) / s]`` (or from the uncentred
``sqrt(W) X``, centred afterwards, while the means are small against the spreads; see
:mod:`lintools.engine.kernels`).  Large problems also
offer ``warm_start`` (the optimum on a row subsample), ``step_hessian`` (a Hessian formed
in float32 when a test of conditioning allows, for Newton steps only) and carry the line
search's linear predictor to the next point (see :mod:`lintools.engine.newton`).

References
----------
Firth, D. (1993). Bias reduction of maximum likelihood estimates. Biometrika 80, 27-38.
Pilanci, M. & Wainwright, M. J. (2017). Newton sketch: a near linear-time optimization
algorithm with linear-quadratic convergence. SIAM J. Optimization 27, 205-245.
Nocedal, J. & Wright, S. J. (2006). Numerical Optimization, 2nd ed. Springer.
"""

from __future__ import annotations

import copy
import math
from typing import Any, Callable

import numpy as np

from ..support.linalg import solve_lower, transposed_block, unstandardise
from ..support.scaling import SUM_LIMIT
from ..support.threads import ELEMENT_CHUNK, add_up, for_rows
from .kernels import column_moments, uncentred_ok, weighted_gram
from .kernels_multi import PairWeights, multi_output_information
from .samples import sample_rows, take_rows
from .shifted import ShiftedColumns
from .contracts import Loss
from .settings import fast_paths
from .base import EPS, Evaluation, ExtremeSpread, NonFiniteDesign, SingularMatrixError, cholesky

__all__ = ["LinearModelProblem"]

_BLOCK_BYTES = 1 << 25
#: Row blocks of the one-output passes (centring, curvature) are sized to stay in cache.
_CACHE_BYTES = 1 << 21
#: Row blocks of the products X' r.
_PRODUCT_BYTES = 100 * (1 << 16)
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
#: Columns whose weighted spread lies outside this range are standardised block by block
#: before any product of two columns (whose entries would overflow or underflow).
SCALE_RANGE = (2.0**-100, 2.0**100)


class _Line:
    """Changes ``F(z + t d) - F(z)`` and slopes ``d/dt F(z + t d)``; reuses ``eta(z)`` and ``X d``.

    Changes are computed directly (``loss.value_change``), so line searches resolve
    decreases far below the rounding of ``F`` itself.
    """

    #: declared capability (:class:`lintools.engine.contracts.Line`): :meth:`adopt`
    carries = True

    def __init__(self, problem: "LinearModelProblem", z: np.ndarray, d: np.ndarray) -> None:
        self.p, self.z, self.d = problem, z, d
        self._eta0 = problem.eta(z)
        self._deta = problem.eta(d, with_offset=False)
        self.root0 = problem._inverse_root(self.eta0) if problem.firth else None
        self._cache: tuple[float, float, float] | None = None
        #: (t, eta0 + t X d) of the last trial; K-output problems keep only t (their trials
        #: are evaluated one block of rows at a time) and form the sum when it is adopted
        self.trial: tuple[float, Any] | None = None

    @property
    def eta0(self) -> Any:
        """``eta(z)`` (formed again if :meth:`release` dropped it)."""
        if self._eta0 is None:
            self._eta0 = self.p.eta(self.z)
        return self._eta0

    @property
    def deta(self) -> Any:
        """``X d`` (formed again if :meth:`release` dropped it)."""
        if self._deta is None:
            self._deta = self.p.eta(self.d, with_offset=False)
        return self._deta

    def release(self) -> None:
        """Drop ``eta(z)`` and ``X d`` (the problem calls this once the search is over; they
        are formed again if the line is used after all)."""
        self._eta0 = self._deta = None

    def adopt(self, t: float, z_new: np.ndarray) -> None:
        """Hand the problem the linear predictor of the accepted trial ``t`` for ``z_new``."""
        if self.trial is not None and self.trial[0] == t and z_new.shape == self.z.shape:
            eta = self.trial[1]
            if eta is None:  # K outputs: eta0 + t X d, written over X d (no longer needed)
                eta = self.deta
                if t != 1.0:
                    eta *= t
                eta += self.eta0
                self.release()
                self.trial = None
            self.p._carry(z_new, eta)

    def change(self, t: float) -> float:
        return self.p._change(self, t, need_slope=False)[0]

    def change_and_slope(self, t: float) -> tuple[float, float]:
        if self._cache is not None and self._cache[0] == t:
            return self._cache[1], self._cache[2]
        c, slope = self.p._change(self, t, need_slope=True)
        self._cache = (t, c, slope)
        return c, slope


class LinearModelProblem:
    """Loss + linear predictor + penalty, in standardised coordinates (see module doc).

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
    """

    #: declared capabilities (:class:`lintools.engine.contracts.Problem`): warm_start,
    #: sketch_hessian, step_hessian with reuse_hessian, gradient_rounding
    warm_starts = sketches = fast_steps = rounding_known = True

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
        self.X, self.loss, self.intercept = X, loss, bool(intercept)
        self.weight_scale = float(weight_scale)
        self.l2, self.offset, self.firth = float(l2) / self.weight_scale, offset, bool(firth)
        if self.firth and (self.l2 != 0 or loss.outputs != 1):
            raise ValueError("the Jeffreys (Firth) penalty is implemented for one output and l2 = 0")
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
        #: total case weight W (of the loss's weights): the stopping rule is per unit of it.
        #: With Firth's penalty W + k/2 (k parameters): the penalty's gradient sums hat values
        #: whose total is k, so it weighs like k/2 observations whatever the weights' scale
        #: (case weights of 1e-120 leave the penalty to decide the answer, and a rule per
        #: unit of W alone would ask for the penalty's gradient below its rounding)
        self.weight_total = total + (0.5 * self.size / self.weight_scale if self.firth else 0.0)
        c, s, finite = column_moments(X, v, self.rows, self.intercept and centre)
        if not finite:
            raise NonFiniteDesign("the design X has a NaN or infinite entry")
        self.c = c
        #: the weighted spread of each column before constant columns are set to 1
        self.spread = s
        # a column whose spread is rounding noise around its centre is treated as constant
        self.s = np.where((s > 1e-13 * np.abs(self.c)) & (s > 0) & np.isfinite(s), s, 1.0)
        self._check_spreads(total)
        # log |d theta / d z|, and the log det of the information's weight scale (Firth)
        self.log_det_T = -self.K * float(np.sum(np.log(self.s)))
        self.log_det_weights = self.size * math.log(self.weight_scale)
        #: the multiplier of Firth's penalty in the scaled objective F / weight_scale
        self.firth_weight = 1.0 / self.weight_scale
        #: the caller's gradient per standardised (uncentred) column per unit weight: the
        #: stopping rule of problems with parameters held fixed (RestrictedProblem)
        self.unit = np.repeat(np.concatenate([np.ones(self.first_slope), 1.0 / self.s]), self.K) / self.weight_total
        #: columns far from zero against their spread, kept centred (see ShiftedColumns)
        self.shifted = ShiftedColumns(X, self.c, self.s, self.intercept and centre)
        self._last: tuple[Any, Any] | None = None  # (z, eta) of the last evaluation
        self._carried = False  # whether that eta came from a line search
        self._warm = True  # whether warm_start may run (not on its own subsample)
        self._sketch: tuple[np.ndarray, Any, float] | None = None  # rows, sub-problem, scale
        self._line: _Line | None = None  # the last line search (K outputs: its X d is released)
        # float32 step Hessians: no Jeffreys penalty, many rows, and standardised
        # rows bounded well inside float32 range (|x - c| / s <= sqrt(total / v_i) for v_i > 0)
        self.single = False
        #: bound on |x_ij - c_j| / s_j over rows of positive weight: sqrt(total / min weight)
        self.row_bound = math.inf
        if not self.firth and n >= fast_paths().single_min_rows and p:
            vmin = float(v.min()) if n else 0.0
            self.single = bool(vmin > 0 and total / vmin < 1e30)
            if self.single:
                self.row_bound = math.sqrt(total / vmin)
        # curvature passes may centre their accumulated products afterwards (see kernels.py),
        # while the column scales are moderate (else each block is standardised first)
        self.extreme = bool(p) and not bool(np.all((self.s >= SCALE_RANGE[0]) & (self.s <= SCALE_RANGE[1])))
        self.uncentred = bool(p) and uncentred_ok(self.c, self.s) and not self.extreme

    def _check_spreads(self, total: float) -> None:
        """Raise :class:`ExtremeSpread` for the first column whose standardised coordinate
        float64 cannot hold: ``1 / s_j`` overflows (a spread below about 5.6e-309), or with
        a ridge ``l2 / s_j^2`` does (the penalty on the standardised coefficient); or whose
        largest magnitude ``t_j`` times the problem's total weight passes ``SUM_LIMIT``
        (2**1020): the gradient's sums ``sum_i (x_ij - c_j) r_i`` are bounded by ``2 t_j`` times the sum of
        ``|r_i|`` (at most that total, the Firth term included), so below it they cannot
        overflow.  O(p), and a pass over the columns of spread or centre beyond 2**100 only."""
        with np.errstate(over="ignore", divide="ignore"):
            inv = 1.0 / self.s
            bad = ~np.isfinite(inv)
            if self.l2:
                bad |= ~np.isfinite(self.l2 * inv * inv)
        if bad.any():
            j = int(np.argmax(bad))
            s = float(self.s[j])
            bound = None if self.l2 or not total > 0 else (math.log10(4.0 / total) - math.log10(self.weight_scale)
                                                           - 2.0 * math.log10(s))
            raise ExtremeSpread(j, s, bound)
        wide = np.flatnonzero((self.s > SCALE_RANGE[1]) | (np.abs(self.c) > SCALE_RANGE[1]))
        if wide.size and self.n:
            top = np.max(np.abs(self.X[:, wide]), axis=0)
            over = np.flatnonzero(~(top <= SUM_LIMIT / self.weight_total))
            if over.size:
                j = int(wide[over[0]])
                raise ExtremeSpread(j, float(self.s[j]), None, float(top[over[0]]))

    # ---- coordinates ----------------------------------------------------------------
    def _parts(self, z: np.ndarray) -> tuple[Any, np.ndarray]:
        Z = z.reshape(self.p1, self.K) if self.K > 1 else z
        a = Z[0] if self.intercept else (np.zeros(self.K) if self.K > 1 else 0.0)
        return a, Z[self.first_slope :]

    def coefficients(self, z: np.ndarray) -> tuple[Any, np.ndarray]:
        """``(b, beta)`` in the caller's coordinates."""
        a, g = self._parts(z)
        beta = g / (self.s[:, None] if self.K > 1 else self.s)
        return a - self.c @ beta, beta

    def to_original(self, z: np.ndarray) -> np.ndarray:
        """Parameter vector ``(b, beta)`` in the caller's coordinates (intercept first)."""
        b, beta = self.coefficients(z)
        if not self.intercept:
            return np.array(beta, dtype=float).ravel()
        return np.concatenate([np.atleast_1d(b), np.ravel(beta)]) if self.K == 1 else np.vstack([b, beta]).ravel()

    def from_original(self, theta: np.ndarray) -> np.ndarray:
        """Inverse of :meth:`to_original`."""
        T = theta.reshape(self.p1, self.K) if self.K > 1 else np.asarray(theta, dtype=float)
        beta = T[self.first_slope :]
        g = beta * (self.s[:, None] if self.K > 1 else self.s)
        if not self.intercept:
            return np.array(g, dtype=float).ravel()
        a = T[0] + self.c @ beta
        return np.concatenate([np.atleast_1d(a), g]) if self.K == 1 else np.vstack([a, g]).ravel()

    def start(self) -> np.ndarray:
        """Intercept at the best constant (e.g. the logit of the mean), slopes at zero."""
        z = np.zeros(self.size)
        if self.intercept:
            a0 = self.loss.start_intercept(self.offset)
            if self.K > 1:
                z.reshape(self.p1, self.K)[0] = a0
            else:
                z[0] = a0
        return z

    @property
    def reuse_hessian(self) -> bool:
        """Whether Newton may keep a Hessian for the next step (large problems only)."""
        return self.n >= fast_paths().single_min_rows and not self.firth

    def _carry(self, z: np.ndarray, eta: Any) -> None:
        """Remember ``eta`` (from a line search) as the linear predictor at ``z``."""
        if self.K > 1:
            self._forget()
        self._last = ((z.tobytes(), True), eta)
        self._carried = True

    def _forget(self) -> None:
        """K outputs: drop the remembered linear predictor and the loss's results kept at it,
        so that the next ones are not formed while these still hold memory."""
        self._last = None
        if self.loss.row_blocks:
            self.loss.forget()

    def subsample(self, rows: np.ndarray) -> "LinearModelProblem":
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
        if (not self._warm or self.firth or self.n < fast_paths().warm_min_rows or self.p == 0
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
            b, beta, far = self.shifted.split(a, g / (self.s[:, None] if self.K > 1 else self.s), self.c)
        else:
            (b, beta), far = self.coefficients(z), None
        if self.K > 1:
            if with_offset:
                self._forget()
            e = self._products(beta, b, self.offset if with_offset else None, far)
        else:
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

    def _log_det_information(self, eta: Any) -> tuple[float, Any, Any]:
        """``log det I`` in the caller's coordinates and weights, with the scaled Cholesky factors."""
        L, d = cholesky(self._information(self.loss.curvature(eta)))
        logdet = 2.0 * float(np.sum(np.log(np.diag(L))) + np.sum(np.log(d)))
        return logdet - 2.0 * self.log_det_T + self.log_det_weights, L, d

    def _inverse_root(self, eta: Any) -> np.ndarray | None:
        """``Li`` with ``I^{-1} = Li' Li`` at ``eta`` (None when I is singular)."""
        try:
            L, d = cholesky(self._information(self.loss.curvature(eta)))
        except SingularMatrixError:
            return None
        return solve_lower(L, np.diag(1.0 / d))

    def _information_signed(self, dW: np.ndarray) -> np.ndarray:
        """``A' diag(dW) A`` for weights of any sign (one output)."""
        H = np.zeros((self.p1, self.p1))
        for lo, A in self._blocks():
            H += A.T @ (A * dW[lo : lo + A.shape[0], None])
        return 0.5 * (H + H.T)

    def _residual(self, eta: Any, factors: Any = None) -> Any:
        """Derivative of the objective in eta (Firth adds ``-1/(2 s) q dW/deta``, ``s`` the weight scale)."""
        r = self.loss.gradient(eta)
        if self.firth:
            L, d = factors
            r = r - (0.5 * self.firth_weight) * self._leverage_factor(L, d) * self.loss.curvature_slope(eta)
        return r

    def _value_at(self, z: np.ndarray, eta: Any) -> tuple[float, Any]:
        """Objective at ``z`` (with linear predictor ``eta``) and its derivative in eta."""
        if self.K > 1 and not self.firth:
            f, r = self.loss.value_and_gradient(eta)
            return f + self._ridge(z), r
        f = self.loss.value(eta) + self._ridge(z)
        factors = None
        if self.firth:
            logdet, L, d = self._log_det_information(eta)
            f -= 0.5 * self.firth_weight * logdet
            factors = (L, d)
        return f, self._residual(eta, factors)

    def _change(self, line: _Line, t: float, need_slope: bool) -> tuple[float, float]:
        if self.K > 1 and self.loss.row_blocks and not need_slope and not self.firth:
            # one block of rows at a time: neither t X d nor the trial eta is formed whole
            line.trial = (t, None)
            c = self.loss.change_along(line.eta0, line.deta, t)
            if not math.isfinite(c) and c > 0:
                return math.inf, math.nan
            if self.l2:
                _, beta = self.coefficients(line.z)
                _, db = self.coefficients(line.d)
                c += self.l2 * (t * float(np.sum(beta * db)) + 0.5 * t * t * float(np.sum(db * db)))
            return float(c), math.nan
        delta, eta = self._trial(line, t)
        line.trial = (t, eta)
        if eta is None:
            return math.inf, math.nan
        c = self.loss.value_change(line.eta0, delta)
        if self.l2:
            _, beta = self.coefficients(line.z)
            _, db = self.coefficients(line.d)
            c += self.l2 * (t * float(np.sum(beta * db)) + 0.5 * t * t * float(np.sum(db * db)))
        factors = None
        if self.firth:
            if line.root0 is None:
                return math.inf, math.nan
            # log det I(t) - log det I(0) = sum log1p(eig(Li dI Li')), dI = A' diag(dW) A
            dI = self._information_signed(self.loss.curvature_change(line.eta0, delta))
            lam = np.linalg.eigvalsh(line.root0 @ dI @ line.root0.T)
            if lam.size and lam.min() <= -1.0:
                return math.inf, math.nan
            c -= 0.5 * self.firth_weight * float(np.sum(np.log1p(lam)))
            if need_slope:
                try:
                    factors = cholesky(self._information(self.loss.curvature(eta)))
                except SingularMatrixError:
                    return math.inf, math.nan
        if not need_slope:
            return float(c), math.nan
        slope = float(np.sum(self._residual(eta, factors) * line.deta))
        if self.l2:
            slope += self._penalty_slope(line.z + t * line.d, line.d)
        return float(c), slope

    def _trial(self, line: _Line, t: float) -> tuple[np.ndarray, np.ndarray | None]:
        """``(t X d, eta0 + t X d)`` in chunks of rows on the row threads; the second is
        None when it is not finite somewhere."""
        deta, eta0 = line.deta, line.eta0
        delta, eta = np.empty(deta.shape), np.empty(deta.shape)

        def part(lo: int, hi: int) -> bool:
            np.multiply(deta[lo:hi], t, out=delta[lo:hi])
            np.add(eta0[lo:hi], delta[lo:hi], out=eta[lo:hi])
            return bool(np.all(np.isfinite(eta[lo:hi])))

        finite = all(for_rows(part, deta.shape[0], ELEMENT_CHUNK))
        return delta, eta if finite else None

    def evaluate(self, z: np.ndarray, fresh: bool = False) -> Evaluation:
        """Objective, gradient in z and in the caller's coordinates (two passes over X).

        ``eta`` may be the one carried from the line search that found ``z``
        (``Evaluation.fresh`` False); ``fresh=True`` forms it anew as ``X beta + b``."""
        if fresh and self._carried:
            self._last, self._carried = None, False
        if self.K > 1 and self._line is not None:
            self._line.release()
            self._line = None
        eta = self.eta(z)
        carried = self._carried
        if self.firth or self.K > 1:
            # Firth: the value's log det also gives the residual; K outputs: one blocked
            # pass gives the value with the gradient
            f, r = self._value_at(z, eta)
        else:
            r = self._residual(eta)
            f = self._deferred_value(z, eta)
        b, beta = self.coefficients(z)
        Gb = r.sum(axis=0)
        XR = self._transposed_product(r)
        Gbeta = XR + self.l2 * beta if self.l2 else XR
        sc = self.s[:, None] if self.K > 1 else self.s
        centred = self._centred_slopes(r, XR, Gb)
        gz_slopes = (centred + self.l2 * beta if self.l2 else centred) / sc
        if self.intercept:
            original = np.concatenate([np.atleast_1d(Gb), np.ravel(Gbeta)]) if self.K == 1 else np.vstack([Gb, Gbeta]).ravel()
            gz = np.concatenate([np.atleast_1d(Gb), np.ravel(gz_slopes)]) if self.K == 1 else np.vstack([Gb, gz_slopes]).ravel()
        else:
            original, gz = np.ravel(Gbeta).astype(float), np.ravel(gz_slopes).astype(float)
        # the stopping rule: the gradient in the standardised, centred coordinates per unit weight
        return Evaluation(f, gz, original, eta, gz / self.weight_total, fresh=not carried)

    def _product(self, beta: np.ndarray, b: float, offset: np.ndarray | None,
                 far: np.ndarray | None = None) -> np.ndarray:
        """``X beta + b (+ offset)`` for one output (``+ C far`` with the centred copy of the
        far-shifted columns), in chunks of rows on the row threads."""
        X, e, shifted = self.X, np.empty(self.n), self.shifted

        def part(lo: int, hi: int) -> None:
            out = e[lo:hi]
            np.matmul(X[lo:hi], beta, out=out)
            out += b
            if far is not None:
                shifted.add_product(out, lo, hi, far)
            if offset is not None:
                out += offset[lo:hi]

        for_rows(part, self.n, self.block_rows)
        return e

    def _products(self, B: np.ndarray, b: np.ndarray, offset: np.ndarray | None,
                  far: np.ndarray | None = None) -> np.ndarray:
        """``X B + 1 b' (+ offset)`` for K outputs (``+ C far`` as in :meth:`_product`), (n, K)
        stored column by column (the transpose of a (K, n) array: the loss reads it in row
        blocks); in chunks of rows on the row threads."""
        X, Et, shifted = self.X, np.empty((self.K, self.n)), self.shifted

        def part(lo: int, hi: int) -> None:
            out = Et[:, lo:hi]
            np.matmul(B.T, X[lo:hi].T, out=out)
            out += b[:, None]
            if far is not None:
                shifted.add_product(out, lo, hi, far)
            if offset is not None:
                out += offset[lo:hi].T

        for_rows(part, self.n, self.block_rows)
        return Et.T

    def _centred_slopes(self, r: Any, XR: np.ndarray, Gb: Any) -> np.ndarray:
        """``(X - c)' r`` from ``XR = X' r`` and ``Gb = sum r``; the far-shifted columns'
        entries from their centred copy (no cancellation)."""
        out = XR - np.multiply.outer(self.c, Gb)
        if self.shifted:
            out[self.shifted.far] = self.shifted.transposed(r)
        return out

    def _transposed_product(self, r: Any) -> np.ndarray:
        """``X' r``, summed over row blocks of about 6 MB in their order, on the row threads.
        For one output each block is NumPy's own sum of products (``einsum``), measured
        twice as fast as the BLAS matrix-vector product on these long, narrow blocks; for
        K outputs (``r`` is (n, K)) it is one BLAS product."""
        if self.n <= 2 * self.block_rows:
            return self.X.T @ r
        if self.K != 1:
            return add_up(for_rows(lambda lo, hi: self.X[lo:hi].T @ r[lo:hi], self.n, self.block_rows))
        return add_up(for_rows(lambda lo, hi: transposed_block(r[lo:hi], self.X[lo:hi]), self.n, self.block_rows))

    def _deferred_value(self, z: np.ndarray, eta: Any) -> Callable[[], float]:
        z = z.copy()
        return lambda: self.loss.value(eta) + self._ridge(z)

    # ---- curvature ----------------------------------------------------------------------
    def _blocks(self, rows: int | None = None):
        """Rows of the standardised design ``[1, (X - c) / s]`` in blocks (one reused buffer)."""
        rows = self.block if rows is None else rows
        buf = np.empty((min(rows, self.n), self.p1))
        for lo in range(0, self.n, rows):
            Xb = self.X[lo : lo + rows]
            A = buf[: Xb.shape[0]]
            if self.intercept:
                A[:, 0] = 1.0
            np.subtract(Xb, self.c, out=A[:, self.first_slope :])
            A[:, self.first_slope :] /= self.s
            yield lo, A

    def _curvature(self, eta: Any) -> Any:
        """The curvature at ``eta`` for :meth:`_information`: the (n,) IRLS weights for one
        output; for K outputs, with a loss that has ``pair_weights``, the distinct entries
        of the per-row blocks one block of rows at a time (:class:`PairWeights`), so the
        (n, K, K) array is never formed whole (other losses give it whole)."""
        if self.K > 1 and self.loss.row_blocks:
            return PairWeights(self.loss, eta)
        return self.loss.curvature(eta)

    def _unit_scale(self) -> np.ndarray:
        return np.concatenate([np.ones(self.first_slope), 1.0 / self.s])

    def _information(self, W: np.ndarray, single: bool = False) -> np.ndarray:
        """``A' W A`` in z coordinates (no penalty): one BLAS product per block of rows.

        For one output, while every ``|c_j| <= s_j`` (``self.uncentred``), the blocks are
        the uncentred ``sqrt(W) X`` and the centring is applied to the small result
        (:func:`lintools.engine.kernels.weighted_gram`, whose rounding analysis sets that
        limit); otherwise each cache-sized block is ``B = sqrt(W) [1, X - c]`` written into
        one reused buffer, ``B'B`` goes to BLAS, and the column scales ``1/s`` are applied
        once to the (p+1) x (p+1) result.  With ``single`` (the caller checks that the
        standardised rows are bounded, see ``self.single``) the one-output block is the
        standardised ``sqrt(W / max W) [1, (X - c) / s]`` rounded to float32 and ``B'B`` is
        a float32 product, summed over blocks in float64: about 1e-6 relative accuracy, for
        Newton steps only.
        """
        if self.K == 1:
            return self._information_one(W, single)
        return multi_output_information(self, W, single)

    def _information_one(self, W: np.ndarray, single: bool) -> np.ndarray:
        if self.uncentred:
            return weighted_gram(self.X, W, self.c, self.s, self.intercept, self.rows,
                                 single=single, row_bound=self.row_bound)
        n, p1, first_slope, rows = self.n, self.p1, self.first_slope, self.rows
        H = np.zeros((p1, p1))
        sw = np.sqrt(W)
        top = float(sw.max()) if (single and n) else 0.0
        if single and top > 0 and math.isfinite(top):
            rs = sw / top
            inv = 1.0 / self.s
            T = np.empty((min(rows, n), self.p))
            buf = np.empty((min(rows, n), p1), dtype=np.float32)
            for lo in range(0, n, rows):
                Xb = self.X[lo : lo + rows]
                m = Xb.shape[0]
                B, Tb, r = buf[:m], T[:m], rs[lo : lo + m]
                if self.intercept:
                    B[:, 0] = r
                np.subtract(Xb, self.c, out=Tb)
                Tb *= inv
                np.multiply(Tb, r[:, None], out=B[:, first_slope:], casting="same_kind")
                H += B.T @ B
            H *= top * top
            return 0.5 * (H + H.T)
        buf = np.empty((min(rows, n), p1))
        inv = 1.0 / self.s if self.extreme else None  # scales far from 1: standardise first
        for lo in range(0, n, rows):
            Xb = self.X[lo : lo + rows]
            B = buf[: Xb.shape[0]]
            r = sw[lo : lo + Xb.shape[0]]
            if self.intercept:
                B[:, 0] = r
            np.subtract(Xb, self.c, out=B[:, first_slope:])
            if inv is not None:
                B[:, first_slope:] *= inv
            B[:, first_slope:] *= r[:, None]
            H += B.T @ B
        if inv is None:
            u = self._unit_scale()
            H *= np.multiply.outer(u, u)
        return 0.5 * (H + H.T)

    def _leverage_factor(self, L: np.ndarray, d: np.ndarray) -> np.ndarray:
        """``q_i = a_i' I^{-1} a_i`` for the standardised rows ``a_i`` (Firth's hat values / W)."""
        Li = solve_lower(L, np.diag(1.0 / d))  # I^{-1} = Li' Li
        q = np.empty(self.n)
        for lo, A in self._blocks():
            Y = A @ Li.T
            q[lo : lo + A.shape[0]] = np.einsum("ij,ij->i", Y, Y)
        return q

    def _penalty_diagonal(self) -> np.ndarray:
        pen = np.zeros((self.p1, self.K))
        pen[self.first_slope :] = ((self.l2 / self.s) / self.s)[:, None]  # no overflow of s^2
        return pen.ravel()

    def gradient_rounding(self, z: np.ndarray) -> float:
        """Estimated float64 rounding level of ``Evaluation.gradient_norm`` at ``z``.

        ``eps * max_j sum_i |a_ij| (|r_i| + W_i e_i) / (s_j W)`` with ``a_ij = |x_ij| + |c_j|``
        (``|x_ij - c_j|`` for a far-shifted column, which is kept centred), ``r`` the
        derivative in eta, ``W_i`` the curvature, ``e_i`` the size of the terms summed into
        eta, ``s_j`` the column's spread and ``W`` the total weight: the units of the
        stopping rule (one output; NaN otherwise).  Blocked: no copy of X.
        """
        if self.K != 1:
            return math.nan
        eta = self.eta(z)
        r, W = np.abs(self.loss.gradient(eta)), self.loss.curvature(eta)
        a, g = self._parts(z)
        beta = g / self.s
        if self.shifted:
            b, beta, far = self.shifted.split(a, beta, self.c)
        else:
            b, far = a - self.c @ beta, None
        e = np.full(self.n, abs(float(b)))
        if self.offset is not None:
            e += np.abs(self.offset)
        if far is not None:
            e += np.abs(self.shifted.C) @ np.abs(far)
        out = np.zeros(self.p)
        for lo in range(0, self.n, self.block):
            Ab = np.abs(self.X[lo : lo + self.block])
            sl = slice(lo, lo + Ab.shape[0])
            e[sl] += Ab @ np.abs(beta)
            out += Ab.T @ (r[sl] + W[sl] * e[sl])
        first = float(np.sum(r + W * e))
        out += np.abs(self.c) * first
        if far is not None:
            out[self.shifted.far] = np.abs(self.shifted.C).T @ (r + W * e)
        out /= self.s
        level = max(first if self.intercept else 0.0, float(out.max()) if out.size else 0.0)
        return EPS * level / self.weight_total

    def fisher_information(self, z: np.ndarray) -> np.ndarray:
        """Penalised Fisher information ``A'WA + l2 D`` in z (the covariance uses its inverse)."""
        H = self._information(self._curvature(self.eta(z)))
        if self.l2:
            H[np.diag_indices_from(H)] += self._penalty_diagonal()
        return H

    def sketch_hessian(self, z: np.ndarray, E: np.ndarray | None = None) -> np.ndarray | None:
        """Penalised Hessian with the loss part estimated from a fixed row subsample.

        The Newton sketch of Pilanci & Wainwright (2017) in a simple form: a fixed
        sample of the rows (``sample_rows``: random runs of consecutive rows, a fixed
        seed, copied once, so fits are reproducible), their curvature scaled by the ratio
        of total to sampled row weight.  Cost: ``m / n`` of :meth:`hessian`.
        Returns None for problems too small to gain from it (``n < FastPaths.sketch_min_rows``, or no
        slopes: an intercept-only model, such as the null model of a fit with an offset) and
        for the Jeffreys penalty.  The solver uses it only while far from the optimum; the
        last iterations and the covariance use the exact Hessian.
        """
        if self.firth or self.n < fast_paths().sketch_min_rows or self.p == 0:
            return None
        if self._sketch is not None and self.K > 1 and self._sketch[1].rows32 and not self.single:
            self._sketch = None  # float32 rows were kept for float32 products: keep float64 ones now
        if self._sketch is None:
            m = min(self.n, max(SKETCH_PER_PARAMETER * self.size, self.n // SKETCH_FRACTION))
            rows = sample_rows(self.n, m, SKETCH_SEED)
            sub = copy.copy(self)
            m = int(rows.size)
            sub.n, sub._last, sub._sketch, sub._line, sub.rows32 = m, None, None, None, False
            if self.K > 1 and self.single:
                # the sampled rows kept standardised and rounded to float32, as the float32
                # curvature pass would round them (centre 0, scale 1): half the memory
                sub.X = np.empty((m, self.p), dtype=np.float32)
                inv = 1.0 / self.s
                for a in range(0, m, 1024):
                    Xb = self.X[rows[a : a + 1024]]
                    Xb -= self.c
                    np.multiply(Xb, inv, out=sub.X[a : a + Xb.shape[0]], casting="same_kind")
                del Xb
                sub.c, sub.s, sub.rows32 = np.zeros(self.p), np.ones(self.p), True
            else:
                sub.X = take_rows(self.X, rows)
            v = self.loss.row_weights()
            sub_total = float(v[rows].sum())
            self._sketch = (rows, sub, float(v.sum()) / sub_total if sub_total > 0 else 0.0)
        rows, sub, scale = self._sketch
        if scale == 0.0:
            return None
        eta = self.eta(z)
        if self.K > 1 and self.loss.row_blocks:
            W: Any = PairWeights(self.loss, eta, rows)  # formed one block of the sampled rows at a time
        elif self.loss.row_blocks:
            W = self.loss.curvature_rows(eta, rows)
        else:
            W = self.loss.curvature(eta)[rows]
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

    def hessian(self, z: np.ndarray, E: np.ndarray | None = None) -> np.ndarray:
        """Penalised Hessian in z (projected to ``E' H E`` when ``E`` is given).

        For the Jeffreys (Firth) penalty this is the exact Hessian of
        ``loss - 1/2 log det I`` when it (projected) is positive definite, else the Fisher
        information (the Fisher-scoring step of Heinze & Schemper 2002).
        """
        if not self.firth:
            H = self.fisher_information(z)
            return H if E is None else E.T @ H @ E
        eta = self.eta(z)
        info = self._information(self.loss.curvature(eta))
        exact = self._firth_hessian(eta, info)
        if E is not None:
            info, exact = E.T @ info @ E, E.T @ exact @ E
        try:
            cholesky(exact)
        except SingularMatrixError:
            return info
        return exact

    def _firth_hessian(self, eta: Any, info: np.ndarray) -> np.ndarray:
        r"""Exact Hessian of ``loss - 1/2 log det I`` with ``I = A' W A``.

        :math:`\nabla^2 = I - \tfrac12 A'\,\mathrm{diag}(q W'')\,A + \tfrac12 N N'`, with
        :math:`q_i = a_i' I^{-1} a_i`, :math:`N = \sum_i W'_i a_i\,\mathrm{vec}(y_i y_i')'` and
        :math:`y_i = L^{-1} a_i` (``I = L L'``); the last term is
        :math:`\mathrm{tr}(I^{-1}\partial_j I\, I^{-1}\partial_k I)`.  Cost: ``n p^3``.
        """
        L, d = cholesky(info)
        Li = solve_lower(L, np.diag(1.0 / d))
        W1, W2 = self.loss.curvature_slope(eta), self.loss.curvature_second(eta)
        k = self.p1
        T1 = np.zeros((k, k))
        N = np.zeros((k, k * k))
        rows = max(64, _BLOCK_BYTES // (8 * max(k * k, 1)))
        for lo in range(0, self.n, rows):
            hi = min(self.n, lo + rows)
            A = np.empty((hi - lo, k))
            if self.intercept:
                A[:, 0] = 1.0
            np.subtract(self.X[lo:hi], self.c, out=A[:, self.first_slope :])
            A[:, self.first_slope :] /= self.s
            Y = A @ Li.T
            q = np.einsum("ij,ij->i", Y, Y)
            T1 += A.T @ (A * (q * W2[lo:hi])[:, None])
            N += (A * W1[lo:hi, None]).T @ np.einsum("ij,ik->ijk", Y, Y).reshape(hi - lo, k * k)
        H = info + (0.5 * self.firth_weight) * (N @ N.T - T1)
        return 0.5 * (H + H.T)

    def hessian_vector(self, z: np.ndarray, v: np.ndarray) -> np.ndarray:
        """Penalised Hessian (Firth: Fisher information) times ``v``, without forming it."""
        eta = self.eta(z)
        u = self.loss.hessian_vector(eta, self.eta(v, with_offset=False))
        Gb = u.sum(axis=0)
        sc = self.s[:, None] if self.K > 1 else self.s
        Gs = self._centred_slopes(u, self.X.T @ u, Gb) / sc
        out = np.concatenate([np.atleast_1d(Gb), np.ravel(Gs)]) if self.K == 1 else np.vstack([Gb, Gs]).ravel()
        if not self.intercept:
            out = np.ravel(Gs)
        return out + self._penalty_diagonal() * v

    def line(self, z: np.ndarray, d: np.ndarray) -> _Line:
        """The objective along ``z + t d``."""
        if self.K > 1:
            if self._line is not None:
                self._line.release()  # the last search is over: its X d goes first
            self._line = _Line(self, z, d)
            return self._line
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
        return np.kron(M, np.eye(self.K)) if self.K > 1 else M

    def theta_from_z_matrix(self) -> np.ndarray:
        """The matrix T with ``theta = T z``."""
        return unstandardise(self.c, self.s, self.intercept, self.K)
