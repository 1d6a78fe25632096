"""Least squares over row blocks by TSQR; see :mod:`lintools.blocks`."""

from __future__ import annotations

import math
from typing import Any, Callable, Sequence

import numpy as np

from ..support.errors import IllConditionedWarning, InputError, warn_caller
from ..models.lsq_coordinates import aliased_columns_of, caller_gradient, centre_in_two_parts, centred_intercept
from ..models.lsq_coordinates import column_floor, ridge_column_norms, two_sum
from ..models.lsq_qr import ILL_CONDITIONED, alias_sentences
from ..models.lsq_scale import Units, column_exponents, exponent, to_caller
from ..support.validate import check_flag, check_names, check_nonnegative, weight_scale
from ..models.records import LinearFit, with_accuracy
from ..models.least_squares import refuse_degenerate
from ..models.lsq_record import PathAnswer, Setting, linear_record, residual_degrees
from ..support.linalg import condition_number, default_rank_tolerance, inverse_upper, solve_lower, solve_upper
from ..support.threads import with_row_threads

from .stream import _add, _merge_labels, _positive_rows
from .runner import make_runner
from .sample import Sampled
from .accuracy import blocked_least_squares_accuracy


#: Corrections of the least-squares answer (each one a pass) before it is accepted.
MAX_REFINE = 3
#: Rows per piece when a block is processed in extended precision.
_PIECE_ROWS = 1 << 16
_EPS = float(np.finfo(float).eps)
_LD = np.longdouble


def _factor(Z: np.ndarray, w: np.ndarray | None, intercept: bool) -> dict:
    """Weight, mean and R factor of the weighted, centred columns of ``Z`` (modified).

    The mean is kept in two parts, ``mean`` (rounded) and ``mean_lo`` (what the rounding
    left out): a column far from zero (``1e12 + N(0, 1)``) has a mean that float64 holds
    only to ``1e-4``, and the merge of two factors needs the difference of their means to
    the digits of the spread."""
    m, k = Z.shape
    W = float(m) if w is None else float(w.sum())
    mean, lo = np.zeros(k), np.zeros(k)
    if intercept:
        mean, lo = two_sum(*centre_in_two_parts(Z, w, W))
    if w is not None:
        Z *= np.sqrt(w)[:, None]
    R = np.linalg.qr(Z, mode="r")
    if R.shape[0] < k:
        R = np.vstack([R, np.zeros((k - R.shape[0], k))])
    return {"W": W, "mean": mean, "mean_lo": lo, "R": R}


def _merge_factors(a: dict, b: dict, intercept: bool) -> dict:
    out = {"n_pos": a["n_pos"] + b["n_pos"], "n_rows": a["n_rows"] + b["n_rows"]}
    for key in ("labels",):
        if key in a or key in b:
            out[key] = _merge_labels(a.get(key, {}), b.get(key, {}))
    if "R" not in a or "R" not in b:
        src = a if "R" in a else b
        for key in ("W", "mean", "mean_lo", "R", "lo", "hi"):
            if key in src:
                out[key] = src[key]
        return out
    W = a["W"] + b["W"]
    rows = [a["R"], b["R"]]
    mean, lo = a["mean"], a.get("mean_lo", 0.0 * a["mean"])
    if intercept:
        # d = mean_b - mean_a from both parts: the rounded parts of close means cancel exactly
        b_lo = b.get("mean_lo", 0.0 * b["mean"])
        d_hi, d_err = two_sum(b["mean"], -a["mean"])
        d = d_hi + (d_err + (b_lo - lo))
        mean, lo2 = two_sum(a["mean"], lo + (b["W"] / W) * d)
        lo = lo2
        rows.append(math.sqrt(a["W"] / W) * math.sqrt(b["W"]) * d[None, :])  # no overflow of W_a W_b
    R = np.linalg.qr(np.vstack(rows), mode="r")
    out.update(W=W, mean=mean, mean_lo=lo, R=R, lo=np.minimum(a["lo"], b["lo"]), hi=np.maximum(a["hi"], b["hi"]))
    return out


