r"""Softmax (multinomial logistic) regression: validate, solve, package the record.

Objective (``w`` case weights, ``l2 >= 0``; intercepts never penalised)

.. math::

    \min_{b, B}\; -\sum_i w_i \log \pi_{i c_i} + \tfrac{\lambda}{2}\lVert B\rVert_F^2,
    \qquad \pi_{ik} = \frac{\exp(b_k + x_i'B_{\cdot k} + o_{ik})}{\sum_j \exp(b_j + x_i'B_{\cdot j} + o_{ij})}.

``reference="first"`` (or a class label) pins that class's column of ``(b, B)`` at zero,
which makes the estimate identifiable without a penalty; ``reference=None`` is the
symmetric form, which needs ``l2 > 0`` for the slopes.  Adding one vector to every
class's column changes no probability, and the penalty is least where each slope's class
values sum to zero; the intercepts are reported with mean zero.  So every term's class
values sum to zero in the symmetric form, and the solver works in that subspace
(:func:`sum_zero_subspace`), where the likelihood, not only the penalty, determines every
direction.  The three solvers of :mod:`lintools.engine` are used
unchanged on the multinomial loss of :mod:`lintools.engine.multinomial`.

References
----------
Albert, A. & Anderson, J. A. (1984). On the existence of maximum likelihood estimates in
logistic regression models. Biometrika 71, 1-10.
McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed., sec. 6.4.
Chapman & Hall.
"""

from __future__ import annotations

from typing import Any, Callable, Sequence

import numpy as np

from ..support.errors import InputError
from ..engine.multinomial import ROWS, MultinomialLoss
from .accuracy import Precision, checked_precision
from .records import Convergence, with_accuracy
from .softmax_accuracy import softmax_accuracy
from .softmax_record import SoftmaxFit
from .responses import read_labels, target_name
from ..support.scaling import caller_covariance, check_l2_scale, scaled_back, scaled_case_weights
from ..support.threads import with_row_threads
from ..support.validate import as_matrix, as_offset, as_weights, check_names, is_one_of
from .inference import likelihood_fields
from .driver import (
    DEFAULT_TOL,
    Measured,
    Solved,
    Watch,
    check_fit_settings,
    check_parameters_and_rows,
    checked_problem,
    constant_columns,
    likelihood_summary,
    lr_statistic,
    rank_message,
    solve_family,
    unless_scipy_missing,
)
from ..engine import AffineProblem, IterationRecord, LinearModelProblem, inverse_spd
from ..engine.newton import newton

__all__ = ["SoftmaxWatch", "softmax", "softmax_record"]

SEPARATION_REMEDY = "Remedy: l2 > 0 (a ridge penalty on the slopes gives finite estimates)"
SYMMETRIC_REMEDY = "pass l2 > 0, or reference='first' (or a class label) to pin one class at zero"


def reference_index(reference: Any, classes: tuple, lam: float) -> int | None:
    if reference is None:
        if lam <= 0:
            raise InputError(
                "reference=None (the symmetric form) with l2 = 0: adding the same vector to every "
                f"class's coefficients leaves every probability unchanged, so the estimate is not unique; {SYMMETRIC_REMEDY}"
            )
        return None
    if isinstance(reference, str) and reference == "first":
        return 0
    if is_one_of(reference, classes, exact_kind=False):
        return classes.index(reference)
    shown = ", ".join(repr(c) for c in classes[:8])
    raise InputError(f"reference={reference!r:.60} is neither 'first', None, nor a class of y ({shown}); "
                     "name one of the classes")


