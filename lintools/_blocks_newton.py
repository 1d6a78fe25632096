"""Logistic regression over row blocks, one pass per Newton evaluation; see :mod:`lintools.blocks`."""

from __future__ import annotations

import math
from typing import Any, Callable, Sequence

import numpy as np

from ._errors import InputError, LintoolsError, SeparationError
from ._records import LogisticFit
from ._validate import check_names
from .inference import covariance, likelihood_fields
from .linalg import default_rank_tolerance, dependency_sentence, unstandardise
from .logistic import ETA_LIMIT, convergence_record, check_fit_settings
from .losses import BinomialLoss
from .solvers import Evaluation, IterationRecord, SingularMatrixError
from .solvers.newton import newton

from ._block_stream import _add, _check_two, _positive_rows, _runner
from ._blocks_tsqr import _factor, _merge_factors


def _design_kernel(X: np.ndarray, labels: dict, w: np.ndarray | None, intercept: bool) -> dict:
    """Pass 1 of the logistic fit: labels, and the R factor of the weighted centred X."""
    n_rows = X.shape[0]
    Xp, _, wp = _positive_rows(X, None, w)
    out = {"n_pos": Xp.shape[0], "n_rows": n_rows, "labels": labels}
    if Xp.shape[0]:
        out["lo"], out["hi"] = Xp.min(axis=0), Xp.max(axis=0)
        out.update(_factor(np.array(Xp), wp, intercept))  # a copy: _factor works in place and blocks are read-only views
    return out


def _evaluation_kernel(X: np.ndarray, y01: np.ndarray, w: np.ndarray | None, b: float, beta: np.ndarray,
                       c: np.ndarray, step: tuple | None) -> dict:
    """Objective, gradient, information (unscaled) and runaway rows at ``(b, beta)``.

    ``step = (b0, beta0, db, dbeta, t)`` adds ``value(eta0 + t deta) - value(eta0)``.
    """
    loss = BinomialLoss(y01, None, w)
    eta = X @ beta + b
    out = {"finite": bool(np.all(np.isfinite(eta)))}
    if step is not None:
        b0, beta0, db, dbeta, t = step
        eta0 = X @ beta0 + b0
        out["change"] = loss.value_change(eta0, t * (X @ dbeta + db)) if out["finite"] else math.inf
    if not out["finite"]:
        return out
    value, r = loss.value_and_gradient(eta)
    W = loss.curvature(eta)
    sw = np.sqrt(W)
    B = np.empty((X.shape[0], X.shape[1] + 1))
    B[:, 0] = sw
    np.subtract(X, c, out=B[:, 1:])
    B[:, 1:] *= sw[:, None]
    live = loss.row_weights() > 0
    hit = live & (((eta > ETA_LIMIT) & (y01 == 1)) | ((eta < -ETA_LIMIT) & (y01 == 0)))
    out.update(value=value, gb=float(r.sum()), gx=X.T @ r, H=B.T @ B,
               runaway=int(hit.sum()), top=float(np.max(np.abs(eta[hit]))) if hit.any() else 0.0)
    return out


class _PassProblem:
    """What a blocked problem shares: one pass per evaluation, cached by ``z`` with its
    information, and a line search whose trials evaluate their points.  Subclasses give
    ``kernel`` (the per-block evaluation), ``coefficients`` and ``_store``."""

    kernel: Any = None

    def _remember(self, z: np.ndarray, ev: Evaluation, H: np.ndarray, part: dict) -> Evaluation:
        if len(self.cache) > 4:
            self.cache.pop(next(iter(self.cache)))
        self.cache[z.tobytes()] = (ev, 0.5 * H + 0.5 * H.T, part)  # H + H.T could overflow
        return ev

    def _pass(self, z: np.ndarray, step: tuple | None = None) -> dict:
        b, beta = self.coefficients(z)
        c = self.c if self.intercept else np.zeros(self.p)
        return self.run.reduce(type(self).kernel, _add, (b, beta, c, step))

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

    def line(self, z: np.ndarray, d: np.ndarray) -> "_BlockLine":
        return _BlockLine(self, z, d)

    def runaway(self, z: np.ndarray) -> tuple[int, float]:
        part = self.cache[z.tobytes()][2]
        return part["runaway"], part["top"]