def _ls_factor_kernel(X: np.ndarray, y: np.ndarray | None, w: np.ndarray | None, intercept: bool) -> dict:
    """Pass 1 of least squares (and, with ``y=None``, the design pass of the likelihood
    fits): R factor of ``[X, y]`` in the block's own units (each column and the weights
    divided by a power of two, exactly; see :mod:`lintools.models.lsq_scale`), and the extremes
    of each column."""
    n_rows = X.shape[0]
    X, y, w = _positive_rows(X, y, w)
    m, p = X.shape
    out = {"n_pos": m, "n_rows": n_rows}
    if m == 0:
        return out
    Z = np.empty((m, p + (y is not None)))
    Z[:, :p] = X
    if y is not None:
        Z[:, p] = y
    out["lo"], out["hi"] = Z.min(axis=0), Z.max(axis=0)
    ez = column_exponents(Z)
    np.ldexp(Z, -ez, out=Z)
    ew = 0
    if w is not None:
        ew = exponent(weight_scale(w))
        ew += ew % 2  # even: the R factor carries sqrt(w), rescaled exactly by 2**(ew / 2)
        w = np.ldexp(w, -ew)
    out.update(_factor(Z, w, intercept), ez=ez, ew=ew)
    return out


def in_caller_units(part: dict) -> dict:
    """``W``, ``mean`` and ``R`` of a merged pass-1 summary in the caller's units (``W``
    may overflow to inf: the caller refuses a total weight beyond float64), keeping the
    unit-scale ``R`` (``R_units``) and the column exponents for overflow-free norms."""
    out = dict(part)
    if "R" not in part:
        return out
    ez, ew = part["ez"], part["ew"]
    with np.errstate(over="ignore", under="ignore"):
        out["W"] = float(np.ldexp(part["W"], ew))
        out["mean"] = np.ldexp(part["mean"], ez)
        out["mean_lo"] = np.ldexp(part["mean_lo"], ez)
        out["R"] = np.ldexp(part["R"], ez[None, :] + ew // 2)
    out["R_units"] = part["R"]
    out["W_units"] = part["W"]
    return out


def _in_units(part: dict, ez: np.ndarray, ew: int) -> dict:
    """A pass-1 summary re-expressed in the (larger) units ``ez``, ``ew`` (exact but for
    parts that fall below the float64 range against the other summary)."""
    if "R" not in part:
        return part
    dz = part["ez"] - ez
    dw = part["ew"] - ew
    out = dict(part)
    out["W"] = float(np.ldexp(part["W"], dw))
    out["mean"] = np.ldexp(part["mean"], dz)
    out["mean_lo"] = np.ldexp(part["mean_lo"], dz)
    out["R"] = np.ldexp(part["R"], dz[None, :] + dw // 2)
    return out


def _ls_merge(a: dict, b: dict, intercept: bool) -> dict:
    """Two pass-1 summaries in common units, merged (:func:`_merge_factors`)."""
    have = [q for q in (a, b) if "R" in q]
    if len(have) < 2:
        out = _merge_factors(a, b, intercept)
        if have:
            out.update(ez=have[0]["ez"], ew=have[0]["ew"])
        return out
    ez = np.maximum(a["ez"], b["ez"])
    ew = max(a["ew"], b["ew"])
    out = _merge_factors(_in_units(a, ez, ew), _in_units(b, ez, ew), intercept)
    out.update(ez=ez, ew=ew)
    return out


def _ls_residual_kernel(X: np.ndarray, y: np.ndarray, w: np.ndarray | None, ez: np.ndarray, ew: int,
                        c_hi: np.ndarray, c_lo: np.ndarray, a: float, beta: np.ndarray) -> dict:
    """Residual sums at ``(a, beta)`` in centred unit coordinates, in extended precision.

    The residual is ``(y - ybar) - a - (x - xbar)' beta`` with every column in its unit and
    the means in two parts (pass 1), so a column far from zero cancels nothing."""
    p = X.shape[1]
    inv = np.ldexp(_LD(1), -ez)
    cen = c_hi.astype(_LD) + c_lo.astype(_LD)
    bl, al = beta.astype(_LD), _LD(a)
    rho, rss, gx = _LD(0), _LD(0), np.zeros(p, dtype=_LD)
    for lo in range(0, X.shape[0], _PIECE_ROWS):
        Xl = X[lo : lo + _PIECE_ROWS].astype(_LD) * inv[:p] - cen[:p]
        r = (y[lo : lo + _PIECE_ROWS].astype(_LD) * inv[p] - cen[p]) - al - Xl @ bl
        wr = r if w is None else np.ldexp(w[lo : lo + _PIECE_ROWS], -ew).astype(_LD) * r
        rho += wr.sum()
        rss += wr @ r
        gx += Xl.T @ wr
    return {"rho": rho, "rss": rss, "gx": gx}


# ---------------------------------------------------------------------------------------
# Least squares
# ---------------------------------------------------------------------------------------


@with_row_threads
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
        changes between passes, a rank-deficient design (the aliased columns named), or a
        reported figure beyond the float64 range (named, with the input whose scale drives it).

    Notes
    -----
    Scale: every block's columns of ``[X, y]`` and its weights are divided by powers of two
    (exact) before any arithmetic, and two summaries are brought to common units before
    they merge, so the scale of the response, of a column or of the weights changes the
    answer only as the mathematics says (:mod:`lintools.models.lsq_scale`); means are kept in two
    parts, so a column shifted far from zero loses no digits.  Pass 1 computes the R factor
    of the weighted ``[X, y]``, centred exactly by pairwise updates of the means (module
    docstring); passes 2+ evaluate the residual of the answer in extended precision, in
    centred coordinates, and correct it (at most ``MAX_REFINE`` times), so that RSS,
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
    Knuth (1997), The Art of Computer Programming 2, 3rd ed., sec. 4.2.2 (TwoSum).
    """
    intercept = check_flag(intercept, "intercept")
    lam = check_nonnegative(l2, "l2")
    run = make_runner(source, X, y, weights)
    part = run.reduce(_ls_factor_kernel, _ls_merge, (intercept,), (intercept,))
    p = run.spec.p
    names_t = check_names(names, p, run.names)
    n_obs, lam1 = _checked_totals(part, p, lam, intercept)
    W, R, ez, ew = part["W"], part["R"], part["ez"], part["ew"]
    c_hi, c_lo = part["mean"], part["mean_lo"]
    units = Units(int(ez[p]), int(ew), ez[:p].astype(np.int64), names_t)
    centre = c_hi[:p] + c_lo[:p]

    sol = _solve_factor(R, W, c_hi, part["lo"][:p], part["hi"][:p], lam1, intercept, names_t, part["n_rows"], units.ex)
    beta, a, steps, res, sample, last = _refine(run, part, sol, lam1, intercept)
    rho, gx = float(res["rho"]), res["gx"].astype(float)
    rss = float(res["rss"])
    tss = float(R[:, p] @ R[:, p])  # about the mean with an intercept, about 0 without
    g_beta = -gx + lam1 * beta
    grad = caller_gradient(-rho, g_beta, centre, intercept)
    if sol["cond"] > ILL_CONDITIONED:
        warn_caller(
            f"the scaled design is ill-conditioned (condition number {sol['cond']:.3g}); it was solved "
            f"by TSQR with {steps} refinement step(s), but expect only about "
            f"{max(0.0, 16 - math.log10(sol['cond'])):.0f} correct digits",
            IllConditionedWarning,
        )
    message = (
        f"solved by TSQR (Householder R factor of each block, reduced pairwise) with {steps} "
        f"refinement step(s), residuals in extended precision; {run.passes} passes over the blocks"
    )
    fit = PathAnswer(
        beta=beta, b0=_intercept(part, a, beta) if intercept else 0.0, rank=p, s=sol["s"],
        xbar=centre if intercept else np.zeros(p), G=sol["G"], cond=sol["cond"], rss=rss, tss=tss, grad=grad,
        lam1=lam1, col_exp=units.ex, iterations=1 + steps, solver="tsqr", message=message, correction=last,
    )
    df = residual_degrees(n_obs, p + int(intercept), "case", part["n_pos"])
    record = linear_record(fit, units, Setting(intercept, lam), W, n_obs, df)
    return with_accuracy(record, blocked_least_squares_accuracy(sample, fit, units, intercept, W,
                                                                int(part["n_rows"])))


def _checked_totals(part: dict, p: int, lam: float, intercept: bool) -> tuple[float, np.ndarray]:
    """The number of observations and the ridge on the unit coefficients from the merged
    pass-1 summary, after the refusals: no positive weight, too few rows, a constant or zero
    response, totals beyond float64."""
    n_pos = part["n_pos"]
    if n_pos == 0:
        raise InputError("weights are zero in every block; at least one row needs a positive weight")
    ylo, yhi = part["lo"][p], part["hi"][p]
    refuse_degenerate(n_pos, p + int(intercept), lam, intercept, ylo == yhi, ylo, ylo == 0 and yhi == 0)
    ez, ew = part["ez"], part["ew"]
    n_obs = float(to_caller(part["W"], ew))
    lam1 = to_caller(lam, -ew - 2 * ez[:p])  # the ridge on the unit coefficients
    if not (math.isfinite(n_obs) and np.all(np.isfinite(lam1))):
        raise InputError(
            "the case weights add up to more than the largest float64 number, or l2 is beyond the "
            "float64 range against weights this small; rescale the weights (case weights count "
            "observations) or lower l2"
        )
    return n_obs, lam1


def _intercept(part: dict, a: float, beta: np.ndarray) -> float:
    """``b = ybar + a - m' beta`` from the two-part means of the summary (extended precision)."""
    p = beta.shape[0]
    c_hi, c_lo = part["mean"], part["mean_lo"]
    return centred_intercept(_LD(c_hi[p]) + _LD(c_lo[p]) + _LD(a), c_hi[:p], c_lo[:p], beta)


def _refine(run: Any, part: dict, sol: dict, lam1: np.ndarray, intercept: bool) -> tuple:
    """Residual passes at the answer and corrections until the correction is at the rounding
    level (componentwise on ``(b, beta)``), stops shrinking, or ``MAX_REFINE`` were made.

    Returns ``(beta, a, steps, sums, sample, correction)`` with ``sums`` those of the last
    pass, at the answer, ``sample`` the rows the first pass sampled (:mod:`lintools.blocks.sample`)
    and ``correction`` the last pass's correction, not applied, in the centred, scaled
    coordinates (``(da, s * dbeta)``)."""
    W, ez, ew, c_hi, c_lo = part["W"], part["ez"], part["ew"], part["mean"], part["mean_lo"]
    p, off = c_hi.shape[0] - 1, int(intercept)
    centre = c_hi[:p] + c_lo[:p]
    beta, a = sol["beta"], 0.0
    steps, last = 0, math.inf
    sample = None
    while True:
        kernel = _ls_residual_kernel if sample is not None else Sampled(_ls_residual_kernel)
        res = run.reduce(kernel, _add, (ez, ew, c_hi, c_lo, a, beta), pieces=True)
        sample = res.pop("sample", sample)
        rho, gx = float(res["rho"]), res["gx"].astype(float)
        dbeta = sol["solve"](gx - lam1 * beta)
        da = rho / W if intercept else 0.0
        # componentwise on (b, beta): an intercept far larger than the slopes must not hide their digits
        theta = np.r_[_intercept(part, a, beta) if intercept else 0.0, beta][1 - off :]
        dtheta = np.r_[da - float(centre @ dbeta), dbeta][1 - off :]
        size = float(np.max(np.abs(dtheta) / np.maximum(np.abs(theta), np.finfo(float).tiny)))
        if size <= 4 * _EPS or steps == MAX_REFINE or size > 0.5 * last:
            return beta, a, steps, res, sample, np.r_[da, sol["s"] * dbeta][1 - off :]
        beta, a, last = beta + dbeta, a + da, size
        steps += 1


def _solve_factor(R: np.ndarray, W: float, mean: np.ndarray, lo: np.ndarray, hi: np.ndarray, lam1: np.ndarray,
                  intercept: bool, names: tuple[str, ...], n_rows: int, ex: np.ndarray) -> dict:
    """Coefficients, scaled inverse information and condition from the reduced R factor (units)."""
    p = R.shape[1] - 1
    constant = (lo == hi) if intercept else np.zeros(p, dtype=bool)
    zero, s = column_floor(np.linalg.norm(R[:, :p], axis=0), mean[:p], W, constant, intercept)
    A = R / np.concatenate([s, [1.0]])
    A[:, :p][:, zero] = 0.0
    aug = None
    if np.any(lam1 > 0):
        aug = np.sqrt(lam1) / s
        A = np.vstack([A, np.hstack([np.diag(aug), np.zeros((p, 1))])])
    R2 = np.linalg.qr(A, mode="r")[: p + 1]
    Rxx = R2[:p, :p]
    aliased = aliased_columns_of(Rxx, zero, lam1 > 0, ridge_column_norms(zero, aug), default_rank_tolerance(n_rows, p))
    if aliased.size:
        raise InputError(
            alias_sentences(aliased, zero, names, Rxx, s, intercept, ex, exact=constant | (s == 0))
            + ". Drop the aliased column(s), or set l2 > 0 (the in-memory lintools.least_squares "
            "also offers rank_deficient='minimum_norm')"
        )
    theta = solve_upper(Rxx, R2[:p, p])
    beta = theta / s
    Rinv = inverse_upper(Rxx)

    def solve(rhs):
        """``(C + l2 I)^{-1} rhs`` with ``C + l2 I = D Rxx' Rxx D``."""
        return solve_upper(Rxx, solve_lower(Rxx.T, rhs / s)) / s

    return {"beta": beta, "s": s, "G": Rinv @ Rinv.T, "cond": condition_number(Rxx), "solve": solve}