class SoftmaxWatch(Watch):
    """Divergence monitor: rows whose own class leads every other by more than ETA_LIMIT.

    A row's lead is at most the spread of its linear predictor (its largest entry less its
    smallest, the pinned zero included), so while the spread of the whole matrix is within
    the limit no row is counted and nothing is formed; otherwise the leads are found one
    block of rows at a time."""

    RUNAWAY = ("{count} row(s) have their own class ahead of every other by more than {limit:g} "
               "in the linear predictor (up to {top:.3g})")

    def __init__(self, loss: Any, offset: np.ndarray | None) -> None:
        super().__init__(loss, offset)
        self._offset_range = (0.0, 0.0) if offset is None or offset.size == 0 else (float(offset.min()),
                                                                                    float(offset.max()))

    def runaway(self, eta: np.ndarray, limit: float) -> tuple[int, float]:
        if eta.size:
            lo, hi = float(np.min(eta)), float(np.max(eta))
            # bounds of eta - offset; the pinned column is 0
            hi, lo = hi - self._offset_range[0], lo - self._offset_range[1]
            if self.loss.reference:
                hi, lo = max(hi, 0.0), min(lo, 0.0)
            if hi - lo <= limit:
                return 0, 0.0
        count, top = 0, 0.0
        n = eta.shape[0]
        for start in range(0, n, ROWS):
            rows = slice(start, min(n, start + ROWS))
            lin = eta[rows] if self.offset is None else eta[rows] - self.offset[rows]
            E = np.array(self.loss.full(lin), dtype=float)
            r = np.arange(E.shape[0])
            codes = self.loss.codes[rows]
            own = E[r, codes]
            E[r, codes] = -np.inf
            margin = own - E.max(axis=1)
            hit = self.live[rows] & (margin > limit)
            if hit.any():
                count += int(hit.sum())
                top = max(top, float(margin[hit].max()))
        return count, top


def _exact_check(Xa, codes, classes, w, intercept, names):
    """Run the linear programme; return the diagnosis, or None when SciPy is missing."""
    from .separation import multinomial_separation

    return unless_scipy_missing(multinomial_separation, Xa, codes, classes, w, intercept, names)


class SoftmaxFamily:
    """The softmax family for :func:`lintools.models.driver.solve_family`.

    ``loss`` codes the classes in the internal order (the reference class first):
    ``order[j]`` is the sorted class of internal column ``j``."""

    remedies = SEPARATION_REMEDY
    separated = "separated"
    singular_runaway = True

    def __init__(self, Xa: np.ndarray, loss: MultinomialLoss, offset: np.ndarray | None, names: tuple[str, ...],
                 intercept: bool, lam: float, classes: tuple, order: np.ndarray) -> None:
        self.Xa, self.loss, self.offset, self.names = Xa, loss, offset, names
        self.intercept, self.lam, self.classes, self.order = intercept, lam, classes, order
        self.size = Xa.size * len(classes)
        self.watch = SoftmaxWatch(loss, offset) if lam == 0 else None
        self.precision: Precision | None = None  # the data's rounding for the accuracy record

    def exact_check(self) -> Any:
        return _exact_check(self.Xa, self.order[self.loss.codes], self.classes, self.loss.weights, self.intercept,
                            self.names)

    def rank_message(self) -> str | None:
        return rank_message(self.Xa, self.loss.weights, self.intercept, self.names) if self.lam == 0 else None

    def covariance(self, problem: LinearModelProblem, target: Any, z: np.ndarray) -> np.ndarray:
        return z_covariance(problem, target, z)

    def newton_move(self, problem: LinearModelProblem, ev: Any, Vz: np.ndarray) -> float:
        return float(np.max(np.abs(problem.eta(-(Vz @ ev.gradient), with_offset=False))))


def sum_zero_subspace(problem: LinearModelProblem) -> np.ndarray:
    r"""Orthonormal basis ``E`` of the z coordinates in which every term's K class values sum
    to zero (the symmetric form's identifiable subspace; ``E = I_{p+1} \otimes Q`` with ``Q``
    an orthonormal basis of the vectors of length K summing to zero).

    Adding one vector to every class's column of ``(b, B)`` changes no probability, and the
    ridge penalty (slopes only) is least, among all such shifts, where each slope's class
    values sum to zero; the intercepts are reported with mean zero.  So the symmetric form's
    answer lies in this subspace exactly, and solving there leaves the likelihood to
    determine every direction (outside it only the penalty would, ``l2 / s_j^2`` in z, and a
    gradient test per unit weight could leave an error of ``tol n s_j^2 / l2`` there).
    """
    K, p1 = problem.K, problem.p1
    Q, _ = np.linalg.qr(np.column_stack([np.ones(K), np.eye(K)[:, : K - 1]]))
    return np.kron(np.eye(p1), Q[:, 1:])  # z is term-major: index j K + k