class _BlockProblem(_PassProblem):
    """The logistic objective as a solver problem whose every evaluation is one pass.

    Coordinates as in :class:`lintools.solvers.LinearModelProblem`: ``z = (a, g)`` with
    ``beta = g / s`` and ``b = a - c' beta``.  The information is that of the standardised
    design ``[1, (X - c) / s]``; evaluations (with their information) are cached by ``z``,
    and a line-search trial evaluates its point, so an accepted step costs no extra pass.
    """

    kernel = staticmethod(_evaluation_kernel)

    def __init__(self, run: Any, c: np.ndarray, s: np.ndarray, intercept: bool, lam: float, b_start: float) -> None:
        self.run, self.c, self.s = run, c, s
        self.intercept, self.l2, self.off = intercept, lam, int(intercept)
        self.p = c.shape[0]
        self.size = self.p + self.off
        self.b_start = b_start
        self.cache: dict[bytes, tuple] = {}

    def coefficients(self, z: np.ndarray) -> tuple[float, np.ndarray]:
        beta = z[self.off :] / self.s
        a = z[0] if self.intercept else 0.0
        return (a - float(self.c @ beta)) if self.intercept else 0.0, beta

    def to_original(self, z: np.ndarray) -> np.ndarray:
        b, beta = self.coefficients(z)
        return np.concatenate([[b], beta]) if self.intercept else beta.copy()

    def theta_from_z_matrix(self) -> np.ndarray:
        return unstandardise(self.c, self.s, self.intercept)

    def start(self) -> np.ndarray:
        z = np.zeros(self.size)
        if self.intercept:
            z[0] = self.b_start
        return z

    def _store(self, z: np.ndarray, part: dict) -> Evaluation | None:
        if not part["finite"]:
            return None
        b, beta = self.coefficients(z)
        Gbeta = part["gx"] + self.l2 * beta
        Gb = part["gb"]
        gz = (Gbeta - self.c * Gb) / self.s if self.intercept else Gbeta / self.s
        original = np.concatenate([[Gb], Gbeta]) if self.intercept else Gbeta
        if self.intercept:
            gz = np.concatenate([[Gb], gz])
            u = np.concatenate([[1.0], 1.0 / self.s])
            H = part["H"] * np.multiply.outer(u, u)
        else:
            u = 1.0 / self.s
            H = part["H"][1:, 1:] * np.multiply.outer(u, u)
        slopes = np.arange(self.off, self.size)
        H[slopes, slopes] += self.l2 / self.s**2
        value = part["value"] + 0.5 * self.l2 * float(beta @ beta)
        unit = np.concatenate([[1.0], 1.0 / self.s]) if self.intercept else 1.0 / self.s
        ev = Evaluation(float(value), gz, original, None, unit)  # the in-memory, scale-free stopping rule
        return self._remember(z, ev, H, part)

    def hessian(self, z: np.ndarray) -> np.ndarray:
        return self.fisher_information(z)


class _BlockLine:
    """``F(z + t d) - F(z)``: one pass per trial ``t``, which also evaluates ``z + t d``.

    Shared by the binary and the softmax blocked problems (``coefficients``, ``_pass``,
    ``_store`` and ``l2`` are all it needs of them)."""

    def __init__(self, problem: Any, z: np.ndarray, d: np.ndarray) -> None:
        self.pr, self.z, self.d = problem, z, d

    def change(self, t: float) -> float:
        pr, z, d = self.pr, self.z, self.d
        z_new = z + t * d
        if np.array_equal(z_new, z):
            return 0.0  # the step is below the rounding of z: no move, no change (a stall)
        b0, beta0 = pr.coefficients(z)
        db, dbeta = pr.coefficients(d)
        part = pr._pass(z_new, (b0, beta0, db, dbeta, t))
        if not part["finite"] or not math.isfinite(part["change"]):
            return math.inf
        pr._store(z_new, part)
        c = part["change"]
        if pr.l2:
            c += pr.l2 * (t * float(np.sum(beta0 * dbeta)) + 0.5 * t * t * float(np.sum(dbeta * dbeta)))
        return float(c)


