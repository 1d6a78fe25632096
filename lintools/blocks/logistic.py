"""Logistic regression over row blocks, one pass per Newton evaluation; see :mod:`lintools.blocks`."""

from __future__ import annotations

import math
from typing import Any, Callable, Sequence

import numpy as np

from ..support.errors import InputError, LintoolsError, SeparationError
from ..models.records import LogisticFit
from ..support.scaling import SUM_LIMIT, check_l2_scale, scaled_back, wide_column_error
from ..support.validate import check_names
from ..models.inference import covariance
from ..support.linalg import default_rank_tolerance, dependency_sentence, unstandardise
from ..models.driver import DEFAULT_TOL, ETA_LIMIT, Measured, convergence_record, check_fit_settings
from ..models.logistic import BinaryWatch, logistic_record
from ..engine.losses import BinomialLoss
from ..engine import Evaluation, IterationRecord, SingularMatrixError
from ..engine.newton import newton

from .stream import _add, _check_two
from .runner import make_runner
from .least_squares import _ls_factor_kernel, _ls_merge, in_caller_units


def _design_kernel(X: np.ndarray, labels: dict, w: np.ndarray | None, intercept: bool) -> dict:
    """Pass 1 of the logistic fit: labels, the R factor of the weighted centred X in the
    block's own units (see :func:`lintools.blocks.least_squares._ls_factor_kernel`) and the
    largest weight (by which later passes divide the weights)."""
    out = _ls_factor_kernel(X, None, w, intercept)
    wp = None if w is None else w[w > 0]
    out.update(labels=labels, wmax=float(wp.max()) if (wp is not None and wp.size) else 1.0)
    return out


def merge_design(a: dict, b: dict, intercept: bool) -> dict:
    """Two pass-1 summaries combined (the R factors by TSQR in common units, the largest
    weight kept)."""
    out = _ls_merge(a, b, intercept)
    out["wmax"] = max(a["wmax"], b["wmax"])
    return out


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


def _evaluation_kernel(X: np.ndarray, y01: np.ndarray, w: np.ndarray | None, a: float, beta: np.ndarray,
                       c: np.ndarray, inv: np.ndarray, step: tuple | None, scale: float) -> dict:
    """Objective, gradient, information and runaway rows at ``(a, beta)``.

    The columns are centred first (``eta = a + (X - c) beta``, ``a`` the intercept of the
    centred columns; the gradient of the slopes is ``(X - c)' r``), so a column far from
    zero loses no digits, and the information is that of the standardised rows
    ``(1, (x - c) * inv)`` (``inv = 1 / s``), so no product of two columns of size 1e160 or
    1e-200 overflows or underflows; the weights are divided by ``scale`` (the largest).
    ``step = (a0, beta0, da, dbeta, t)`` adds ``value(eta0 + t deta) - value(eta0)``.
    """
    loss = BinomialLoss(y01, None, None if w is None else w / scale)
    D = centred_block(X, c)
    eta = D @ beta + a
    out = {"finite": bool(np.all(np.isfinite(eta)))}
    if step is not None:
        a0, beta0, da, dbeta, t = step
        eta0 = D @ beta0 + a0
        out["change"] = loss.value_change(eta0, t * (D @ dbeta + da)) if out["finite"] else math.inf
    if not out["finite"]:
        return out
    value, r = loss.value_and_gradient(eta)
    W = loss.curvature(eta)
    sw = np.sqrt(W)
    B = np.empty((X.shape[0], X.shape[1] + 1))
    B[:, 0] = sw
    np.multiply(D, inv, out=B[:, 1:])
    B[:, 1:] *= sw[:, None]
    runaway, top = BinaryWatch(loss, None).runaway(eta, ETA_LIMIT)  # the in-memory fit's rule
    out.update(value=value, gb=float(r.sum()), gx=D.T @ r, H=B.T @ B, runaway=runaway, top=top)
    return out


