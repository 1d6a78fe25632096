r"""Exact detection of complete and quasi-complete separation by a linear programme.

Albert & Anderson (1984): the maximum-likelihood estimate of a logistic regression exists
(is finite) exactly when no direction :math:`\theta \ne 0` (intercept included) has
:math:`z_i a_i'\theta \ge 0` for every observation, with :math:`a_i = (1, x_i)` and
:math:`z_i = +1` for a success, :math:`-1` for a failure, unless :math:`a_i'\theta = 0`
for all of them (a direction in the null space of the design, which is rank deficiency,
not separation).  With strict inequality everywhere the separation is *complete*;
otherwise *quasi-complete*.

Following Konis (2007), the linear programme

.. math::

    \max_{\theta,\,t}\ \sum_i t_i \quad\text{s.t.}\quad z_i a_i'\theta \ge t_i,\quad
    0 \le t_i \le 1,\quad \theta \text{ free}

has optimum :math:`t_i = 1` exactly on the largest set of observations that some
separating direction predicts strictly (the cone of separating directions is convex and
closed under scaling), and :math:`t_i = 0` elsewhere.  Separation is present iff that set
is non-empty; it is complete iff the set holds every observation.  A grouped row with
``0 < y < m`` contributes a success and a failure, so it can never be predicted
perfectly.  The columns are standardised before the programme is solved; the direction
is reported in the caller's coordinates, scaled to max-abs 1.

SciPy's ``linprog`` (HiGHS) solves the programme; it is imported inside
:func:`check_separation` only.

References
----------
Albert, A. & Anderson, J. A. (1984). On the existence of maximum likelihood estimates in
logistic regression models. Biometrika 71, 1-10.
Konis, K. (2007). Linear programming algorithms for detecting separated data in binary
logistic regression models. DPhil thesis, University of Oxford.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..support.errors import InputError, LintoolsError
from .records import INTERCEPT_NAME
from ..support.validate import (
    as_matrix,
    as_weights,
    check_flag,
    check_names,
    check_positive_int,
    power_of_two,
    weight_scale,
)

__all__ = ["SeparationCheck", "MultinomialSeparationCheck", "check_separation", "separation_lp", "multinomial_separation"]

#: A row counts as perfectly predicted when its LP slack variable exceeds this.
ROW_THRESHOLD = 0.5
#: Direction components below this (relative, standardised coordinates) are not "involved".
COLUMN_THRESHOLD = 1e-7


NOT_SEPARATED = "no separation: the maximum-likelihood estimate exists (Albert & Anderson 1984)"


def _separated(check: Any) -> bool:
    return check.kind != "none"


def _shown_rows(rows: np.ndarray, max_rows: Any) -> tuple[str, str]:
    """The first ``max_rows`` row numbers, and the count of the others."""
    max_rows = check_positive_int(max_rows, "max_rows", 0)
    shown = ", ".join(str(int(r)) for r in rows[:max_rows])
    return shown, (f" and {rows.size - max_rows} more" if rows.size > max_rows else "")


@dataclass(frozen=True)
class SeparationCheck:
    """Result of :func:`check_separation`.

    Attributes
    ----------
    kind : str
        ``"none"``, ``"quasi-complete"`` or ``"complete"``.
    direction : ndarray
        A separating direction for the slopes (caller's coordinates; zeros when none).
    intercept_direction : float
        Its intercept component (0 without intercept or separation).
    columns : tuple of str
        Terms with a non-zero component in the direction (the intercept included).
    rows : ndarray of int
        Rows predicted perfectly (their fitted probability goes to 0 or 1).
    names : tuple of str
        Names of the columns of X.
    """

    kind: str
    direction: np.ndarray
    intercept_direction: float
    columns: tuple[str, ...]
    rows: np.ndarray
    names: tuple[str, ...]

    separated = property(_separated, doc="True for complete or quasi-complete separation.")

    def describe(self, max_rows: int = 10) -> str:
        """One paragraph in plain words."""
        if not self.separated:
            return NOT_SEPARATED
        terms = []
        if self.intercept_direction != 0:
            terms.append(f"{self.intercept_direction:+.6g}*{INTERCEPT_NAME}")
        terms += [f"{v:+.6g}*{n}" for v, n in zip(self.direction, self.names) if v != 0]
        shown, more = _shown_rows(self.rows, max_rows)
        return (
            f"{self.kind} separation (Albert & Anderson 1984): along the direction "
            f"{' '.join(terms)} (columns involved: {', '.join(self.columns)}) the linear predictor "
            f"orders the classes perfectly on {self.rows.size} row(s) ({shown}{more}), so the "
            "log-likelihood keeps increasing as the coefficients grow without bound and the "
            "maximum-likelihood estimate does not exist"
        )


#: What each status of ``scipy.optimize.linprog`` means for the separation programme.
#: The programme is always feasible (theta = 0, t = 0) and bounded (0 <= t <= 1), so any
#: status but 0 is a failure of the solver on these numbers, never an answer.
LP_STATUS = {
    1: "stopped at its iteration limit before it could decide",
    2: "reported the programme infeasible, which it cannot be (theta = 0 is always a solution)",
    3: "reported the programme unbounded, which it cannot be (every slack lies in [0, 1])",
    4: "ran into numerical difficulties",
}
LP_REMEDY = (
    "the design is probably too badly scaled or too nearly collinear for the check: rescale "
    "the columns or drop nearly collinear ones and try again; or fit with l2 > 0 or "
    "firth=True, whose estimates exist whether or not the classes are separated"
)


class MissingSciPyError(InputError):
    """The exact separation check needs SciPy, which is not installed (an optional extra)."""


def _linprog() -> tuple[Any, Any]:
    """SciPy's sparse module and ``linprog``, or a :class:`MissingSciPyError` saying how to get them."""
    try:
        from scipy import sparse
        from scipy.optimize import linprog
    except ImportError:
        raise MissingSciPyError(
            "the exact separation check needs SciPy (scipy.optimize.linprog), which is not "
            "installed; install it with pip install scipy (or the lintools[scipy] extra)"
        ) from None
    return sparse, linprog


def _solve_lp(linprog: Any, cost: np.ndarray, M: Any, bounds: list) -> np.ndarray:
    """Run the separation programme; a failure becomes a sentence with a remedy, never the
    solver's own status text."""
    if not np.all(np.isfinite(M.data)):
        raise InputError(
            "the separation check cannot be set up: the standardised design has a value beyond "
            "the float64 range; rescale the columns of X (divide by a power of ten)"
        )
    try:
        res = linprog(cost, A_ub=M, b_ub=np.zeros(M.shape[0]), bounds=bounds, method="highs")
    except (ValueError, ArithmeticError, np.linalg.LinAlgError):
        res = None
    status = -1 if res is None else int(res.status)
    if status != 0 or res.x is None or not np.all(np.isfinite(res.x)):
        what = LP_STATUS.get(status, "failed without an answer")
        raise LintoolsError(
            f"the exact separation check (a linear programme, Konis 2007) {what}, so whether the "
            f"classes are separated is not known; {LP_REMEDY}"
        )
    return res.x


def separation_lp(A: np.ndarray, sign: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Solve Konis's programme for the rows ``sign_i * A_i``; return (theta, t).

    Raises :class:`MissingSciPyError` (an :class:`lintools.InputError`) when SciPy is not
    installed, and :class:`lintools.LintoolsError` with a remedy when the solver fails.
    """
    sparse, linprog = _linprog()
    r, k = A.shape
    M = sparse.hstack([sparse.csr_matrix(-(A * sign[:, None])), sparse.identity(r, format="csr")], format="csr")
    cost = np.concatenate([np.zeros(k), -np.ones(r)])
    bounds = [(None, None)] * k + [(0.0, 1.0)] * r
    x = _solve_lp(linprog, cost, M, bounds)
    return x[:k], x[k:]


def _standardise(X: np.ndarray, v: np.ndarray, intercept: bool) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Powers of two ``u`` near the columns' largest magnitudes, and the weighted centres ``c``
    and scales ``s`` of ``X / u`` (weights ``v`` > 0): the programme's columns are
    ``(X / u - c) / s``.

    Dividing by powers of two is exact, so neither columns near 1e308 or 5e-324 nor
    weights of 1e308 or 5e-324 overflow or vanish in the sums.
    """
    p = X.shape[1]
    if p == 0 or X.shape[0] == 0 or not v.sum() > 0:
        return np.ones(p), np.zeros(p), np.ones(p)
    v = v / weight_scale(v)
    u = np.array([power_of_two(float(b)) for b in np.max(np.abs(X), axis=0)])
    Xs = X / u
    total = v.sum()
    c = (v @ Xs) / total if intercept else np.zeros(p)
    s = np.sqrt(v @ (Xs - c) ** 2 / total)
    return u, c, np.where(s > 0, s, 1.0)


def _caller_direction(t: np.ndarray, b: np.ndarray, u: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Slopes ``t / u`` (row ``j`` divided by ``u_j``) and intercepts ``b`` in the caller's
    coordinates, scaled together to max-abs 1 without overflow: both are first multiplied by
    the smallest ``u_j`` of the columns involved (at most 1), so no ratio exceeds 1."""
    involved = np.any(np.reshape(t != 0, (t.shape[0], -1)), axis=1) if t.size else np.zeros(0, dtype=bool)
    q = min(1.0, float(np.min(u[involved]))) if involved.any() else 1.0
    G = t * np.reshape(q / u, (-1,) + (1,) * (t.ndim - 1))
    bb = b * q
    scale = max(float(np.max(np.abs(G), initial=0.0)), float(np.max(np.abs(bb), initial=0.0)), 1e-300)
    return G / scale, bb / scale


def _expanded(y: np.ndarray, m: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Observation rows (index into the data) and signs: +1 success, -1 failure."""
    use = (w > 0) & (m > 0)
    succ = np.flatnonzero(use & (y > 0))
    fail = np.flatnonzero(use & (y < m))
    return np.concatenate([succ, fail]), np.concatenate([np.ones(succ.size), -np.ones(fail.size)])


def separation_from_arrays(
    X: np.ndarray,
    y: np.ndarray,
    m: np.ndarray,
    w: np.ndarray,
    intercept: bool,
    names: tuple[str, ...],
) -> SeparationCheck:
    """:func:`check_separation` on checked arrays (successes ``y`` out of ``m``)."""
    n, p = X.shape
    rows, sign = _expanded(y, m, w)
    use = rows
    keep = np.unique(use)
    u, c, s = _standardise(X[keep], ((w / weight_scale(w)) * (m / weight_scale(m)))[keep], intercept)
    A = (X[rows] / u - c) / s
    if intercept:
        A = np.column_stack([np.ones(rows.size), A])
    theta, t = separation_lp(A, sign)
    strict = t > ROW_THRESHOLD
    perfect = np.unique(rows[strict])
    if not strict.any():
        kind = "none"
    elif strict.all():
        kind = "complete"
    else:
        kind = "quasi-complete"
    if kind == "none":
        return SeparationCheck(kind, np.zeros(p), 0.0, (), np.zeros(0, dtype=int), names)
    off = int(intercept)
    g = theta[off:]
    big = max(float(np.max(np.abs(theta))), 1e-300)
    t = np.where(np.abs(g) > COLUMN_THRESHOLD * big, g / s, 0.0)  # slopes on the columns X / u
    b = 0.0
    if intercept:
        shift = float(c @ t)
        b = float(theta[0]) - shift
        if abs(b) <= COLUMN_THRESHOLD * (abs(float(theta[0])) + float(np.abs(c * t).sum())):
            b = 0.0
    beta, b_arr = _caller_direction(t, np.array(b), u)
    b = float(b_arr)
    columns = ((INTERCEPT_NAME,) if b != 0 else ()) + tuple(names[j] for j in range(p) if beta[j] != 0)
    return SeparationCheck(kind, beta, b, columns, perfect.astype(int), names)


def check_separation(
    X: Any,
    y: Any,
    *,
    intercept: bool = True,
    trials: Any = None,
    weights: Any = None,
    positive: Any = None,
    names: Any = None,
) -> SeparationCheck:
    r"""Decide exactly whether the classes are (quasi-)completely separated.

    Solves Konis's (2007) linear programme (see the module docstring); a separated data
    set has no finite maximum-likelihood estimate (Albert & Anderson 1984).

    Parameters
    ----------
    X : array-like (n, p)
        Design without the intercept column.
    y : array-like (n,)
        Two labels (the positive class is the larger, or ``positive``), or with
        ``trials`` the success counts.  With more than two labels the multinomial
        (softmax) check runs and a :class:`MultinomialSeparationCheck` is returned.
    intercept : bool
        Whether the model has an intercept (default True).
    trials : array-like (n,), optional
        Trials per row for grouped data.
    weights : array-like (n,), optional
        Case weights; rows of weight 0 are left out.
    positive : label, optional
        The positive class (binary labels only).
    names : sequence of str, optional
        Column names for the report.

    Returns
    -------
    SeparationCheck or MultinomialSeparationCheck

    Raises
    ------
    lintools.InputError
        For bad input (the same checks as :func:`lintools.logistic`), and when SciPy is not
        installed (the programme needs ``scipy.optimize.linprog``; the error then says how
        to install it).
    lintools.LintoolsError
        When the linear-programming solver cannot decide (the message says why and what to
        do: usually rescale or drop nearly collinear columns).
    """
    from .responses import binary_response, read_labels

    Xa, found = as_matrix(X, "X")
    n, p = Xa.shape
    names_t = check_names(names, p, found)
    w = as_weights(weights, n)
    intercept = check_flag(intercept, "intercept")
    if trials is None and positive is None:
        classes, codes = read_labels(y, n)
        if len(classes) > 2:
            return multinomial_separation(Xa, codes, tuple(classes), w, bool(intercept), names_t)
    yy, m, _, _ = binary_response(y, trials, positive, n)
    return separation_from_arrays(Xa, yy, m, w, bool(intercept), names_t)


@dataclass(frozen=True)
class MultinomialSeparationCheck:
    """Result of the exact check for a softmax model (more than two classes).

    Attributes
    ----------
    kind : str
        ``"none"``, ``"quasi-complete"`` or ``"complete"``.
    direction : ndarray (p, K)
        A separating direction for the slopes, one column per class (caller's
        coordinates, scaled to max-abs 1; defined up to adding the same vector to every
        column; zeros when none).
    intercept_direction : ndarray (K,)
        Its intercept components.
    classes : tuple
        The class labels, in column order.
    separated_classes : tuple
        Classes of the rows predicted perfectly.
    columns : tuple of str
        Terms whose component differs between classes.
    rows : ndarray of int
        Rows predicted perfectly (their own class's probability goes to 1).
    names : tuple of str
        Names of the columns of X.
    """

    kind: str
    direction: np.ndarray
    intercept_direction: np.ndarray
    classes: tuple
    separated_classes: tuple
    columns: tuple[str, ...]
    rows: np.ndarray
    names: tuple[str, ...]

    separated = property(_separated, doc="True for complete or quasi-complete separation.")

    def describe(self, max_rows: int = 10) -> str:
        """One paragraph in plain words."""
        if not self.separated:
            return NOT_SEPARATED
        shown, more = _shown_rows(self.rows, max_rows)
        which = ", ".join(repr(c) for c in self.separated_classes)
        return (
            f"{self.kind} separation (Albert & Anderson 1984): a direction of the coefficients "
            f"(columns involved: {', '.join(self.columns)}) never ranks a row's own class below "
            f"another class and ranks it strictly above the others on {self.rows.size} row(s) "
            f"({shown}{more}) of the class(es) {which}, so the log-likelihood keeps increasing as "
            "the coefficients grow without bound and the maximum-likelihood estimate does not exist"
        )


def multinomial_separation(
    X: np.ndarray,
    codes: np.ndarray,
    classes: tuple,
    w: np.ndarray,
    intercept: bool,
    names: tuple[str, ...],
) -> MultinomialSeparationCheck:
    r"""Exact separation check for the multinomial logit on checked arrays.

    The estimate fails to exist exactly when some :math:`\Theta \ne 0` (one column per
    class, intercept row included) has :math:`a_i'(\Theta_{c_i} - \Theta_k) \ge 0` for every
    row ``i`` and class :math:`k \ne c_i`, not all zero (Albert & Anderson 1984, sec. 4).
    Konis's programme carries over with one slack per (row, other class):
    :math:`\max \sum t_{ik}` subject to :math:`a_i'(\Theta_{c_i} - \Theta_k) \ge t_{ik}`,
    :math:`0 \le t_{ik} \le 1`; a row is predicted perfectly when all its slacks are 1.
    """
    sparse, linprog = _linprog()
    n, p = X.shape
    K = len(classes)
    use = np.flatnonzero(w > 0)
    Xu = X[use]
    u, c, s = _standardise(Xu, w[use], intercept)
    A = (Xu / u - c) / s
    if intercept:
        A = np.column_stack([np.ones(use.size), A])
    k1 = A.shape[1]
    cu = codes[use]
    # constraint rows: for each used row and each other class k, -(a_i' Theta_c - a_i' Theta_k) + t <= 0
    ri, kk = np.nonzero(np.arange(K)[None, :] != cu[:, None])
    r = ri.size
    own, other = cu[ri], kk
    cols_own = own[:, None] * k1 + np.arange(k1)[None, :]
    cols_other = other[:, None] * k1 + np.arange(k1)[None, :]
    data = np.concatenate([-A[ri].ravel(), A[ri].ravel(), np.ones(r)])
    rows_idx = np.concatenate([np.repeat(np.arange(r), k1), np.repeat(np.arange(r), k1), np.arange(r)])
    cols_idx = np.concatenate([cols_own.ravel(), cols_other.ravel(), K * k1 + np.arange(r)])
    M = sparse.csr_matrix((data, (rows_idx, cols_idx)), shape=(r, K * k1 + r))
    cost = np.concatenate([np.zeros(K * k1), -np.ones(r)])
    bounds = [(None, None)] * (K * k1) + [(0.0, 1.0)] * r
    x = _solve_lp(linprog, cost, M, bounds)
    theta = x[: K * k1].reshape(K, k1).T  # (k1, K)
    t = x[K * k1 :]
    strict = np.zeros(use.size, dtype=bool)
    all_one = np.ones(use.size, dtype=bool)
    np.logical_and.at(all_one, ri, t > ROW_THRESHOLD)
    np.logical_or.at(strict, ri, t > ROW_THRESHOLD)
    if not strict.any():
        return MultinomialSeparationCheck("none", np.zeros((p, K)), np.zeros(K), tuple(classes), (), (),
                                          np.zeros(0, dtype=int), names)
    kind = "complete" if all_one.all() else "quasi-complete"
    theta = theta - theta.mean(axis=1, keepdims=True)  # the shared shift carries no information
    off = int(intercept)
    big = max(float(np.max(np.abs(theta))), 1e-300)
    G = np.where(np.abs(theta[off:]) > COLUMN_THRESHOLD * big, theta[off:] / s[:, None], 0.0)
    b = theta[0] - c @ G if intercept else np.zeros(K)
    b = np.where(np.abs(b) > COLUMN_THRESHOLD * big, b, 0.0)
    G, b = _caller_direction(G, b, u)
    terms = ((INTERCEPT_NAME,) if intercept and np.any(b != 0) else ()) + tuple(
        names[j] for j in range(p) if np.any(G[j] != 0))
    perfect_rows = use[all_one] if all_one.any() else use[strict]
    sep_classes = tuple(classes[k] for k in np.unique(codes[perfect_rows]))
    return MultinomialSeparationCheck(kind, G, b, tuple(classes), sep_classes, terms,
                                      np.sort(perfect_rows).astype(int), names)