def logistic_blocks(
    source: Callable[[], Any] | None = None,
    *,
    X: Any = None,
    y: Any = None,
    weights: Any = None,
    intercept: bool = True,
    l2: float = 0.0,
    tol: float = 1e-10,
    max_iter: int = 100,
    names: Sequence[str] | None = None,
    on_iteration: Callable[[IterationRecord], Any] | None = None,
) -> LogisticFit:
    r"""Binary logistic regression over row blocks; the record of :func:`lintools.logistic`.

    .. math::

        \min_{b,\beta}\; -\sum_i w_i\,[\,y_i\log\mu_i + (1 - y_i)\log(1-\mu_i)\,]
        + \tfrac{\lambda}{2}\lVert\beta\rVert_2^2,\qquad
        \mu_i = \frac{1}{1 + e^{-(b + x_i^\top\beta)}},\quad \lambda = \texttt{l2}.

    Parameters
    ----------
    source : callable, optional
        A function of no arguments returning a fresh iterator of blocks
        ``(X_block, y_block)`` or ``(X_block, y_block, weights_block)`` on every call.
        ``y`` holds two labels over all blocks (bool, 0/1, numbers or strings); the
        larger label is the positive class.
    X, y, weights : dask arrays, optional
        Instead of ``source``: row-chunked dask arrays with the same row chunks (see
        :func:`least_squares_blocks`).
    intercept : bool
        Fit an unpenalised intercept (default True).
    l2 : float
        Ridge strength on the slopes.
    tol : float
        Stop when the max-abs gradient of the objective per standardised column (as in
        :func:`lintools.logistic`) is <= tol.
    max_iter : int
        Newton iterations allowed; a fit that reaches the limit is marked
        ``converged=False`` and a :class:`lintools.IterationLimitWarning` is issued.
    names : sequence of str, optional
        Coefficient names (default: DataFrame column labels of the first block, else x1..xp).
    on_iteration : callable, optional
        Called with a :class:`lintools.solvers.IterationRecord` after each iteration.

    Returns
    -------
    LogisticFit
        Equal to ``lintools.logistic`` on the concatenated rows to the tolerance
        (coefficients, standard errors, log-likelihood, deviance, null deviance and the
        likelihood-ratio test); ``convergence.message`` counts the passes.

    Raises
    ------
    InputError
        A bad block (named by its number, row within the block, column and remedy), labels
        that are not exactly two over all blocks, a source that is not callable, returns no
        iterator, yields nothing or changes between passes, or (with ``l2 == 0``) a
        constant or linearly dependent column.
    SeparationError
        With ``l2 == 0``, when rows' linear predictors run beyond +-30 on the side of their
        outcome during the iterations: the classes appear separated and the estimate does
        not exist.  The exact linear-programming check of the in-memory fit needs all rows
        at once, so it is not run here.

    Notes
    -----
    Passes: one for the labels, centres, scales and rank; one per Newton iteration with
    an accepted full step (plus one per halving).  Memory: a few copies of one block plus
    ``O(p^2)``, whatever the number of rows.  At a large number of rows the default
    ``tol`` may lie below the float64 rounding level of the gradient (a sum over the rows);
    the fit then stalls and says so: loosen ``tol`` in proportion to the rows.
    Firth's method, offsets and grouped (trials) data are left to the in-memory fit.

    References
    ----------
    McCullagh & Nelder (1989), Generalized Linear Models, 2nd ed., sec. 2.5 (IRLS).
    Albert & Anderson (1984), Biometrika 71, 1-10 (existence of the estimate).
    """
    intercept, lam, tol, max_iter = check_fit_settings(intercept, l2, tol, max_iter, on_iteration)
    run = _runner(source, X, y, weights, labels="collect")
    part = run.reduce(_design_kernel, _merge_factors, (intercept,), (intercept,))
    p = run.spec.p
    names_t = check_names(names, p, run.names)
    seen = part["labels"]
    _check_two(seen)
    classes = tuple(sorted(seen))
    if len(classes) == 1:
        raise InputError(
            f"y has only one class ({classes[0]!r}) over all blocks; a logistic model needs both "
            "outcomes: check the target column or the rows selected"
        )
    if part["n_pos"] == 0:
        raise InputError("weights are zero in every block; at least one row needs a positive weight")
    W = part["W"]
    successes = seen[classes[1]][2]
    if successes <= 0 or successes >= W:
        which = "no successes" if successes <= 0 else "no failures"
        raise InputError(f"y has {which} on the rows with positive weight; a logistic model needs both outcomes")
    c, s = _centres_and_scales(part, intercept, lam, names_t)
    rate = min(max(successes / W, 1e-12), 1.0 - 1e-12)
    b_start = math.log(rate) - math.log1p(-rate)
    problem = _BlockProblem(_Coded(run, classes), c, s, intercept, lam, b_start)

    def monitor(z, ev):
        count, top = problem.runaway(z)
        if count:
            return f"{count} row(s) have a linear predictor beyond +-{ETA_LIMIT:g} (up to {top:.3g}) on the side of their outcome"
        return None

    res = newton(problem, tol=tol, max_iter=max_iter, on_iteration=on_iteration,
                 monitor=monitor if lam == 0 else None)
    if res.status == "diverging":
        raise SeparationError(
            f"the fit diverges: after {res.iterations} iteration(s) {res.message.split(': ', 1)[1]}: "
            "the classes appear (quasi-)completely separated, so the maximum-likelihood estimate "
            "does not exist (Albert & Anderson 1984). The exact check (a linear programme, "
            "lintools.check_separation) needs all rows at once and is not run on blocks. "
            "Remedies: l2 > 0 (a ridge penalty on the slopes), or Firth's method in memory "
            "(lintools.logistic(..., firth=True))"
        )
    if res.status == "singular":
        raise LintoolsError(
            f"{res.message}: the design is full rank but too ill-conditioned for the fitted weights; "
            "rescale or drop nearly collinear columns, or set l2 > 0"
        )
    try:
        V = covariance(problem, res.z)
    except SingularMatrixError:
        raise LintoolsError(
            "the information matrix is singular at the answer: the design is full rank but too "
            "ill-conditioned for the fitted weights; rescale or drop nearly collinear columns, or set l2 > 0"
        ) from None
    return _logistic_record(problem, res, V, W, seen, classes, lam, intercept, names_t, run.passes)


