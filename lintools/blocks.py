r"""Fits over data that arrive in row blocks: out of core, or on a Dask cluster.

The data are never held whole.  The caller passes ``source``, a function of no
arguments that returns a *fresh* iterator of blocks on every call; each block is
``(X_block, y_block)`` or ``(X_block, y_block, weights_block)``.  Every fit reads the
blocks in one or more *passes*; a pass maps each block to a small summary (an R factor,
or a gradient and a curvature matrix) and reduces the summaries pairwise, as a binary
tree.  Alternatively ``X`` and ``y`` (and ``weights``) may be row-chunked dask arrays:
the same passes then run as a map over the chunks and a tree reduction on the Dask
scheduler (see :mod:`lintools._dask`; dask is imported only then).

Least squares (:func:`least_squares_blocks`) minimises

.. math::

    \tfrac12 \sum_i w_i (y_i - b - x_i^\top\beta)^2 + \tfrac{\lambda}{2}\lVert\beta\rVert^2

by TSQR (Demmel et al. 2012).  Pass 1: each block's weighted columns ``[X, y]`` are
centred at the block's own weighted mean and reduced to a Householder R factor; two
summaries ``(W_a, m_a, R_a)`` and ``(W_b, m_b, R_b)`` combine into the R factor of
``[R_a; R_b; sqrt(W_a W_b / W) (m_b - m_a)']`` with ``W = W_a + W_b`` and mean
``m_a + (W_b / W)(m_b - m_a)``.  This is exact algebra (the centred cross-product matrix
of a union is the sum of the parts' plus the between-means term; Chan, Golub & LeVeque
1983), so every factor stays centred at the exact mean of its rows and no column mean
ever cancels against its spread.  The ridge enters as ``p`` extra rows
``sqrt(l2) / s_j`` of the column-scaled factor.  Passes 2+: the residual of the answer
in extended precision (``numpy.longdouble``), which gives the RSS, the gradient and a
corrected step through the same factor (corrected semi-normal equations; Bjorck 1987),
repeated until the correction is at the rounding level (at most ``MAX_REFINE`` times).
The result is the :class:`lintools.LinearFit` that :func:`lintools.least_squares` gives
on the concatenated rows (classical covariance, case weights).

Logistic regression (:func:`logistic_blocks`) minimises

.. math::

    -\sum_i w_i\,[\,y_i\log\mu_i + (1 - y_i)\log(1-\mu_i)\,] + \tfrac{\lambda}{2}\lVert\beta\rVert^2,
    \qquad \mu_i = 1 / (1 + e^{-(b + x_i^\top\beta)}),

by Newton-Raphson with step halving (:func:`lintools.solvers.newton.newton`, the solver
of the in-memory fit) on a problem whose every evaluation is one pass: it sums the
objective, the gradient and the information ``[1, X]' W [1, X]`` over the blocks (in the
standardised coordinates of :class:`lintools.solvers.LinearModelProblem`; the centres
and scales come from a first pass, which also checks the rank).  A trial step of the line
search is a pass that also evaluates the trial point, so an accepted full step costs one
pass.  It stops when the max-abs gradient in the caller's coordinates is ``<= tol``.

References
----------
Demmel, J., Grigori, L., Hoemmen, M. & Langou, J. (2012). Communication-optimal parallel
and sequential QR and LU factorizations. SIAM J. Sci. Comput. 34, A206-A239.
Chan, T. F., Golub, G. H. & LeVeque, R. J. (1983). Algorithms for computing the sample
variance: analysis and recommendations. The American Statistician 37, 242-247.
Bjorck, A. (1987). Stability analysis of the method of seminormal equations for linear
least squares problems. Linear Algebra and its Applications 88/89, 31-48.
Albert, A. & Anderson, J. A. (1984). On the existence of maximum likelihood estimates in
logistic regression models. Biometrika 71, 1-10.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Any, Callable, Sequence

import numpy as np

from . import _distributions as dist
from ._errors import (
    IllConditionedWarning,
    InputError,
    IterationLimitWarning,
    LintoolsError,
    LintoolsWarning,
    SeparationError,
)
from ._records import Convergence, LinearFit, LogisticFit
from ._validate import as_matrix, as_vector, check_names, check_nonnegative, check_positive_int
from .inference import covariance, likelihood_ratio
from .least_squares import ILL_CONDITIONED, _describe_alias, _residual_df
from .linalg import aliased_columns, condition_number, default_rank_tolerance, inverse_upper, solve_lower, solve_upper
from .logistic import ETA_LIMIT, _check_flag, _check_tol, _labels
from .losses import BinomialLoss
from .solvers import Evaluation, IterationRecord, SingularMatrixError
from .solvers.newton import newton

__all__ = ["least_squares_blocks", "logistic_blocks"]

#: Corrections of the least-squares answer (each one a pass) before it is accepted.
MAX_REFINE = 3
#: Rows per piece when a block is processed in extended precision.
_PIECE_ROWS = 1 << 16
_EPS = float(np.finfo(float).eps)


# ---------------------------------------------------------------------------------------
# Reading and checking blocks
# ---------------------------------------------------------------------------------------


@dataclass(frozen=True)
class BlockSpec:
    """What a block must look like: columns, response kind, whether weights come along.

    ``labels`` is ``None`` (a numeric response), ``"collect"`` (the first logistic pass:
    any two labels) or the two classes ``(negative, positive)`` found by that pass.
    """

    p: int | None
    labels: Any = None
    weights: bool | None = None


def _prefixed(index: int, exc: InputError) -> InputError:
    return InputError(f"block {index} (rows counted within the block): {exc}")


def _response_codes(index: int, yb: Any, m: int, classes: tuple) -> np.ndarray:
    """0/1 codes of ``yb`` for the known ``classes``; a label not seen before is an error."""
    if isinstance(yb, np.ndarray) and yb.ndim == 1 and yb.shape[0] == m and yb.dtype.kind in "biuf":
        positive = yb == classes[1]
        if bool(np.all(positive | (yb == classes[0]))):  # the common case, without sorting
            return positive.astype(float)
    try:
        found, codes = _labels(yb, m)
    except InputError as exc:
        raise _prefixed(index, exc) from None
    lookup = {c: k for k, c in enumerate(classes)}
    new = [c for c in found if c not in lookup]
    if new:
        row = int(np.argmax(codes == found.index(new[0])))
        raise InputError(
            f"block {index}: y has the label {new[0]!r} at row {row} of the block, which the first "
            f"pass did not see (labels {classes[0]!r}, {classes[1]!r}); source() must yield the same "
            "blocks on every pass"
        )
    positive = found.index(classes[1]) if classes[1] in found else -1
    return (codes == positive).astype(float)


def _label_summary(index: int, yb: Any, m: int, w: np.ndarray | None) -> dict:
    """Labels of a block: label -> [block, first row, total weight]."""
    try:
        found, codes = _labels(yb, m)
    except InputError as exc:
        raise _prefixed(index, exc) from None
    first = [int(np.argmax(codes == k)) for k in range(len(found))]
    totals = np.bincount(codes, weights=w, minlength=len(found))
    seen = {found[k]: [index, first[k], float(totals[k])] for k in range(len(found))}
    return _earliest(seen)


def _earliest(seen: dict) -> dict:
    """The three labels seen first (by block, then row): enough to name a third label."""
    if len(seen) <= 3:
        return seen
    keep = sorted(seen, key=lambda c: (seen[c][0], seen[c][1]))[:3]
    return {c: seen[c] for c in keep}


def _check_two(seen: dict) -> None:
    """Exactly two labels over all blocks may remain; else name the third one seen."""
    if len(seen) <= 2:
        return
    order = sorted(seen, key=lambda c: (seen[c][0], seen[c][1]))
    a, b, c = order[:3]
    block, row = seen[c][0], seen[c][1]
    raise InputError(
        f"block {block}: y has a third label {c!r} at row {row} of the block (after {a!r} and "
        f"{b!r}); a binary logistic model needs exactly two labels over all blocks: recode y, "
        "or fit a multiclass (softmax) model"
    )


def check_block(index: int, item: Any, spec: BlockSpec) -> tuple[np.ndarray, Any, np.ndarray | None, Any]:
    """Validate one block; return ``(X, y, weights or None, column names or None)``.

    ``y`` is a float array (numeric response), a label summary (``spec.labels ==
    "collect"``) or 0/1 codes of the positive class.  Errors name the block, the row
    within the block, the column and the remedy.
    """
    if not isinstance(item, (tuple, list)) or len(item) not in (2, 3):
        what = f"a {type(item).__name__}" + (f" of length {len(item)}" if isinstance(item, (tuple, list)) else "")
        raise InputError(
            f"block {index}: the source yielded {what}; each block must be a tuple "
            "(X_block, y_block) or (X_block, y_block, weights_block)"
        )
    try:
        X, found = as_matrix(item[0], "X")
    except InputError as exc:
        raise _prefixed(index, exc) from None
    m, q = X.shape
    if spec.p is not None and q != spec.p:
        raise InputError(
            f"block {index}: X has {q} columns but block 0 had {spec.p}; every block must have "
            "the same columns in the same order"
        )
    has_w = len(item) == 3 and item[2] is not None
    if spec.weights is not None and has_w != spec.weights:
        raise InputError(
            f"block {index}: " + ("weights are given, but block 0 had none" if has_w else
                                  "no weights are given, but block 0 had them")
            + "; give weights with every block or with none"
        )
    w = None
    if has_w:
        try:
            w = as_vector(item[2], "weights", m)
        except InputError as exc:
            raise _prefixed(index, exc) from None
        bad = w < 0
        if bad.any():
            i = int(np.argmax(bad))
            raise InputError(
                f"block {index}: weights has a negative value ({w[i]:g}) at row {i} of the block; "
                "weights must be >= 0"
            )
    if spec.labels is None:
        try:
            y = as_vector(item[1], "y", m)
        except InputError as exc:
            raise _prefixed(index, exc) from None
    elif spec.labels == "collect":
        y = _label_summary(index, item[1], m, w)
    else:
        y = _response_codes(index, item[1], m, spec.labels)
    return X, y, w, found


def run_task(kernel: Callable, index: int, item: Any, spec: BlockSpec, args: tuple) -> dict:
    """Check a block and apply ``kernel(X, y, w, *args)`` to it (the map step of a pass)."""
    X, y, w, _ = check_block(index, item, spec)
    out = kernel(X, y, w, *args)
    out["rows"] = X.shape[0]
    return out


def _tree(parts: Any, combine: Callable, cargs: tuple) -> Any:
    """Pairwise (binary-tree) reduction of an iterable, in order, keeping O(log n) partials."""
    stack: list[tuple[int, Any]] = []
    for part in parts:
        level = 0
        while stack and stack[-1][0] == level:
            part = combine(stack.pop()[1], part, *cargs)
            level += 1
        stack.append((level, part))
    if not stack:
        return None
    part = stack.pop()[1]
    while stack:
        part = combine(stack.pop()[1], part, *cargs)
    return part


class _StreamRunner:
    """Runs passes over ``source()``: checks each block, maps it, reduces pairwise.

    The first pass fixes the number of columns, whether weights come along, and the rows
    of every block; later passes must see the same.
    """

    def __init__(self, source: Any, labels: Any = None) -> None:
        if not callable(source):
            raise InputError(
                f"source must be a function of no arguments that returns a fresh iterator of "
                f"(X_block, y_block[, weights_block]) on every call; got a {type(source).__name__} "
                "(wrap a list of blocks as lambda: iter(blocks))"
            )
        self.source = source
        self.passes = 0
        self.rows: list[int] | None = None
        self.spec = BlockSpec(None, labels, None)
        self.names: tuple[str, ...] | None = None
        self._last_iterator: Any = None

    def _iterator(self) -> Any:
        it = self.source()
        if it is not None and it is self._last_iterator and iter(it) is it:
            raise InputError(
                "source() returned the same iterator as on the previous pass; it must return a "
                "fresh one on every call (make it a generator function, not a generator)"
            )
        try:
            iterator = iter(it)
        except TypeError:
            raise InputError(
                f"source() returned a {type(it).__name__}, which is not an iterator of blocks; "
                "make source a generator function (def source(): ... yield X_block, y_block)"
            ) from None
        self._last_iterator = it
        return iterator

    def reduce(self, kernel: Callable, combine: Callable, args: tuple = (), cargs: tuple = (),
               labels: Any = "same") -> Any:
        """One pass: check and map every block, reduce pairwise; ``labels`` resets the response kind."""
        if labels != "same":
            self.spec = BlockSpec(self.spec.p, labels, self.spec.weights)
        self.passes += 1
        first = self.rows is None
        rows: list[int] = []

        def parts():
            for index, item in enumerate(self._iterator()):
                X, y, w, found = check_block(index, item, self.spec)
                if index == 0 and first:
                    self.spec = BlockSpec(X.shape[1], self.spec.labels, w is not None)
                    self.names = found
                if not first and (index >= len(self.rows) or X.shape[0] != self.rows[index]):
                    expected = f"{self.rows[index]} rows" if index < len(self.rows) else "no such block"
                    raise InputError(
                        f"block {index} on pass {self.passes} has {X.shape[0]} rows, but on pass 1 it had "
                        f"{expected}; source() must yield the same blocks on every pass"
                    )
                rows.append(X.shape[0])
                out = kernel(X, y, w, *args)
                out["rows"] = X.shape[0]
                yield out

        result = _tree(parts(), combine, cargs)
        if result is None:
            raise InputError(
                f"source() yielded no blocks on pass {self.passes}"
                + (f" (pass 1 had {len(self.rows)}); it must return a fresh iterator on every call"
                   if not first else "; it must yield at least one (X_block, y_block) tuple")
            )
        if first:
            self.rows = rows
        elif len(rows) != len(self.rows):
            raise InputError(
                f"source() yielded {len(rows)} blocks on pass {self.passes} but {len(self.rows)} on "
                "pass 1; source() must yield the same blocks on every pass"
            )
        return result


def _is_dask(obj: Any) -> bool:
    """A dask array, recognised without importing dask."""
    return type(obj).__module__.split(".")[0] == "dask" and hasattr(obj, "to_delayed")


def _runner(source: Any, X: Any, y: Any, weights: Any, labels: Any = None) -> Any:
    """The stream runner for a source, or the Dask runner for dask arrays."""
    if source is not None and (X is not None or y is not None or weights is not None):
        raise InputError(
            "pass either source (a function returning an iterator of blocks) or X and y as "
            "row-chunked dask arrays, not both; block weights come with the blocks"
        )
    if source is not None:
        return _StreamRunner(source, labels)
    if X is None and y is None:
        raise InputError(
            "no data: pass source (a function returning a fresh iterator of (X_block, y_block"
            "[, weights_block]) on every call) or X and y as row-chunked dask arrays"
        )
    if not (_is_dask(X) and _is_dask(y) and (weights is None or _is_dask(weights))):
        kinds = ", ".join(f"{k} is a {type(v).__name__}" for k, v in (("X", X), ("y", y), ("weights", weights)) if v is not None)
        raise InputError(
            f"X=, y= (and weights=) must all be dask arrays ({kinds}); for in-memory arrays use "
            "lintools.least_squares / lintools.logistic, or pass a source of blocks"
        )
    from ._dask import DaskRunner

    return DaskRunner(X, y, weights, labels)


# ---------------------------------------------------------------------------------------
# Kernels: R factors with exact pairwise centring
# ---------------------------------------------------------------------------------------


def _factor(Z: np.ndarray, w: np.ndarray | None, intercept: bool) -> dict:
    """Weight, mean and R factor of the weighted, centred columns of ``Z`` (modified)."""
    m, k = Z.shape
    W = float(m) if w is None else float(w.sum())
    mean = np.zeros(k)
    if intercept:
        mean = (Z.sum(axis=0) if w is None else w @ Z) / W
        Z -= mean
        fix = (Z.sum(axis=0) if w is None else w @ Z) / W  # one correction of the rounded mean
        Z -= fix
        mean = mean + fix
    if w is not None:
        Z *= np.sqrt(w)[:, None]
    R = np.linalg.qr(Z, mode="r")
    if R.shape[0] < k:
        R = np.vstack([R, np.zeros((k - R.shape[0], k))])
    return {"W": W, "mean": mean, "R": R}


def _positive_rows(X: np.ndarray, y: np.ndarray | None, w: np.ndarray | None) -> tuple:
    if w is None or bool(np.all(w > 0)):
        return X, y, w
    keep = w > 0
    return X[keep], (None if y is None else y[keep]), w[keep]


def _factor_kernel(X: np.ndarray, y: np.ndarray, w: np.ndarray | None, intercept: bool) -> dict:
    """Pass 1 of least squares: R factor of ``[X, y]`` and the extremes of each column."""
    n_rows = X.shape[0]
    X, y, w = _positive_rows(X, y, w)
    m, p = X.shape
    out = {"n_pos": m, "n_rows": n_rows}
    if m == 0:
        return out
    Z = np.empty((m, p + 1))
    Z[:, :p] = X
    Z[:, p] = y
    out["lo"], out["hi"] = Z.min(axis=0), Z.max(axis=0)
    out.update(_factor(Z, w, intercept))
    return out


def _merge_factors(a: dict, b: dict, intercept: bool) -> dict:
    out = {"n_pos": a["n_pos"] + b["n_pos"], "n_rows": a["n_rows"] + b["n_rows"]}
    for key in ("labels",):
        if key in a or key in b:
            out[key] = _merge_labels(a.get(key, {}), b.get(key, {}))
    if "R" not in a or "R" not in b:
        src = a if "R" in a else b
        for key in ("W", "mean", "R", "lo", "hi"):
            if key in src:
                out[key] = src[key]
        return out
    W = a["W"] + b["W"]
    rows = [a["R"], b["R"]]
    mean = a["mean"]
    if intercept:
        d = b["mean"] - a["mean"]
        mean = a["mean"] + (b["W"] / W) * d
        rows.append(math.sqrt(a["W"] * b["W"] / W) * d[None, :])
    R = np.linalg.qr(np.vstack(rows), mode="r")
    out.update(W=W, mean=mean, R=R, lo=np.minimum(a["lo"], b["lo"]), hi=np.maximum(a["hi"], b["hi"]))
    return out


def _merge_labels(a: dict, b: dict) -> dict:
    out = {k: list(v) for k, v in a.items()}
    for label, (block, row, total) in b.items():
        if label in out:
            old = out[label]
            first = min((old[0], old[1]), (block, row))
            out[label] = [first[0], first[1], old[2] + total]
        else:
            out[label] = [block, row, total]
    try:
        sorted(out)
    except TypeError:
        raise InputError(
            "y mixes label types across blocks that cannot be ordered (for example numbers in one "
            "block and text in another); use one type for every label"
        ) from None
    return _earliest(out)


def _residual_kernel(X: np.ndarray, y: np.ndarray, w: np.ndarray | None, b0: float, beta: np.ndarray) -> dict:
    """Residual sums at ``(b0, beta)`` accumulated in extended precision, piece by piece."""
    ld = np.longdouble
    bl, b0l = beta.astype(ld), ld(b0)
    p = X.shape[1]
    rho, rss, gx = ld(0), ld(0), np.zeros(p, dtype=ld)
    for lo in range(0, X.shape[0], _PIECE_ROWS):
        Xl = X[lo : lo + _PIECE_ROWS].astype(ld)
        r = y[lo : lo + _PIECE_ROWS].astype(ld) - (Xl @ bl + b0l)
        wr = r if w is None else w[lo : lo + _PIECE_ROWS].astype(ld) * r
        rho += wr.sum()
        rss += wr @ r
        gx += Xl.T @ wr
    return {"rho": rho, "rss": rss, "gx": gx}


def _add(a: dict, b: dict) -> dict:
    """Sum of two partial results (maxima for ``top``, logical and for ``finite``)."""
    if "finite" in a and not (a["finite"] and b["finite"]):
        return {"finite": False, "change": math.inf}  # a linear predictor overflowed
    out = {}
    for key, value in a.items():
        if key == "top":
            out[key] = max(value, b[key])
        elif key == "finite":
            out[key] = value and b[key]
        else:
            out[key] = value + b[key]
    return out


# ---------------------------------------------------------------------------------------
# Least squares
# ---------------------------------------------------------------------------------------


def least_squares_blocks(
    source: Callable[[], Any] | None = None,
    *,
    X: Any = None,
    y: Any = None,
    weights: Any = None,
    intercept: bool = True,
    l2: float = 0.0,
    names: Sequence[str] | None = None,
) -> LinearFit:
    r"""Least squares over row blocks by TSQR; the same record as :func:`lintools.least_squares`.

    .. math::

        \min_{b,\beta}\; \tfrac12 \sum_i w_i (y_i - b - x_i^\top\beta)^2
        + \tfrac{\lambda}{2}\lVert\beta\rVert_2^2 ,\qquad \lambda = \texttt{l2}.

    Parameters
    ----------
    source : callable, optional
        A function of no arguments returning a fresh iterator of blocks
        ``(X_block, y_block)`` or ``(X_block, y_block, weights_block)`` on every call (a
        generator function).  Blocks may have any number of rows (one is fine); all must
        have the same columns.  It is called 2 to 5 times (one call per pass).
    X, y, weights : dask arrays, optional
        Instead of ``source``: a row-chunked 2-D dask array and 1-D dask arrays with the
        same row chunks.  Each pass is a map over the chunks plus a tree reduction on the
        Dask scheduler in use (a ``distributed.Client`` if one is active).  Persist them
        first (``client.persist``) when they are costly to compute: every pass reads them.
    intercept : bool
        Fit an unpenalised intercept (default True).
    l2 : float
        Ridge strength ``lambda >= 0`` on the slopes.
    names : sequence of str, optional
        Coefficient names (default: the column labels of the first block when it is a
        DataFrame, else ``x1..xp``).

    Returns
    -------
    LinearFit
        Equal to ``lintools.least_squares`` on the concatenated rows (classical
        covariance, case weights) to rounding; ``convergence.solver`` is ``"tsqr"`` and
        ``convergence.message`` counts the passes.

    Raises
    ------
    InputError
        A bad block (named by its number, with the row within the block, the column and
        the remedy), a source that is not callable, returns no iterator, yields nothing or
        changes between passes, or a rank-deficient design (the aliased columns named).

    Notes
    -----
    Pass 1 computes the R factor of the weighted ``[X, y]``, centred exactly by pairwise
    updates of the means (module docstring); passes 2+ evaluate the residual of the answer
    in extended precision and correct it (at most ``MAX_REFINE`` times), so that RSS,
    gradient and coefficients agree with the in-memory QR path.  Memory: a few copies of
    one block (its checked copy and the QR work array) plus ``O(p^2 log(blocks))`` for the
    pending R factors, whatever the number of rows (measured by
    ``benchmarks/out_of_core.py``: 192 MB traced at 5e6 and at 5e7 rows for 64 MB blocks).  Leverage, Cook's distance and the sandwich covariances need
    per-row quantities and are not offered here.

    References
    ----------
    Demmel, Grigori, Hoemmen & Langou (2012), SIAM J. Sci. Comput. 34, A206-A239 (TSQR).
    Chan, Golub & LeVeque (1983), The American Statistician 37, 242-247 (pairwise means).
    Bjorck (1987), Linear Algebra Appl. 88/89, 31-48 (corrected semi-normal equations).
    """
    intercept = _check_flag(intercept, "intercept")
    lam = check_nonnegative(l2, "l2")
    run = _runner(source, X, y, weights)
    part = run.reduce(_factor_kernel, _merge_factors, (intercept,), (intercept,))
    p = run.spec.p
    names_t = check_names(names, p, run.names)
    n_pos, n_rows = part["n_pos"], part["n_rows"]
    if n_pos == 0:
        raise InputError("weights are zero in every block; at least one row needs a positive weight")
    W, mean, R = part["W"], part["mean"], part["R"]
    off = int(intercept)
    k_max = p + off
    if lam == 0 and n_pos < k_max:
        raise InputError(
            f"X has {n_pos} rows with positive weight but the model has {k_max} parameters; "
            "add rows, drop columns, or set l2 > 0"
        )
    ylo, yhi = part["lo"][p], part["hi"][p]
    if intercept and ylo == yhi:
        raise InputError(
            f"y is constant (every row with positive weight equals {ylo:g}); there is "
            "nothing to explain: check the target column"
        )
    if not intercept and ylo == 0 and yhi == 0:
        raise InputError("y is zero on every row with positive weight; check the target column")

    sol = _solve_factor(R, W, mean, part["lo"][:p], part["hi"][:p], lam, intercept, names_t, n_rows)
    beta, b0 = sol["beta"], sol["b0"]
    xbar = mean[:p] if intercept else np.zeros(p)
    steps, last = 0, math.inf
    while True:
        res = run.reduce(_residual_kernel, _add, (b0, beta))
        rho, gx = float(res["rho"]), res["gx"].astype(float)
        rhs = gx - lam * beta - (xbar * rho if intercept else 0.0)
        dbeta = sol["solve"](rhs)
        db0 = rho / W - float(xbar @ dbeta) if intercept else 0.0
        # componentwise: an intercept far larger than the slopes must not hide their digits
        theta, dtheta = np.r_[b0, beta][1 - off :], np.r_[db0, dbeta][1 - off :]
        size = float(np.max(np.abs(dtheta) / np.maximum(np.abs(theta), np.finfo(float).tiny)))
        if size <= 4 * _EPS or steps == MAX_REFINE or size > 0.5 * last:
            break
        beta, b0, last = beta + dbeta, b0 + db0, size
        steps += 1
    rss = float(res["rss"])
    tss = float(R[:, p] @ R[:, p])  # about the mean with an intercept, about 0 without
    grad = np.concatenate([[-rho] if intercept else [], -gx + lam * beta])
    if sol["cond"] > ILL_CONDITIONED:
        warnings.warn(
            f"the scaled design is ill-conditioned (condition number {sol['cond']:.3g}); it was solved "
            f"by TSQR with {steps} refinement step(s), but expect only about "
            f"{max(0.0, 16 - math.log10(sol['cond'])):.0f} correct digits",
            IllConditionedWarning,
            stacklevel=2,
        )
    message = (
        f"solved by TSQR (Householder R factor of each block, reduced pairwise) with {steps} "
        f"refinement step(s), residuals in extended precision; {run.passes} passes over the blocks"
    )
    return _linear_record(W, n_pos, p, intercept, lam, names_t, beta, b0, sol, xbar, rss, tss, grad,
                          1 + steps, message)


def _solve_factor(R: np.ndarray, W: float, mean: np.ndarray, lo: np.ndarray, hi: np.ndarray, lam: float,
                  intercept: bool, names: tuple[str, ...], n_rows: int) -> dict:
    """Coefficients, scaled inverse information and condition from the reduced R factor."""
    p = R.shape[1] - 1
    s = np.linalg.norm(R[:, :p], axis=0)
    raw = np.sqrt(s * s + (W * mean[:p] ** 2 if intercept else 0.0))
    tol = default_rank_tolerance(n_rows, p)
    constant = (lo == hi) if intercept else np.zeros(p, dtype=bool)
    zero = constant | (s <= tol * raw) | (s == 0)
    s = np.where(zero, 1.0, s)
    A = R / np.concatenate([s, [1.0]])
    A[:, :p][:, zero] = 0.0
    if lam > 0:
        A = np.vstack([A, np.hstack([np.diag(math.sqrt(lam) / s), np.zeros((p, 1))])])
        col_norm = np.sqrt(np.where(zero, 0.0, 1.0) + lam / s**2)
    else:
        col_norm = np.where(zero, 0.0, 1.0)
    R2 = np.linalg.qr(A, mode="r")[: p + 1]
    Rxx = R2[:p, :p]
    aliased = np.union1d(np.flatnonzero(zero & (lam == 0)),
                         aliased_columns(Rxx, np.maximum(col_norm, 1e-300), tol)).astype(int)
    if aliased.size:
        keep = [j for j in range(p) if j not in set(aliased)]
        lines = []
        for j in aliased:
            if zero[j]:
                what = "the intercept" if intercept else "zero"
                lines.append(f"column {j} ('{names[j]}') is constant on the rows used; it is aliased with {what}")
            else:
                lines.append(_describe_alias(j, names, Rxx, keep, s, intercept))
        raise InputError(
            "X is rank deficient: " + "; ".join(lines)
            + ". Drop the aliased column(s), or set l2 > 0 (the in-memory lintools.least_squares "
            "also offers rank_deficient='minimum_norm')"
        )
    theta = solve_upper(Rxx, R2[:p, p])
    beta = theta / s
    b0 = float(mean[p] - mean[:p] @ beta) if intercept else 0.0
    Rinv = inverse_upper(Rxx)

    def solve(rhs):
        """``(C + l2 I)^{-1} rhs`` with ``C + l2 I = D Rxx' Rxx D``."""
        return solve_upper(Rxx, solve_lower(Rxx.T, rhs / s)) / s

    return {"beta": beta, "b0": b0, "s": s, "G": Rinv @ Rinv.T, "cond": condition_number(Rxx), "solve": solve}


