"""Logistic regression over row blocks, one pass per Newton evaluation; see :mod:`lintools.blocks`."""

from __future__ import annotations

import math
from typing import Any, Callable, Sequence

import numpy as np

from ..support.errors import InputError
from ..models.records import LogisticFit, with_accuracy
from ..support.scaling import check_l2_scale, scaled_back
from ..support.validate import check_names
from ..support.threads import with_row_threads
from ..models.inference import covariance
from ..models.driver import DEFAULT_TOL, ETA_LIMIT, check_fit_settings
from ..models.logistic import BinaryWatch, logistic_record
from ..engine.losses import BinomialLoss
from ..engine import Evaluation, IterationRecord

from .stream import _check_two
from .runner import make_runner
from .accuracy import blocked_binary_accuracy
from .least_squares import _ls_factor_kernel, _ls_merge, in_caller_units
from .passes import _PassProblem, answer, centred_block, centres_and_scales, solve_passes, weights_scale


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


class _BlockProblem(_PassProblem):
    """The logistic objective as a solver problem whose every evaluation is one pass.

    Coordinates as in :class:`lintools.engine.LinearModelProblem`: ``z = (a, g)`` with
    ``beta = g / s`` and ``b = a - c' beta``.  The information is that of the standardised
    design ``[1, (X - c) / s]``; evaluations (with their information) are cached by ``z``,
    and a line-search trial evaluates its point, so an accepted step costs no extra pass.
    """

    kernel = staticmethod(_evaluation_kernel)

    def centred(self, z: np.ndarray) -> tuple[float, np.ndarray]:
        """``(a, beta)``: the intercept of the centred columns and the slopes."""
        return (float(z[0]) if self.intercept else 0.0), z[self.first_slope :] / self.s

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


@with_row_threads
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
    c, s = centres_and_scales(part, intercept, lam, names_t)
    rate = min(max(successes / W, 1e-12), 1.0 - 1e-12)
    b_start = math.log(rate) - math.log1p(-rate)
    check_l2_scale(lam, scale)
    problem = _BlockProblem(_Coded(run, classes), c, s, intercept, lam, 1, b_start, scale, W / scale)
    terms = [f"'{t}'" for t in (("(intercept)",) if intercept else ()) + names_t]
    res, _, V = solve_passes(
        problem, lambda z: covariance(problem, z, terms), BinaryWatch, separated="(quasi-)completely separated",
        exact="a linear programme, lintools.check_separation", lam=lam, tol=tol, max_iter=max_iter,
        on_iteration=on_iteration, remedies="Remedies: l2 > 0 (a ridge penalty on the slopes), or Firth's method "
        "in memory (lintools.logistic(..., firth=True))",
    )
    record = _logistic_record(problem, res, V, W, seen, classes, lam, intercept, names_t, run.passes)
    return with_accuracy(record, blocked_binary_accuracy(problem, res.z, names_t, int(part["n_rows"])))


class _Coded:
    """A runner whose passes code ``y`` as 0/1 for the positive class of ``classes``."""

    def __init__(self, run: Any, classes: tuple) -> None:
        self.run, self.classes = run, classes

    def reduce(self, kernel: Callable, combine: Callable, args: tuple = (), cargs: tuple = (),
               pieces: bool = False) -> Any:
        return self.run.reduce(kernel, combine, args, cargs, labels=self.classes, pieces=pieces)


def _logistic_record(problem: _BlockProblem, res: Any, V: np.ndarray, W: float, seen: dict, classes: tuple,
                     lam: float, intercept: bool, names: tuple[str, ...], passes: int) -> LogisticFit:
    """The :class:`LogisticFit` of a converged (or stopped) blocked fit, by the in-memory builder.

    The null deviance needs no pass: the intercept-only optimum is the share of the
    successes in the total weight."""
    scale = problem.weight_scale  # the passes' weights are the caller's / scale
    S1 = seen[classes[1]][2]
    S0 = W - S1
    if intercept:
        null_dev = -2.0 * ((S1 / scale) * math.log(S1 / W) + (S0 / scale) * math.log(S0 / W))
    else:
        null_dev = 2.0 * (W / scale) * math.log(2.0)
    ev, measured, conv = answer(problem, res, res.z, null_dev, W, lam, passes)
    return logistic_record(
        problem, res.z, V, conv, measured, names=names, l2=lam, classes=classes, positive_class=classes[1],
        firth=False, penalised_log_likelihood=-scaled_back(ev.value, scale, "objective"), grouped=False,
        has_offset=False, target="y",
    )