class _Coded:
    """A runner whose passes code ``y`` as 0/1 for the positive class of ``classes``."""

    def __init__(self, run: Any, classes: tuple) -> None:
        self.run, self.classes = run, classes

    def reduce(self, kernel: Callable, combine: Callable, args: tuple = (), cargs: tuple = ()) -> Any:
        return self.run.reduce(kernel, combine, args, cargs, labels=self.classes)


def _centres_and_scales(part: dict, intercept: bool, lam: float, names: tuple[str, ...]) -> tuple[np.ndarray, np.ndarray]:
    """Weighted means and standard deviations of the columns; constant and aliased columns."""
    R, W, mean = part["R"], part["W"], part["mean"]
    p = R.shape[1]
    if intercept and p and lam == 0:
        const = np.flatnonzero(part["lo"] == part["hi"])
        if const.size:
            j = int(const[0])
            raise InputError(
                f"X column {j} ('{names[j]}') is constant on the rows used; it is aliased with the "
                "intercept: drop it, or pass intercept=False"
            )
    norms = np.linalg.norm(R, axis=0)
    if lam == 0 and p:
        Rs = R / np.where(norms > 0, norms, 1.0)
        msg = dependency_sentence(Rs, norms, names, intercept, default_rank_tolerance(part["n_pos"], p))
        if msg:
            raise InputError(msg)
    c = mean if intercept else np.zeros(p)
    sd = norms / math.sqrt(W)  # without an intercept: the root mean square, as LinearModelProblem
    s = np.where((sd > 1e-13 * np.abs(c)) & (sd > 0) & np.isfinite(sd), sd, 1.0)
    return c, s


def _logistic_record(problem: _BlockProblem, res: Any, V: np.ndarray, W: float, seen: dict, classes: tuple,
                     lam: float, intercept: bool, names: tuple[str, ...], passes: int) -> LogisticFit:
    """The :class:`LogisticFit` of a converged (or stopped) blocked fit."""
    z = res.z
    ev, _, part = problem.cache[z.tobytes()]
    theta = problem.to_original(z)
    k = theta.size
    p = k - int(intercept)
    b = float(theta[0]) if intercept else 0.0
    se = np.sqrt(np.clip(np.diag(V), 0.0, None))
    loglik = -float(part["value"])
    dev = 2.0 * float(part["value"])  # binary rows: the saturated log-likelihood is 0
    S1 = seen[classes[1]][2]
    S0 = W - S1
    if intercept:
        null_dev = -2.0 * (S1 * math.log(S1 / W) + S0 * math.log(S0 / W))
    else:
        null_dev = 2.0 * W * math.log(2.0)
    lr = max(null_dev - dev, 0.0) if lam == 0 else float("nan")
    conv = convergence_record(res, ev, problem, z, "newton", note=f"; {passes} passes over the blocks")
    return LogisticFit(
        coefficients=theta[int(intercept):].copy(), intercept=b, standard_errors=se[int(intercept):],
        intercept_standard_error=float(se[0]) if intercept else None, covariance=V,
        log_likelihood=loglik, deviance=dev, n_observations=float(W), names=names, convergence=conv,
        with_intercept=bool(intercept), l2=lam, classes=classes, positive_class=classes[1],
        null_deviance=null_dev, **likelihood_fields(loglik, k, W, lr, p), firth=False, penalised_log_likelihood=-ev.value,
        grouped=False, has_offset=False, target="y",
    )