class _PassProblem:
    """What a blocked problem shares: one pass per evaluation, cached by ``z`` with its
    information, and a line search whose trials evaluate their points.  Subclasses give
    ``kernel`` (the per-block evaluation), ``centred`` (the intercept of the centred
    columns and the slopes), ``coefficients`` and ``_store``; and set ``weight_scale`` (the
    largest weight, which the kernels divide the block weights by) and ``weight_total``
    (the total of the divided weights: the stopping rule is per unit of it)."""

    kernel: Any = None
    #: declared capabilities (lintools.engine.contracts.Problem): every pass reads all rows
    warm_starts = sketches = fast_steps = rounding_known = False
    weight_scale: float = 1.0
    weight_total: float = 1.0

    def _remember(self, z: np.ndarray, ev: Evaluation, H: np.ndarray, part: dict) -> Evaluation:
        if len(self.cache) > 4:
            self.cache.pop(next(iter(self.cache)))
        self.cache[z.tobytes()] = (ev, 0.5 * H + 0.5 * H.T, part)  # H + H.T could overflow
        return ev

    def _pass(self, z: np.ndarray, step: tuple | None = None) -> dict:
        a, beta = self.centred(z)
        c = self.c if self.intercept else np.zeros(self.p)
        return self.run.reduce(type(self).kernel, _add, (a, beta, c, 1.0 / self.s, step, self.weight_scale))

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

    Coordinates as in :class:`lintools.engine.LinearModelProblem`: ``z = (a, g)`` with
    ``beta = g / s`` and ``b = a - c' beta``.  The information is that of the standardised
    design ``[1, (X - c) / s]``; evaluations (with their information) are cached by ``z``,
    and a line-search trial evaluates its point, so an accepted step costs no extra pass.
    The kernels divide the weights by ``weight_scale``, so the objective is the caller's
    divided by it (and the ridge enters as ``l2 / weight_scale``).
    """

    kernel = staticmethod(_evaluation_kernel)
    K = 1

    def __init__(self, run: Any, c: np.ndarray, s: np.ndarray, intercept: bool, lam: float, b_start: float,
                 weight_scale: float, weight_total: float) -> None:
        self.run, self.c, self.s = run, c, s
        self.weight_scale, self.weight_total = weight_scale, weight_total
        self.intercept, self.l2, self.first_slope = intercept, lam / weight_scale, int(intercept)
        self.p = c.shape[0]
        self.size = self.p + self.first_slope
        self.b_start = b_start
        self.cache: dict[bytes, tuple] = {}

    def centred(self, z: np.ndarray) -> tuple[float, np.ndarray]:
        """``(a, beta)``: the intercept of the centred columns and the slopes."""
        return (float(z[0]) if self.intercept else 0.0), z[self.first_slope :] / self.s

    def coefficients(self, z: np.ndarray) -> tuple[float, np.ndarray]:
        a, beta = self.centred(z)
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
        _, beta = self.centred(z)
        centred = part["gx"] + self.l2 * beta  # the kernels' products are with X - c
        Gb = part["gb"]
        gz = centred / self.s
        Gbeta = centred + self.c * Gb
        original = np.concatenate([[Gb], Gbeta]) if self.intercept else Gbeta
        if self.intercept:
            gz = np.concatenate([[Gb], gz])
            H = part["H"].copy()  # the kernels' information is in the standardised coordinates
        else:
            H = part["H"][1:, 1:].copy()
        if self.l2:
            slopes = np.arange(self.first_slope, self.size)
            H[slopes, slopes] += (self.l2 / self.s) / self.s  # no overflow of s^2
        value = part["value"] + (0.5 * self.l2 * float(beta @ beta) if self.l2 else 0.0)
        ev = Evaluation(float(value), gz, original, None, gz / self.weight_total)  # the in-memory stopping rule
        return self._remember(z, ev, H, part)

    def hessian(self, z: np.ndarray) -> np.ndarray:
        return self.fisher_information(z)


class _BlockLine:
    """``F(z + t d) - F(z)``: one pass per trial ``t``, which also evaluates ``z + t d``.

    Shared by the binary and the softmax blocked problems (``coefficients``, ``_pass``,
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


def logistic_blocks(
    source: Callable[[], Any] | None = None,
    *,
    X: Any = None,
    y: Any = None,
    weights: Any = None,
    intercept: bool = True,
    l2: float = 0.0,
    tol: float = DEFAULT_TOL,
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
        Stop when the max-abs gradient of the objective per unit of total case weight,
        with respect to the intercept and the coefficients of the standardised, centred
        columns (the rule of :func:`lintools.logistic`, with its promise), is <= tol.
        Neither the scale of the weights nor the number of rows moves this quantity's
        rounding level, so the default holds for any number of rows.
    max_iter : int
        Newton iterations allowed; a fit that reaches the limit is marked
        ``converged=False`` and a :class:`lintools.IterationLimitWarning` is issued.
    names : sequence of str, optional
        Coefficient names (default: DataFrame column labels of the first block, else x1..xp).
    on_iteration : callable, optional
        Called with a :class:`lintools.engine.IterationRecord` after each iteration.

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
    ``O(p^2)``, whatever the number of rows.  The weights are divided by the largest one
    (found by pass 1) and every weight-proportional output is scaled back
    (:mod:`lintools.support.scaling`); the columns are centred in every block before any product,
    so a column far from zero (a time stamp) loses no digits.  Firth's method, offsets and
    grouped (trials) data are left to the in-memory fit (grouped data can be passed as
    weighted 0/1 rows: a success row and a failure row per group).

    References
    ----------
    McCullagh & Nelder (1989), Generalized Linear Models, 2nd ed., sec. 2.5 (IRLS).
    Albert & Anderson (1984), Biometrika 71, 1-10 (existence of the estimate).
    """
    intercept, lam, tol, max_iter = check_fit_settings(intercept, l2, tol, max_iter, on_iteration)
    run = make_runner(source, X, y, weights, labels="collect")
    part = in_caller_units(run.reduce(_design_kernel, merge_design, (intercept,), (intercept,)))
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
    scale = weights_scale(part)  # refuses a total weight beyond float64 before any share of it
    W = part["W"]
    successes = seen[classes[1]][2]
    if successes <= 0 or successes >= W:
        which = "no successes" if successes <= 0 else "no failures"
        raise InputError(f"y has {which} on the rows with positive weight; a logistic model needs both outcomes")
    c, s = _centres_and_scales(part, intercept, lam, names_t)
    rate = min(max(successes / W, 1e-12), 1.0 - 1e-12)
    b_start = math.log(rate) - math.log1p(-rate)
    check_l2_scale(lam, scale)
    problem = _BlockProblem(_Coded(run, classes), c, s, intercept, lam, b_start, scale, W / scale)

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
        V = covariance(problem, res.z, [f"'{t}'" for t in (("(intercept)",) if intercept else ()) + names_t])
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
    """Weighted means and standard deviations of the columns (``part`` as
    :func:`lintools.blocks.least_squares.in_caller_units` returns it); constant and aliased columns.

    The spreads come from the unit-scale R factor and are moved to the caller's units
    exactly, so columns of size 1e300 or 1e-300 neither overflow nor underflow."""
    R, mean = part["R_units"], part["mean"]
    p = R.shape[1]
    if intercept and p and lam == 0:
        const = np.flatnonzero(part["lo"] == part["hi"])
        if const.size:
            j = int(const[0])
            raise InputError(
                f"X column {j} ('{names[j]}') is constant on the rows used; it is aliased with the "
                "intercept: drop it, or pass intercept=False"
            )
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
    s = np.where((sd > 1e-13 * np.abs(c)) & (sd > 0) & np.isfinite(sd), sd, 1.0)
    # the kernels' sums (X - c)' r: |x - c| <= 2 top and |r| sums to at most W / wmax (the
    # weights divided by the largest), so below SUM_LIMIT (1/8 of float64's largest) no overflow
    top = np.maximum(np.abs(part["hi"]), np.abs(part["lo"]))
    over = np.flatnonzero(~(top <= SUM_LIMIT / (part["W"] / part["wmax"])))
    if over.size:
        j = int(over[0])
        raise wide_column_error(j, names[j], float(top[j]))
    return c, s


def _logistic_record(problem: _BlockProblem, res: Any, V: np.ndarray, W: float, seen: dict, classes: tuple,
                     lam: float, intercept: bool, names: tuple[str, ...], passes: int) -> LogisticFit:
    """The :class:`LogisticFit` of a converged (or stopped) blocked fit, by the in-memory builder.

    The null deviance needs no pass: the intercept-only optimum is the share of the
    successes in the total weight."""
    z = res.z
    ev, _, part = problem.cache[z.tobytes()]
    scale = problem.weight_scale  # the passes' weights are the caller's / scale
    loglik = scaled_back(-float(part["value"]), scale, "log-likelihood")
    dev = -2.0 * loglik  # binary rows: the saturated log-likelihood is 0
    S1 = seen[classes[1]][2]
    S0 = W - S1
    if intercept:
        null_dev = -2.0 * ((S1 / scale) * math.log(S1 / W) + (S0 / scale) * math.log(S0 / W))
    else:
        null_dev = 2.0 * (W / scale) * math.log(2.0)
    null_dev = scaled_back(null_dev, scale, "null deviance")
    measured = Measured(loglik, dev, float(W), null_dev, null_dev - dev if lam == 0 else float("nan"))
    conv = convergence_record(res, ev, problem, z, "newton", note=f"; {passes} passes over the blocks")
    return logistic_record(
        problem, z, V, conv, measured, names=names, l2=lam, classes=classes, positive_class=classes[1], firth=False,
        penalised_log_likelihood=-scaled_back(ev.value, scale, "objective"), grouped=False, has_offset=False,
        target="y",
    )
