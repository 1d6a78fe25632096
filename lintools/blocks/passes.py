"""What the blocked likelihood fits share: one pass per evaluation, the coordinate maps,
the column centres and scales, the divergence watch and the run; see :mod:`lintools.blocks`.

The fits themselves (:mod:`lintools.blocks.logistic`, :mod:`lintools.blocks.softmax`)
give the kernel of one pass, their coordinates' split into intercepts and slopes, and
their record, which the in-memory family's builder makes.
"""

from __future__ import annotations

import math
from typing import Any, Callable

import numpy as np

from ..support.errors import InputError, SeparationError
from ..support.scaling import SUM_LIMIT, scaled_back, wide_column_error
from ..support.linalg import column_scales, default_rank_tolerance, dependency_sentence, unstandardise
from ..models.driver import Measured, Watch, constant_column_error, convergence_record, ill_conditioned
from ..models.records import Convergence
from ..engine import Evaluation, SingularMatrixError
from ..engine.newton import newton

from .stream import _add
from .sample import Sampled


def weights_scale(part: dict) -> float:
    """The factor by which later passes divide the block weights: the largest weight (see
    :mod:`lintools.support.scaling`); a total weight beyond float64 is refused."""
    if not math.isfinite(part["W"]):
        raise InputError("the weights sum to more than float64 holds (beyond 1.8e308) over the blocks; "
                         "divide all weights by a common factor (the coefficients do not change)")
    return part["wmax"]


def centred_block(X: np.ndarray, c: np.ndarray) -> np.ndarray:
    """``X - c`` for one block (exact for entries within a factor two of ``c``: Sterbenz)."""
    D = np.empty(X.shape)
    np.subtract(X, c, out=D)
    return D


class _PassProblem:
    """What a blocked problem shares: one pass per evaluation, cached by ``z`` with its
    information, a line search whose trials evaluate their points, and the coordinates of
    :class:`lintools.engine.LinearModelProblem` with ``K`` outputs: ``z`` is ``(a; G)``
    (``(p+1, K)`` flattened row by row), the slopes ``B = G / s`` and the intercepts
    ``b = a - c' B``.  Subclasses give ``kernel`` (the per-block evaluation), ``centred``
    (the intercepts of the centred columns and the slopes, as the kernel takes them) and
    ``_store``.  The kernels divide the block weights by ``weight_scale`` (the largest
    weight), so the objective is the caller's divided by it (and the ridge enters as
    ``l2 / weight_scale``); ``weight_total`` is the total of the divided weights (the
    stopping rule is per unit of it)."""

    kernel: Any = None
    #: declared capabilities (lintools.engine.contracts.Problem): every pass reads all rows
    warm_starts = sketches = fast_steps = rounding_known = False

    def __init__(self, run: Any, c: np.ndarray, s: np.ndarray, intercept: bool, lam: float, K: int, a_start: Any,
                 weight_scale: float, weight_total: float) -> None:
        self.run, self.c, self.s = run, c, s
        self.weight_scale, self.weight_total = weight_scale, weight_total
        self.intercept, self.l2, self.first_slope = intercept, lam / weight_scale, int(intercept)
        self.p = c.shape[0]
        self.p1 = self.p + self.first_slope
        self.K = K
        self.size = self.p1 * K
        self.a_start = a_start
        self.cache: dict[bytes, tuple] = {}
        #: a sample of the rows (:mod:`lintools.blocks.sample`), taken by the first pass
        self.sample: dict | None = None

    # ---- coordinates ----------------------------------------------------------------
    def coefficients(self, z: np.ndarray) -> tuple[Any, np.ndarray]:
        """``(b, B)`` in the caller's coordinates."""
        a, beta = self.centred(z)
        return (a - self.c @ beta if self.intercept else a), beta

    def to_original(self, z: np.ndarray) -> np.ndarray:
        """Parameter vector ``(b, B)`` in the caller's coordinates (intercepts first, row by row)."""
        b, beta = self.coefficients(z)
        return np.concatenate([np.atleast_1d(b), np.ravel(beta)]) if self.intercept else np.ravel(beta)

    def theta_from_z_matrix(self) -> np.ndarray:
        return unstandardise(self.c, self.s, self.intercept, self.K)

    def start(self) -> np.ndarray:
        """The intercepts at the best constant (``a_start``), the slopes at zero."""
        z = np.zeros(self.size)
        if self.intercept:
            z[: self.K] = self.a_start
        return z

    # ---- passes ---------------------------------------------------------------------
    def _remember(self, z: np.ndarray, ev: Evaluation, H: np.ndarray, part: dict) -> Evaluation:
        if len(self.cache) > 4:
            self.cache.pop(next(iter(self.cache)))
        self.cache[z.tobytes()] = (ev, 0.5 * H + 0.5 * H.T, part)  # H + H.T could overflow
        return ev

    def _pass(self, z: np.ndarray, step: tuple | None = None) -> dict:
        a, beta = self.centred(z)
        c = self.c if self.intercept else np.zeros(self.p)
        kernel = type(self).kernel if self.sample is not None else Sampled(type(self).kernel)
        part = self.run.reduce(kernel, _add, (a, beta, c, 1.0 / self.s, step, self.weight_scale), pieces=True)
        if "sample" in part:
            self.sample = part.pop("sample")
        return part

    def evaluate(self, z: np.ndarray) -> Evaluation:
        hit = self.cache.get(z.tobytes())
        if hit is not None:
            return hit[0]
        ev = self._store(z, self._pass(z))
        if ev is None:
            raise SingularMatrixError("the linear predictor is not finite")
        return ev

    def fisher_information(self, z: np.ndarray) -> np.ndarray:
        """Penalised information in z (the Hessian of the objective)."""
        self.evaluate(z)
        return self.cache[z.tobytes()][1].copy()

    def hessian(self, z: np.ndarray, E: np.ndarray | None = None) -> np.ndarray:
        H = self.fisher_information(z)
        return H if E is None else E.T @ H @ E

    def line(self, z: np.ndarray, d: np.ndarray) -> "_BlockLine":
        return _BlockLine(self, z, d)

    def runaway(self, z: np.ndarray) -> tuple[int, float]:
        """The runaway rows the pass at ``z`` counted: (count, largest)."""
        part = self.cache[z.tobytes()][2]
        return part["runaway"], part["top"]