def _linear_record(W: float, n_pos: int, p: int, intercept: bool, lam: float, names: tuple[str, ...],
                   beta: np.ndarray, b0: float, sol: dict, xbar: np.ndarray, rss: float, tss: float,
                   grad: np.ndarray, iterations: int, message: str) -> LinearFit:
    """The :class:`LinearFit` of a full-rank fit (the statistics of lintools.least_squares)."""
    off = int(intercept)
    k = p + off
    df = _residual_df(W, k, "case", n_pos)
    sigma2 = rss / df
    r2 = 1.0 - rss / tss
    s = sol["s"]
    Bz = np.zeros((k, k))
    if intercept:
        Bz[0, 0] = 1.0 / W
    Bz[off:, off:] = sol["G"]
    Vz = sigma2 * Bz
    T = np.zeros((k, k))
    if intercept:
        T[0, 0] = 1.0
        T[0, 1:] = -xbar / s
    T[off:, off:] = np.diag(1.0 / s)
    V = T @ Vz @ T.T
    V = 0.5 * (V + V.T)
    se = np.sqrt(np.clip(np.diag(V), 0.0, None))
    f_df1 = float(p)
    try:
        u = np.linalg.solve(np.linalg.cholesky(Vz[off:, off:]), beta * s)
        fstat = float(u @ u) / f_df1
    except np.linalg.LinAlgError:
        fstat = float("nan")
    f_p = float(dist.f_sf(fstat, f_df1, df)) if np.isfinite(fstat) else float("nan")
    loglik = -0.5 * W * (math.log(2.0 * math.pi * rss / W) + 1.0) if rss > 0 else float("inf")
    conv = Convergence(
        converged=True, iterations=int(iterations), gradient_norm=float(np.max(np.abs(grad))),
        objective=0.5 * rss + 0.5 * lam * float(beta @ beta), solver="tsqr", message=message,
    )
    return LinearFit(
        coefficients=beta, intercept=float(b0), standard_errors=se[off:],
        intercept_standard_error=float(se[0]) if intercept else None, covariance=V,
        log_likelihood=loglik, deviance=rss, aic=-2.0 * loglik + 2.0 * (k + 1),
        bic=-2.0 * loglik + math.log(W) * (k + 1), n_observations=W, names=names, convergence=conv,
        with_intercept=bool(intercept), l2=lam, residual_standard_error=math.sqrt(sigma2),
        r_squared=r2, adjusted_r_squared=1.0 - (1.0 - r2) * (W - off) / df, f_statistic=fstat,
        f_p_value=f_p, f_degrees_of_freedom=(f_df1, float(df)), degrees_of_freedom=float(df),
        rank=int(k), covariance_type="classical", weight_type="case",
        condition_number=float(sol["cond"]), aliased=(), target="y",
    )