@with_row_threads
def softmax(
    X: Any,
    y: Any,
    *,
    weights: Any = None,
    offset: Any = None,
    intercept: bool = True,
    l2: float = 0.0,
    reference: Any = "first",
    solver: str = "newton",
    tol: float = DEFAULT_TOL,
    max_iter: int = 100,
    names: Sequence[str] | None = None,
    on_iteration: Callable[[IterationRecord], Any] | None = None,
    data_precision: Precision | None = None,
) -> SoftmaxFit:
    r"""Fit a softmax (multinomial logistic) regression by (penalised) maximum likelihood.

    .. math::

        \min_{b, B}\; -\sum_i w_i \log \pi_{i c_i} + \tfrac{\lambda}{2}\lVert B\rVert_F^2,\qquad
        \pi_{ik} = \operatorname{softmax}_k(b + B'x_i + o_i),\quad \lambda = \texttt{l2}.

    Parameters
    ----------
    X : array-like (n, p)
        Design without the intercept column; DataFrame-like column labels become names.
    y : array-like (n,)
        Class labels of any one hashable, sortable type; ``classes`` are the sorted labels.
    weights : array-like (n,), optional
        Case weights ``w >= 0``.
    offset : array-like (n, K), optional
        Known part of the linear predictor, one column per class (``classes`` order).
    intercept : bool
        Fit unpenalised intercepts (default True).
    l2 : float
        Ridge strength on the slopes (scikit-learn's multinomial ``C`` maps to
        ``l2 = 1/C`` with ``reference=None``).
    reference : "first", a class label, or None
        The class whose column is pinned at zero ("first": the first sorted label), or
        None for the symmetric form, which needs ``l2 > 0``: each term's class values
        then sum to zero, and the standard errors and covariance are those of that
        sum-to-zero form (the inverse penalised information within it).
    solver : {"newton", "lbfgs", "gradient"}
        As for :func:`lintools.logistic`; first-order solvers usually need a larger
        ``max_iter``.
    tol : float
        Stop when the max-abs gradient of the objective per unit of total case weight,
        with respect to the intercepts and the coefficients of the standardised, centred
        columns, is <= tol (the rule and the promise of :func:`lintools.logistic`: to
        first order the standardised coefficients are within ``||Hbar^{-1}||_inf * tol``
        of the exact optimum).  Default 1e-13.
    max_iter : int
        Iteration limit; reaching it gives ``converged=False`` and an
        :class:`lintools.IterationLimitWarning`.
    names : sequence of str, optional
        Coefficient names (default: DataFrame column labels, else x1..xp).
    on_iteration : callable, optional
        Called with an :class:`lintools.engine.IterationRecord` after each iteration.
    data_precision : Precision, optional
        The rounding of the data the record's ``accuracy.data_digits`` is stated at
        (default: float64 input, relative rounding ``u = 2**-53`` of every entry): for data
        read from a file, ``table.data_precision()`` of
        ``read_table(..., written_decimals=True)``; or ``Precision.written([...])``.  The
        labels are exact.

    Returns
    -------
    SoftmaxFit
        ``coefficients`` (p, K), ``intercept`` (K,), standard errors in the same shapes,
        ``covariance`` of the free parameters (ordering in :class:`SoftmaxFit`).

    Raises
    ------
    InputError
        Bad input, fewer than two classes, a class with zero total weight, the symmetric
        form without a penalty, a rank-deficient design with ``l2 = 0``.
    SeparationError
        Some direction of the coefficients ranks every row's own class first and never
        below another (multinomial separation, Albert & Anderson 1984): the unpenalised
        estimate does not exist.  Checked exactly (SciPy's ``linprog``) when the
        iterations show rows whose own class runs away.
    """
    Xa, found = as_matrix(X, "X", check_finite=False)  # checked by the problem's first pass
    n, p = Xa.shape
    names_t = check_names(names, p, found)
    precision = checked_precision(data_precision, p)
    w = as_weights(weights, n)
    classes, codes = read_labels(y, n)
    K = len(classes)
    if K < 2:
        raise InputError(f"y has only one class ({classes[0]!r}); a softmax model needs at least two: "
                         "check the target column or the rows selected")
    intercept, lam, tol, max_iter = check_fit_settings(intercept, l2, tol, max_iter, on_iteration, solver)
    ref = reference_index(reference, tuple(classes), lam)
    # the weights divided by the largest one (see lintools.support.scaling): outputs are scaled back
    w, scale = scaled_case_weights(w)
    check_l2_scale(lam, scale)
    totals = np.bincount(codes, weights=w, minlength=K)
    if np.any(totals <= 0):
        k = int(np.argmin(totals > 0))
        raise InputError(f"class {classes[k]!r} of y has zero total weight; its probability would be 0: "
                         "drop those rows' class from y, or give them positive weights")
    off_full = None if offset is None else as_offset(offset, n, K)
    if lam == 0:
        check_parameters_and_rows(p + int(intercept), int(np.count_nonzero(w > 0)))

    # internal class order: the reference class first, the others in classes order
    order = np.arange(K) if ref is None else np.array([ref] + [k for k in range(K) if k != ref])
    inverse = np.argsort(order)
    icodes = inverse[codes]
    del codes  # the exact check re-forms the sorted-class codes from icodes when it runs
    loss = MultinomialLoss(icodes, K, w, reference=ref is not None)
    off = None
    if off_full is not None:
        off = off_full[:, order]
        off = off[:, 1:] - off[:, :1] if ref is not None else off
        if off.shape[1] == 1:
            off = off[:, 0]  # one output (two classes, a reference): the problem's eta is (n,)
    problem = checked_problem(Xa, found, names_t, loss, intercept=intercept, l2=lam, offset=off, weight_scale=scale)
    if intercept and p and lam == 0:
        constant_columns(Xa, w > 0, names_t, problem.spread, problem.c)
    target = problem
    start = None
    if ref is None:
        E = sum_zero_subspace(problem)
        target = AffineProblem(problem, np.zeros(problem.size), E)
        start = E.T @ problem.start()
    family = SoftmaxFamily(Xa, loss, off, names_t, intercept, lam, tuple(classes), order)
    family.precision = precision
    solved = solve_family(family, problem, solver=solver, tol=tol, max_iter=max_iter, on_iteration=on_iteration,
                          target=target, start=start)
    return _record(family, problem, solved, ref, off_full is not None, tol, max_iter, target_name(y))