class _BlockLine:
    """``F(z + t d) - F(z)``: one pass per trial ``t``, which also evaluates ``z + t d``.

    Shared by the binary and the softmax blocked problems (``centred``, ``_pass``,
    ``_store`` and ``l2`` are all it needs of them)."""

    carries = False  # declared (lintools.engine.contracts.Line): every trial is a pass

    def __init__(self, problem: Any, z: np.ndarray, d: np.ndarray) -> None:
        self.pr, self.z, self.d = problem, z, d

    def change(self, t: float) -> float:
        pr, z, d = self.pr, self.z, self.d
        z_new = z + t * d
        if np.array_equal(z_new, z):
            return 0.0  # the step is below the rounding of z: no move, no change (a stall)
        a0, beta0 = pr.centred(z)
        da, dbeta = pr.centred(d)
        part = pr._pass(z_new, (a0, beta0, da, dbeta, t))
        if not part["finite"] or not math.isfinite(part["change"]):
            return math.inf
        pr._store(z_new, part)
        c = part["change"]
        if pr.l2:
            c += pr.l2 * (t * float(np.sum(beta0 * dbeta)) + 0.5 * t * t * float(np.sum(dbeta * dbeta)))
        return float(c)


class PassWatch(Watch):
    """The in-memory family's divergence watch (``family_watch``, a
    :class:`lintools.models.driver.Watch`) on a blocked problem: its kernels count the
    runaway rows with that watch in every pass, and this one reads the counts of the pass
    at ``z`` and says them in the family's sentence."""

    def __init__(self, problem: _PassProblem, family_watch: type[Watch]) -> None:
        self.problem, self.RUNAWAY = problem, family_watch.RUNAWAY

    def rows(self, z: np.ndarray, ev: Evaluation) -> tuple[int, float]:
        return self.problem.runaway(z)


