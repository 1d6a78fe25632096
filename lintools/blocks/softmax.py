"""Softmax regression over row blocks, one pass per Newton evaluation; see :mod:`lintools.blocks`."""

from __future__ import annotations

import math
from typing import Any, Callable, Sequence

import numpy as np

from ..support.errors import InputError
from ..engine.multinomial import MultinomialLoss
from ..models.softmax_record import SoftmaxFit
from ..models.records import with_accuracy
from ..support.scaling import check_l2_scale
from ..support.validate import check_names
from ..support.threads import with_row_threads
from ..models.driver import (
    DEFAULT_TOL,
    ETA_LIMIT,
    check_fit_settings,
    check_parameters_and_rows,
)
from ..models.softmax import (
    SEPARATION_REMEDY,
    SoftmaxWatch,
    sum_zero_subspace,
    reference_index,
    softmax_record,
    z_covariance,
)
from ..engine import AffineProblem, Evaluation, IterationRecord

from .stream import COLLECT_ALL, ClassIndex, _merge_labels
from .runner import make_runner
from .accuracy import blocked_softmax_accuracy
from .logistic import _design_kernel as _binary_design_kernel, merge_design
from .least_squares import in_caller_units
from .passes import _PassProblem, answer, centred_block, centres_and_scales, solve_passes, weights_scale

__all__ = ["softmax_blocks"]


def _design_kernel(X: np.ndarray, seen: dict, w: np.ndarray | None, intercept: bool) -> dict:
    """Pass 1: every label with its total weight, and the R factor of the weighted centred X."""
    out = _binary_design_kernel(X, {}, w, intercept)
    del out["labels"]  # merged with the binary fit's three-label rule; ours keep every label
    out["classes"] = seen
    return out


def _merge_design(a: dict, b: dict, intercept: bool) -> dict:
    out = merge_design({k: v for k, v in a.items() if k != "classes"},
                       {k: v for k, v in b.items() if k != "classes"}, intercept)
    out["classes"] = _merge_labels(a["classes"], b["classes"], keep=None)
    return out


def _evaluation_kernel(X: np.ndarray, codes: np.ndarray, w: np.ndarray | None, inverse: np.ndarray, K: int,
                       reference: bool, intercept: bool, a: np.ndarray, B: np.ndarray, c: np.ndarray,
                       inv: np.ndarray, step: tuple | None, scale: float) -> dict:
    """Objective, gradient, information (unscaled) and runaway rows of one block at ``(a, B)``.

    ``codes`` index the sorted classes, ``inverse`` maps them to the internal order (the
    reference class first).  As in the binary kernel the columns are centred first
    (``eta = a + (X - c) B``, ``a`` the intercepts of the centred columns, slope gradients
    ``(X - c)' R``, the information that of the standardised rows ``(1, (x - c) * inv)``)
    and the weights divided by ``scale``.  ``step = (a0, B0, da, dB, t)``
    adds ``value(eta0 + t deta) - value(eta0)``, computed directly.
    """
    icodes = inverse[codes]
    loss = MultinomialLoss(icodes, K, None if w is None else w / scale, reference=reference)
    D = centred_block(X, c)
    eta = D @ B + a  # (m, K'), always 2-D
    out: dict = {"finite": bool(np.all(np.isfinite(eta)))}
    if step is not None:
        a0, B0, da, dB, t = step
        eta0 = D @ B0 + a0
        out["change"] = loss.value_change(eta0, t * (D @ dB + da)) if out["finite"] else math.inf
    if not out["finite"]:
        return out
    value, R = loss.value_and_gradient(eta)
    W = loss.curvature(eta)  # (m, K', K')
    A = np.empty((X.shape[0], X.shape[1] + int(intercept)))
    if intercept:
        A[:, 0] = 1.0
    np.multiply(D, inv, out=A[:, int(intercept):])
    Kf, p1 = eta.shape[1], A.shape[1]
    H = np.zeros((p1, Kf, p1, Kf))
    for k in range(Kf):
        for m in range(k, Kf):
            G = A.T @ (A * W[:, k, m, None])
            H[:, k, :, m] = G
            if m != k:
                H[:, m, :, k] = G.T
    runaway, top = SoftmaxWatch(loss, None).runaway(eta, ETA_LIMIT)  # the in-memory fit's rule
    out.update(value=value, gb=R.sum(axis=0), gx=D.T @ R, H=H.reshape(p1 * Kf, p1 * Kf), runaway=runaway, top=top)
    return out