# ---------------------------------------------------------------------------------------
# Logistic regression
# ---------------------------------------------------------------------------------------


def _design_kernel(X: np.ndarray, labels: dict, w: np.ndarray | None, intercept: bool) -> dict:
    """Pass 1 of the logistic fit: labels, and the R factor of the weighted centred X."""
    n_rows = X.shape[0]
    Xp, _, wp = _positive_rows(X, None, w)
    out = {"n_pos": Xp.shape[0], "n_rows": n_rows, "labels": labels}
    if Xp.shape[0]:  # Xp is this pass's own checked copy: it may be overwritten
        out["lo"], out["hi"] = Xp.min(axis=0), Xp.max(axis=0)
        out.update(_factor(Xp, wp, intercept))
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


class _BlockProblem:
    """The logistic objective as a solver problem whose every evaluation is one pass.

    Coordinates as in :class:`lintools.solvers.LinearModelProblem`: ``z = (a, g)`` with
    ``beta = g / s`` and ``b = a - c' beta``.  The information is that of the standardised
    design ``[1, (X - c) / s]``; evaluations (with their information) are cached by ``z``,
    and a line-search trial evaluates its point, so an accepted step costs no extra pass.
    """

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
        T = np.zeros((self.size, self.size))
        T[self.off :, self.off :] = np.diag(1.0 / self.s)
        if self.intercept:
            T[0, 0] = 1.0
            T[0, 1:] = -self.c / self.s
        return T

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
        ev = Evaluation(float(value), gz, original, None)
        if len(self.cache) > 4:
            self.cache.pop(next(iter(self.cache)))
        self.cache[z.tobytes()] = (ev, 0.5 * (H + H.T), part)
        return ev

    def _pass(self, z: np.ndarray, step: tuple | None = None) -> dict:
        b, beta = self.coefficients(z)
        c = self.c if self.intercept else np.zeros(self.p)
        return self.run.reduce(_evaluation_kernel, _add, (b, beta, c, step))

    def evaluate(self, z: np.ndarray) -> Evaluation:
        hit = self.cache.get(z.tobytes())
        if hit is not None:
            return hit[0]
        ev = self._store(z, self._pass(z))
        if ev is None:
            raise SingularMatrixError("the linear predictor is not finite")
        return ev

    def hessian(self, z: np.ndarray) -> np.ndarray:
        self.evaluate(z)
        return self.cache[z.tobytes()][1].copy()

    fisher_information = hessian

    def line(self, z: np.ndarray, d: np.ndarray) -> "_BlockLine":
        return _BlockLine(self, z, d)

    def runaway(self, z: np.ndarray) -> tuple[int, float]:
        part = self.cache[z.tobytes()][2]
        return part["runaway"], part["top"]