def solve_passes(problem: _PassProblem, covariance: Callable[[np.ndarray], np.ndarray], family_watch: type[Watch],
                 *, separated: str, exact: str, remedies: str, lam: float, tol: float, max_iter: int,
                 on_iteration: Any, target: Any = None,
                 start: np.ndarray | None = None) -> tuple[Any, np.ndarray, np.ndarray]:
    """Newton on a blocked problem (through ``target``, an affine restriction of it, when
    given) with the family's divergence watch when unpenalised; ``(result, z, covariance)``.

    Rows that run away raise :class:`lintools.SeparationError` (the classes appear
    ``separated``; the exact check, ``exact``, needs all rows at once and is not run on
    blocks; ``remedies`` ends the message); a singular information raises the driver's
    ill-conditioning error."""
    target = problem if target is None else target
    res = newton(target, tol=tol, max_iter=max_iter, on_iteration=on_iteration,
                 monitor=PassWatch(problem, family_watch) if lam == 0 else None, start=start)
    if res.status == "diverging":
        raise SeparationError(
            f"the fit diverges: after {res.iterations} iteration(s) {res.message.split(': ', 1)[1]}: the classes "
            f"appear {separated}, so the maximum-likelihood estimate does not exist (Albert & Anderson 1984). The "
            f"exact check ({exact}) needs all rows at once and is not run on blocks. {remedies}"
        )
    if res.status == "singular":
        raise ill_conditioned(res.message)
    z = target.embed(res.z) if target is not problem else res.z
    try:
        V = covariance(z)
    except SingularMatrixError:
        raise ill_conditioned("the information matrix is singular at the answer") from None
    return res, z, V


def answer(problem: _PassProblem, res: Any, z: np.ndarray, null_deviance: float, n_observations: float, lam: float,
           passes: int) -> tuple[Evaluation, Measured, Convergence]:
    """At the answer ``z``: the evaluation, the likelihood figures in the caller's weights
    (``null_deviance`` in the passes' weights, from the class totals: the intercept-only
    optimum needs no pass) and the convergence record, which counts the passes."""
    ev = problem.evaluate(z)
    part = problem.cache[z.tobytes()][2]
    scale = problem.weight_scale  # the passes' weights are the caller's / scale
    loglik = scaled_back(-float(part["value"]), scale, "log-likelihood")
    dev = -2.0 * loglik  # one label per row: the saturated log-likelihood is 0
    null_dev = scaled_back(null_deviance, scale, "null deviance")
    measured = Measured(loglik, dev, float(n_observations), null_dev, null_dev - dev if lam == 0 else float("nan"))
    conv = convergence_record(res, ev, problem, z, "newton", note=f"; {passes} passes over the blocks")
    return ev, measured, conv


def centres_and_scales(part: dict, intercept: bool, lam: float, names: tuple[str, ...]) -> tuple[np.ndarray, np.ndarray]:
    """Weighted means and standard deviations of the columns (``part`` as
    :func:`lintools.blocks.least_squares.in_caller_units` returns it); constant and aliased columns.

    The spreads come from the unit-scale R factor and are moved to the caller's units
    exactly, so columns of size 1e300 or 1e-300 neither overflow nor underflow."""
    R, mean = part["R_units"], part["mean"]
    p = R.shape[1]
    if intercept and p and lam == 0:
        const = np.flatnonzero(part["lo"] == part["hi"])
        if const.size:
            raise constant_column_error(int(const[0]), names[int(const[0])])
    top = np.max(np.abs(R), axis=0) if R.size else np.zeros(p)
    safe = np.where(top > 0, top, 1.0)
    norms = np.linalg.norm(R / safe, axis=0) * safe  # no overflow or underflow of the squares
    if lam == 0 and p:
        Rs = R / np.where(norms > 0, norms, 1.0)
        msg = dependency_sentence(Rs, norms, names, intercept, default_rank_tolerance(part["n_pos"], p))
        if msg:
            raise InputError(msg)
    c = mean if intercept else np.zeros(p)
    with np.errstate(over="ignore", under="ignore"):
        # without an intercept: the root mean square, as LinearModelProblem
        sd = np.ldexp(norms / math.sqrt(part["W_units"]), part["ez"])
    s = column_scales(sd, c)  # the floor of the in-memory problem (LinearModelProblem)
    # the kernels' sums (X - c)' r: |x - c| <= 2 top and |r| sums to at most W / wmax (the
    # weights divided by the largest), so below SUM_LIMIT (1/8 of float64's largest) no overflow
    top = np.maximum(np.abs(part["hi"]), np.abs(part["lo"]))
    over = np.flatnonzero(~(top <= SUM_LIMIT / (part["W"] / part["wmax"])))
    if over.size:
        j = int(over[0])
        raise wide_column_error(j, names[j], float(top[j]))
    return c, s