class _SoftmaxBlockProblem(_PassProblem):
    """The softmax objective as a solver problem whose every evaluation is one pass, with
    ``K'`` outputs in the coordinates of :class:`lintools.blocks.passes._PassProblem`
    (whose arguments it takes); the ridge's diagonal is kept as ``pen``."""

    kernel = staticmethod(_evaluation_kernel)

    def __init__(self, *args: Any) -> None:
        super().__init__(*args)
        pen = np.zeros((self.p1, self.K))
        if self.l2:
            pen[self.first_slope :] = ((self.l2 / self.s) / self.s)[:, None]  # no overflow of s^2
        self.pen = pen.ravel()

    def centred(self, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``(a, B)``: the intercepts of the centred columns and the slopes."""
        Z = z.reshape(self.p1, self.K)
        return (Z[0].copy() if self.intercept else np.zeros(self.K)), Z[self.first_slope :] / self.s[:, None]

    def _store(self, z: np.ndarray, part: dict) -> Evaluation | None:
        if not part["finite"]:
            return None
        _, B = self.centred(z)
        Gb = np.asarray(part["gb"], dtype=float)
        centred = part["gx"] + self.l2 * B  # the kernels' products are with X - c
        slopes = centred / self.s[:, None]
        GB = centred + np.multiply.outer(self.c, Gb)
        if self.intercept:
            gz, original = np.vstack([Gb, slopes]).ravel(), np.vstack([Gb, GB]).ravel()
        else:
            gz, original = slopes.ravel(), GB.ravel()
        H = part["H"].copy()  # the kernels' information is in the standardised coordinates
        H[np.diag_indices_from(H)] += self.pen
        value = part["value"] + (0.5 * self.l2 * float(np.sum(B * B)) if self.l2 else 0.0)
        ev = Evaluation(float(value), gz, original, None, gz / self.weight_total)  # the in-memory stopping rule
        return self._remember(z, ev, H, part)


class _Indexed:
    """A runner whose passes code ``y`` as class indices and hand the kernel the class layout."""

    def __init__(self, run: Any, classes: tuple, inverse: np.ndarray, reference: bool, intercept: bool) -> None:
        self.run, self.spec = run, ClassIndex(classes)
        self.head = (inverse, len(classes), reference, intercept)

    def reduce(self, kernel: Callable, combine: Callable, args: tuple = (), cargs: tuple = (),
               pieces: bool = False) -> Any:
        return self.run.reduce(kernel, combine, self.head + tuple(args), cargs, labels=self.spec, pieces=pieces)


@with_row_threads
def softmax_blocks(
    source: Callable[[], Any] | None = None,
    *,
    X: Any = None,
    y: Any = None,
    weights: Any = None,
    intercept: bool = True,
    l2: float = 0.0,
    reference: Any = "first",
    tol: float = DEFAULT_TOL,
    max_iter: int = 100,
    names: Sequence[str] | None = None,
    on_iteration: Callable[[IterationRecord], Any] | None = None,
) -> SoftmaxFit:
    r"""Softmax (multinomial logistic) regression over row blocks; the record of :func:`lintools.softmax`.

    .. math::

        \min_{b, B}\; -\sum_i w_i \log \pi_{i c_i} + \tfrac{\lambda}{2}\lVert B\rVert_F^2,\qquad
        \pi_{ik} = \frac{\exp(b_k + x_i^\top B_{\cdot k})}{\sum_j \exp(b_j + x_i^\top B_{\cdot j})},
        \quad \lambda = \texttt{l2},

    with ``c_i`` the class of row ``i`` and the intercepts ``b`` never penalised.

    Parameters
    ----------
    source : callable, optional
        A function of no arguments returning a fresh iterator of blocks
        ``(X_block, y_block)`` or ``(X_block, y_block, weights_block)`` on every call.
        ``y`` holds class labels of one sortable type; ``classes`` are the sorted labels
        over all blocks.
    X, y, weights : dask arrays, optional
        Instead of ``source``: row-chunked dask arrays with the same row chunks (see
        :func:`lintools.blocks.least_squares_blocks`).
    intercept : bool
        Fit unpenalised intercepts (default True).
    l2 : float
        Ridge strength on the slopes.
    reference : "first", a class label, or None
        The class whose column of ``(b, B)`` is pinned at zero ("first": the first sorted
        label), or None for the symmetric form, which needs ``l2 > 0``; each term's class
        values then sum to zero (the solver works in that subspace, as
        :func:`lintools.softmax` does).
    tol : float
        Stop when the max-abs gradient of the objective per unit of total case weight,
        with respect to the intercepts and the coefficients of the standardised, centred
        columns (the rule of :func:`lintools.softmax`, with its promise), is <= tol.
    max_iter : int
        Newton iterations allowed; a fit that reaches the limit is marked
        ``converged=False`` and a :class:`lintools.IterationLimitWarning` is issued.
    names : sequence of str, optional
        Coefficient names (default: DataFrame column labels of the first block, else x1..xp).
    on_iteration : callable, optional
        Called with a :class:`lintools.engine.IterationRecord` after each iteration.

    Returns
    -------
    SoftmaxFit
        Equal to ``lintools.softmax`` on the concatenated rows to the tolerance
        (coefficients, standard errors, covariance in the order of :class:`SoftmaxFit`,
        log-likelihood, deviance, null deviance and the likelihood-ratio test);
        ``convergence.message`` counts the passes.

    Raises
    ------
    InputError
        A bad block (named by its number, row within the block, column and remedy), fewer
        than two classes over all blocks, a class with zero total weight, a label on a
        later pass that the first did not see, the symmetric form without a penalty, an
        unknown reference label, a source that is not callable, returns no iterator,
        yields nothing or changes between passes, or (with ``l2 == 0``) fewer rows than
        parameters, a constant or a linearly dependent column.
    SeparationError
        With ``l2 == 0``, when rows' own class leads every other by more than 30 in the
        linear predictor during the iterations: the classes appear separated and the
        estimate does not exist.  The exact linear-programming check of the in-memory fit
        needs all rows at once, so it is not run here.

    Notes
    -----
    Passes: one for the labels and their total weights, the centres, scales and rank;
    one per Newton iteration with an accepted full step (plus one per halving; in the
    symmetric form with an intercept, one more per iteration).  The null deviance needs
    no pass: the intercept-only optimum puts each class's probability at its share of
    the weight, so it is :math:`-2\sum_k W_k \log(W_k / W)` (``2 W \log K`` without an
    intercept).  Memory: a few copies of one block plus ``O((p K)^2)``.  Offsets are left
    to the in-memory fit.

    References
    ----------
    McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed., sec. 6.4.
    Böhning, D. (1992). Multinomial logistic regression algorithm. Annals of the Institute
    of Statistical Mathematics 44, 197-200.
    Albert, A. & Anderson, J. A. (1984). Biometrika 71, 1-10 (existence of the estimate).
    """
    intercept, lam, tol, max_iter = check_fit_settings(intercept, l2, tol, max_iter, on_iteration)
    if reference is None:
        reference_index(None, (), lam)  # the symmetric form needs l2 > 0: say so before any pass
    run = make_runner(source, X, y, weights, labels=COLLECT_ALL)
    part = in_caller_units(run.reduce(_design_kernel, _merge_design, (intercept,), (intercept,)))
    p = run.spec.p
    names_t = check_names(names, p, run.names)
    seen = part["classes"]
    classes = tuple(sorted(seen))
    K = len(classes)
    if K < 2:
        raise InputError(f"y has only one class ({classes[0]!r}) over all blocks; a softmax model needs at least "
                         "two: check the target column or the rows selected")
    if part["n_pos"] == 0:
        raise InputError("weights are zero in every block; at least one row needs a positive weight")
    scale = weights_scale(part)  # refuses a total weight beyond float64 before any share of it
    totals = np.array([seen[c][2] for c in classes])
    if np.any(totals <= 0):
        label = classes[int(np.argmin(totals > 0))]
        block, row = seen[label][0], seen[label][1]
        raise InputError(
            f"class {label!r} of y (first seen at row {row} of block {block}) has zero total weight over all "
            "blocks; its probability would be 0: drop those rows' class from y, or give them positive weights"
        )
    ref = reference_index(reference, classes, lam)
    if lam == 0:
        check_parameters_and_rows(p + int(intercept), int(part["n_pos"]))
    c, s = centres_and_scales(part, intercept, lam, names_t)

    # internal class order: the reference class first, the others in classes order
    order = np.arange(K) if ref is None else np.array([ref] + [k for k in range(K) if k != ref])
    inverse = np.argsort(order)
    logs = np.log(totals[order] / totals.sum())
    a_start = logs[1:] - logs[0] if ref is not None else logs - logs.mean()
    Kf = K - 1 if ref is not None else K
    runner = _Indexed(run, classes, inverse, ref is not None, intercept)
    check_l2_scale(lam, scale)
    problem = _SoftmaxBlockProblem(runner, c, s, intercept, lam, Kf, a_start, scale, part["W"] / scale)
    target: Any = problem
    start = None
    if ref is None:
        E = sum_zero_subspace(problem)
        target = AffineProblem(problem, np.zeros(problem.size), E)
        start = E.T @ problem.start()
    res, z, Vz = solve_passes(
        problem, lambda z: z_covariance(problem, target, z), SoftmaxWatch, separated="separated",
        exact="a linear programme", remedies=SEPARATION_REMEDY, lam=lam, tol=tol, max_iter=max_iter,
        on_iteration=on_iteration, target=target, start=start,
    )
    record = _softmax_record(problem, res, z, Vz, order, ref, classes, totals, part["W"], lam, intercept,
                             names_t, run.passes)
    return with_accuracy(record, blocked_softmax_accuracy(problem, z, Vz, classes, order, ref, names_t,
                                                          int(part["n_rows"])))


def _softmax_record(problem: _SoftmaxBlockProblem, res: Any, z: np.ndarray, Vz: np.ndarray, order: np.ndarray,
                    ref: int | None, classes: tuple, totals: np.ndarray, W: float, lam: float, intercept: bool,
                    names: tuple[str, ...], passes: int) -> SoftmaxFit:
    """The :class:`SoftmaxFit` of a converged (or stopped) blocked fit, by the in-memory builder.

    The null deviance needs no pass: the intercept-only optimum puts each class's
    probability at its share of the weight."""
    scale = problem.weight_scale  # the passes' weights are the caller's / scale
    total = float(totals.sum())
    if intercept:
        null_dev = -2.0 * float(np.sum((totals / scale) * np.log(totals / total)))
    else:
        null_dev = 2.0 * (total / scale) * math.log(len(classes))
    _, measured, conv = answer(problem, res, z, null_dev, W, lam, passes)
    return softmax_record(problem, z, Vz, conv, measured, classes=classes, order=order, ref=ref, names=names,
                          lam=lam, has_offset=False, target="y")