class _BlockLine:
    """``F(z + t d) - F(z)``: one pass per trial ``t``, which also evaluates ``z + t d``."""

    def __init__(self, problem: _BlockProblem, z: np.ndarray, d: np.ndarray) -> None:
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
            c += pr.l2 * (t * float(beta0 @ dbeta) + 0.5 * t * t * float(dbeta @ dbeta))
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
        Stop when the max-abs gradient of the objective (caller's coordinates) is <= tol.
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
    intercept = _check_flag(intercept, "intercept")
    lam = check_nonnegative(l2, "l2")
    tol = _check_tol(tol)
    max_iter = check_positive_int(max_iter, "max_iter")
    if on_iteration is not None and not callable(on_iteration):
        raise InputError(f"on_iteration must be a callable taking one record; got {type(on_iteration).__name__}")
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
        alias = np.union1d(np.flatnonzero(norms == 0),
                           aliased_columns(Rs, np.ones(p), default_rank_tolerance(part["n_pos"], p))).astype(int)
        if alias.size:
            j = int(alias[0])
            before = [i for i in range(j) if i not in set(alias)]
            involved = []
            if before:
                coef = solve_upper(Rs[np.ix_(before, before)], Rs[before, j])
                big = np.abs(coef) > 1e-8 * max(float(np.abs(coef).max()), 1e-300)
                involved = [f"'{names[before[t]]}'" for t in np.flatnonzero(big)]
            raise InputError(
                f"X is rank deficient on the rows used: column {j} ('{names[j]}') is a linear "
                f"combination of {', '.join(involved) if involved else 'nothing (it is zero)'}"
                f"{' (plus a constant)' if intercept else ''}; drop one of the dependent columns, or set l2 > 0"
            )
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
    message = f"{res.message}; {passes} passes over the blocks"
    conv = Convergence(converged=bool(res.converged), iterations=int(res.iterations),
                       gradient_norm=ev.gradient_norm, objective=ev.value, solver="newton", message=message)
    if res.status == "iteration_limit":
        warnings.warn(message, IterationLimitWarning, stacklevel=3)
    elif not res.converged:
        warnings.warn(message, LintoolsWarning, stacklevel=3)
    return LogisticFit(
        coefficients=theta[int(intercept):].copy(), intercept=b, standard_errors=se[int(intercept):],
        intercept_standard_error=float(se[0]) if intercept else None, covariance=V,
        log_likelihood=loglik, deviance=dev, aic=-2.0 * loglik + 2.0 * k,
        bic=-2.0 * loglik + math.log(W) * k, n_observations=float(W), names=names, convergence=conv,
        with_intercept=bool(intercept), l2=lam, classes=classes, positive_class=classes[1],
        null_deviance=null_dev, lr_statistic=lr,
        lr_p_value=likelihood_ratio(lr, p) if math.isfinite(lr) else float("nan"),
        lr_degrees_of_freedom=int(p), firth=False, penalised_log_likelihood=-ev.value,
        grouped=False, has_offset=False, target="y",
    )