def z_covariance(problem: LinearModelProblem, target: Any, z: np.ndarray) -> np.ndarray:
    """Covariance in z coordinates (through the subspace basis in the symmetric form)."""
    H = problem.fisher_information(z)
    if target is problem:
        return inverse_spd(H)
    E = target.E
    return E @ inverse_spd(E.T @ H @ E) @ E.T


def _caller_parameters(problem: Any, z: np.ndarray, Vz: np.ndarray, classes: tuple, order: np.ndarray,
                       ref: int | None, names: tuple[str, ...]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``(theta, se, covariance)`` in the caller's units: (p1, K) parameters and standard
    errors in classes order (the pinned class zero), the covariance class-major."""
    intercept = problem.intercept
    K, Kf, p1 = len(classes), problem.K, problem.p1
    V = caller_covariance(problem.theta_from_z_matrix(), Vz, problem.weight_scale,
                          internal_terms(names, classes, order, ref, intercept),
                          np.repeat(np.concatenate([np.full(int(intercept), np.nan), problem.s]), Kf))
    theta = problem.to_original(z).reshape(p1, Kf)  # internal free columns
    se_int = np.sqrt(np.clip(np.diag(V), 0.0, None)).reshape(p1, Kf)
    full_t = np.zeros((p1, K))
    full_se = np.zeros((p1, K))
    first = 0 if ref is None else 1
    full_t[:, first:] = theta
    full_se[:, first:] = se_int
    if ref is None and intercept:
        full_t[0] -= full_t[0].mean()  # the shared shift of the intercepts is not determined
    inverse = np.argsort(order)
    full_t, full_se = full_t[:, inverse], full_se[:, inverse]  # back to classes order
    # covariance: internal (term-major, internal free columns) -> class-major in classes order
    free_sorted = [k for k in range(K) if ref is None or k != ref]
    internal_col = {int(order[j]): j - first for j in range(first, K)}
    perm = [t * Kf + internal_col[k] for k in free_sorted for t in range(p1)]
    return full_t, full_se, V[np.ix_(perm, perm)]


def _record(family: SoftmaxFamily, problem: LinearModelProblem, solved: Solved, ref: int | None, has_offset: bool,
            tol: float, max_iter: int, target: Any) -> SoftmaxFit:
    """The :class:`SoftmaxFit` of a solved softmax family (``ref``: the pinned class or None)."""
    loss = family.loss
    loglik, dev, n_obs = likelihood_summary(problem, loss, solved.evaluation, "sum of weights")
    null_dev = scaled_back(_null_deviance(loss, problem.n, family.offset, family.intercept, tol, max_iter),
                           problem.weight_scale, "null deviance")
    measured = Measured(loglik, dev, n_obs, null_dev, null_dev - dev if family.lam == 0 else float("nan"))
    record = softmax_record(problem, solved.z, solved.covariance, solved.convergence, measured,
                            classes=family.classes, order=family.order, ref=ref, names=family.names, lam=family.lam,
                            has_offset=has_offset, target=target)
    return with_accuracy(record, softmax_accuracy(problem, family.Xa, loss, family.offset, solved.z,
                                                  solved.evaluation.gradient, solved.covariance, family.classes,
                                                  family.order, ref, family.names, family.precision))


def softmax_record(problem: Any, z: np.ndarray, Vz: np.ndarray, convergence: Convergence, measured: Measured, *,
                   classes: tuple, order: np.ndarray, ref: int | None, names: tuple[str, ...], lam: float,
                   has_offset: bool, target: Any) -> SoftmaxFit:
    """The :class:`SoftmaxFit` of a solved softmax problem, in memory or over blocks.

    ``problem`` gives the coordinate maps (``to_original``, ``theta_from_z_matrix``, the
    column scales ``s``, ``intercept``, ``K`` outputs, ``p1`` terms, ``p`` columns,
    ``weight_scale``); ``z`` is the answer and ``Vz`` its covariance in the problem's
    coordinates; ``order[j]`` is the sorted class of internal column ``j`` and ``ref`` the
    pinned class (None: the symmetric form)."""
    intercept = problem.intercept
    K, Kf, p1 = len(classes), problem.K, problem.p1
    full_t, full_se, Vc = _caller_parameters(problem, z, Vz, classes, order, ref, names)
    k_free = p1 * (K - 1)  # in the symmetric form each term's K values sum to zero: K - 1 free
    loglik, n_obs = measured.log_likelihood, measured.n_observations
    return SoftmaxFit(
        coefficients=full_t[int(intercept):],
        intercept=full_t[0] if intercept else np.zeros(K),
        standard_errors=full_se[int(intercept):],
        intercept_standard_error=full_se[0] if intercept else None,
        covariance=Vc,
        log_likelihood=loglik,
        deviance=measured.deviance,
        n_observations=n_obs,
        names=names,
        convergence=convergence,
        with_intercept=bool(intercept),
        l2=lam,
        classes=tuple(classes),
        reference_class=None if ref is None else classes[ref],
        null_deviance=measured.null_deviance,
        **likelihood_fields(loglik, k_free, n_obs, lr_statistic(measured.lr), problem.p * (K - 1)),
        has_offset=has_offset,
        target=target,
    )


def internal_terms(names: tuple, classes: tuple, order: np.ndarray, ref: int | None, intercept: bool) -> list[str]:
    """Names of the free parameters in the problem's order (term-major, internal classes)."""
    first = 0 if ref is None else 1
    terms = (("(intercept)",) if intercept else ()) + tuple(names)
    return [f"'{t}' for class {classes[int(order[j])]!r}" for t in terms for j in range(first, len(classes))]


def _null_deviance(loss: MultinomialLoss, n: int, off: np.ndarray | None, intercept: bool, tol: float,
                   max_iter: int) -> float:
    """Deviance of the intercept-only model (reference form: the same optimum as any form).

    Without an offset its probabilities are the class shares ``T_k / T`` (``T_k`` the total
    weight of class k), so the deviance is ``-2 sum_k T_k log(T_k / T)`` exactly; with an
    offset it is fitted (Newton on the intercepts alone)."""
    if intercept and off is None:
        totals = loss.class_totals()
        T = float(totals.sum())
        used = totals > 0
        return float(-2.0 * np.sum(totals[used] * np.log(totals[used] / T)))
    ref_loss = MultinomialLoss(loss.codes, loss.K, loss.weights, reference=True)
    off_ref = off
    if off is not None and not loss.reference:
        off_ref = off[:, 1:] - off[:, :1]
    if off_ref is not None and off_ref.ndim == 2 and off_ref.shape[1] == 1:
        off_ref = off_ref[:, 0]  # one output: the problem's eta is (n,)
    if not intercept:
        eta = np.zeros((n, loss.K - 1)) if off_ref is None else off_ref
        return ref_loss.deviance(eta)
    P = LinearModelProblem(np.zeros((n, 0)), ref_loss, intercept=True, offset=off_ref)
    res = newton(P, tol=tol, max_iter=max_iter)
    return ref_loss.deviance(P.eta(res.z))


def score_and_information(fit: SoftmaxFit, X: Any, y: Any, weights: Any, coef: Any, b: Any,
                          free_intercept: bool) -> tuple[np.ndarray, np.ndarray]:
    """Score of the penalised log-likelihood and the information at delivered ``(b, coef)``,
    both in the order of ``fit.covariance``.  With ``free_intercept`` the intercepts are
    first set to their maximum-likelihood values given ``coef``."""
    Xa = fit._design(X)
    n = Xa.shape[0]
    classes, codes = read_labels(y, n)
    if tuple(classes) != tuple(fit.classes):
        raise InputError(f"y has the classes {classes} but the fit was made on {fit.classes}; pass the same labels")
    w, scale = scaled_case_weights(as_weights(weights, n))  # the sums are scaled back below
    theta, _ = fit._free_parameters(coef, b)
    K = len(classes)
    cols = fit._free_columns()
    per = len(fit.names) + int(fit.with_intercept)
    Theta = np.zeros((per, K))
    Theta[:, cols] = theta.reshape(len(cols), per).T
    ref = None if fit.reference_class is None else fit.classes.index(fit.reference_class)
    order = np.arange(K) if ref is None else np.array([ref] + [k for k in range(K) if k != ref])
    icodes = np.argsort(order)[codes]
    loss = MultinomialLoss(icodes, K, w, reference=ref is not None)
    first = int(ref is not None)
    Tint = Theta[:, order][:, first:]  # internal free columns
    B = Tint[int(fit.with_intercept):]
    eta_slopes = Xa @ B
    if fit.with_intercept:
        if free_intercept:
            P = LinearModelProblem(np.zeros((n, 0)), loss, intercept=True, offset=eta_slopes)
            base: Any = P
            start = None
            if ref is None:
                E = sum_zero_subspace(P)
                base, start = AffineProblem(P, np.zeros(P.size), E), E.T @ P.start()
            r = newton(base, tol=DEFAULT_TOL, max_iter=100, start=start)
            zb = base.embed(r.z) if base is not P else r.z
            Tint = Tint.copy()
            Tint[0] = P.to_original(zb)
        eta = eta_slopes + Tint[0]
    else:
        eta = eta_slopes
    del eta_slopes
    R = loss.gradient(eta)  # (n, Kf)
    Kf = loss.outputs
    off = int(fit.with_intercept)
    pen = np.full(per, fit.l2)
    if fit.with_intercept:
        pen[0] = 0.0
    # score and information over blocks of the rows a_i = (1, x_i): neither [1, X] nor the
    # (n, Kf, Kf) curvature is formed whole
    AR = np.zeros((per, Kf))
    info = np.zeros((per, Kf, per, Kf))
    for lo in range(0, n, ROWS):
        Xb = Xa[lo : lo + ROWS]
        A = np.empty((Xb.shape[0], per))
        if off:
            A[:, 0] = 1.0
        A[:, off:] = Xb
        AR += A.T @ R[lo : lo + ROWS]
        W = loss.curvature_rows(eta, slice(lo, lo + ROWS))  # (rows, Kf, Kf)
        for k in range(Kf):
            for m in range(k, Kf):
                G = A.T @ (A * W[:, k, m][:, None])
                info[:, k, :, m] += G
                if m != k:
                    info[:, m, :, k] += G.T
    info *= scale
    for k in range(Kf):
        info[:, k, :, k] += np.diag(pen)
    U = -(AR * scale + pen[:, None] * Tint)  # (per, Kf)
    # internal columns -> classes order, class-major
    internal_col = {int(order[j]): j - first for j in range(first, K)}
    sel = [internal_col[k] for k in cols]
    Uc = U[:, sel].T.ravel()
    Ic = info[:, sel][:, :, :, sel].transpose(1, 0, 3, 2).reshape(len(sel) * per, len(sel) * per)
    if ref is None:
        # each term's shared shift over the classes carries no information from the data
        # (only the penalty's, along which the centred score is 0): adding u u' along it
        # makes U' I^-1 U the pseudo-inverse form
        for t in range(per):
            at = np.arange(K) * per + t
            Ic[np.ix_(at, at)] += 1.0 / K
    return Uc, 0.5 * (Ic + Ic.T)
