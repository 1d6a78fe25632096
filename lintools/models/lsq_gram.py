"""Least squares through the Gram matrix: blocked passes, Cholesky, corrected steps.

This is the fast path of :func:`lintools.least_squares`.  It reads the design in blocks
of rows and never copies it whole.  The front calls it for every problem with more
than ``SMALL_PROBLEM`` entries.  Whenever the test of conditioning below fails, or a
column is constant or aliased, it returns ``None``, and the front falls back to
Householder QR.

Method: corrected semi-normal equations (Bjorck 1987; Bjorck 1996, secs. 2.5, 6.6)
------------------------------------------------------------------------------------
The columns are shifted by a provisional centre ``c`` and the response by its
weighted mean: ``Xt = X - 1 c'``, ``yt = y - ybar`` (block by block; nothing of size
``n`` is copied).  Shifting is exact algebra (the
intercept absorbs it) and removes the cancellation that large column means cause in a
Gram matrix.  ``c`` is the weighted mean of an evenly spaced subsample, used only when
some column's mean exceeds its standard deviation there; otherwise ``c = 0`` and the
blocks are read in place.

1. Start: ``(a0, beta0)`` is the least-squares fit on that subsample (at most
   ``SUBSAMPLE_ROWS`` rows).  It is a good starting value, so that the one pass below
   produces a corrected solution rather than a plain normal-equations one.
2. Pass 1, over blocks ``B`` of rows: the residual ``r0 = yt - a0 - Xt beta0`` in
   float64; and ``W = sum w``, ``s = Xt'w``, ``S = Xt' W Xt`` (a symmetric rank-k
   update: NumPy sends ``Z.T @ Z`` to BLAS ``dsyrk``), ``rho = sum w r0``,
   ``g = Xt' W r0`` and ``sum w r0^2``.
3. Centre and scale: ``C = S - s s'/W`` is the Gram matrix of the weighted, centred
   columns (exact algebra: the Schur complement of the intercept).  With
   ``d_j = sqrt(C_jj)`` and ``Cs = D^-1 C D^-1 + l2 D^-2`` (unit diagonal plus the ridge
   term), the Cholesky factor ``Cs = L L'`` gives the condition number ``kappa = cond(L)``
   of the weighted, centred, scaled design (ridge rows appended), the same quantity the
   QR path reports.
4. Test of conditioning: the fast path is used only if ``kappa <= KAPPA_MAX`` (chosen
   for the standard errors: a covariance from the Gram matrix carries an error of about
   ``kappa^2 u``, against ``kappa u`` from QR) and the
   worst-case contraction factor of the refinement, ``||Cs^-1|| * ||E||`` with ``E`` the
   rounding error of the accumulated ``Cs`` and its Cholesky factor, is at most
   ``CONTRACTION_MAX``.  Summation of ``m`` terms in any order errs by at most
   ``(m - 1) u`` times the sum of absolute values, and each entry is summed first within
   a block and then over blocks, so ``|E_ij| <= (b + n/b + p + 4) u`` for unit
   columns (``b`` rows per block, ``u`` the unit roundoff); hence
   ``||E||_2 <= p (b + n/b + p + 4) u``.  Blocking keeps this bound far below the
   unblocked ``n u``.
5. Corrected step: the normal equations of the correction, ``M [da; dbeta] =
   [rho; g - l2 beta0]`` with ``M = [[W, s'], [s, S + l2 I]]``, are solved through the
   Schur complement with the factor ``L``; ``beta1 = beta0 + dbeta``.
6. Pass 2 (the certificate): the residual of ``beta1`` in float64, the gradient, and
   one more correction ``delta``.  ``beta1`` is accepted when ``|delta|`` (scaled
   coordinates, the centred intercept included) is within ``FLOOR_FACTOR`` times the
   rounding floor of a float64 least-squares solve,
   ``u kappa (|theta| + (sqrt(TSS) + kappa sqrt(RSS / m)) / |A|)``.  This is Wedin's
   perturbation bound with random rounding, so the ``kappa^2`` residual term carries
   ``1/sqrt(m)`` (``m`` rows of positive weight).  Calibrated against Householder QR:
   accepted answers agree with it to within about one LRE (measured, condition numbers
   10 to 1e4).  Every statistic then comes from a direct evaluation at the returned
   coefficients: RSS, gradient, residuals.  Otherwise the correction is applied and the
   pass repeated, at most ``MAX_RESIDUAL_PASSES`` times; after that the front falls
   back to QR.

The certificate is normwise in the scaled, centred coordinates.  An intercept that
nearly cancels (``|b| << |xbar' beta|``) therefore keeps fewer digits than on the QR path,
whose extended-precision refinement runs in the original coordinates.  Measured, with
exact rational arithmetic as the reference: LRE 9.4 against 11.9; plain Householder QR
of ``[1, X]`` gets 8.9.

Heteroskedasticity-consistent covariances (the "meat" ``Z' diag(m) Z``), leverage and
the residual vector are accumulated in that same last pass, only when asked for.

References
----------
Bjorck, A. (1987). Stability analysis of the method of seminormal equations for linear
least squares problems. Linear Algebra and its Applications 88/89, 31-48.
Bjorck, A. (1996). Numerical Methods for Least Squares Problems. SIAM.
Higham, N. J. (2002). Accuracy and Stability of Numerical Algorithms, 2nd ed., SIAM
(ch. 4, summation; ch. 20, the least-squares perturbation bound of Wedin).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .lsq_gram_passes import Blocks, first_pass, residual_pass, subsample_rows, subsample_start
from ..support.linalg import solve_lower, solve_upper
from ..support.threads import row_buffer

__all__ = ["GramSolution", "solve_by_gram", "default_block_rows"]

#: Unit roundoff of float64.
UNIT_ROUNDOFF = np.finfo(float).eps / 2
#: Largest condition number of the scaled, centred design accepted on the fast path.
#: The coefficients would reach the rounding floor well beyond it, but a covariance
#: taken from the Gram matrix errs by about kappa^2 u (QR: kappa u); at 1e3 the
#: standard errors keep about 10.5 digits (measured), at 1e5 only about 7.
KAPPA_MAX = 1e3
#: Problems with at most this many entries (n * p) always take the QR path: it costs a
#: few milliseconds there and gives the more accurate standard errors.
SMALL_PROBLEM = 1 << 16
#: Largest worst-case contraction factor of the refinement accepted on the fast path.
CONTRACTION_MAX = 0.25
#: A column is shifted when |mean| > SHIFT_RATIO * standard deviation (on the subsample).
SHIFT_RATIO = 1.0
#: Pass 1 is repeated with the exact means when 1 + W m_j^2 / C_jj exceeds this.
CANCELLATION_MAX = 4.0
#: Certificate: accepted corrections are below FLOOR_FACTOR times the rounding floor.
FLOOR_FACTOR = 16.0
#: Residual passes (each: residual, gradient, correction) before giving up on the path.
MAX_RESIDUAL_PASSES = 3
#: Columns whose largest |x| (subsample) lies beyond 2**+-COLUMN_BAND are divided by a power
#: of two, so that products of 2 * COLUMN_BAND bits and sums of them stay in range.
COLUMN_BAND = 400
#: Rows in the subsample that gives the starting values and the provisional centre.
SUBSAMPLE_ROWS = 8192
_BLOCK_BYTES = 1 << 20
#: Sums of squares of a subsample column that put its largest |x| inside the column band.
_INSIDE = (2.0**-700, 2.0**700)


def default_block_rows(n: int, p: int) -> int:
    """Rows per block: about 1 MiB of float64 per block (at least 256 rows)."""
    return int(max(256, min(n, _BLOCK_BYTES // (8 * max(p, 1)))))


@dataclass
class GramSolution:
    """What the fast path hands back to the front (all in original units unless noted).

    ``cov_scaled`` is ``(X_s' W X_s + l2 D^-2)^-1`` for the centred, scaled slopes;
    ``meat_z`` is the HC meat in (centred intercept, scaled slopes) coordinates.
    """

    beta: np.ndarray
    intercept: float
    rss: float
    tss: float
    cov_scaled: np.ndarray
    condition: float
    scale: np.ndarray
    mean: np.ndarray
    gradient: np.ndarray
    steps: int
    error_estimate: float
    shifted: bool
    residuals: np.ndarray | None
    hat: np.ndarray | None
    meat_z: np.ndarray | None
    leverage_one_row: int | None
    #: exponents of the powers of two the columns were divided by (see lintools.models.lsq_scale)
    col_exp: np.ndarray
    #: the ridge on the unit coefficients, per column
    lam_vec: np.ndarray
    #: the weights the path used (None: unit weights)
    w1: np.ndarray | None
    #: per residual pass: (size of the correction, certificate floor), scaled coordinates
    trace: tuple = ()
    #: the certificate pass's correction, not applied (centred intercept, scaled slopes)
    last_correction: np.ndarray | None = None


def solve_by_gram(
    Xa: np.ndarray,
    ya: np.ndarray,
    w: np.ndarray | None,
    n_pos: int,
    lam: float,
    intercept: bool,
    rank_tol: float,
    *,
    covariance: str = "classical",
    weight_type: str = "case",
    diagnostics: bool = False,
    block_rows: int | None = None,
    case_weights: np.ndarray | None = None,
) -> GramSolution | None:
    """Fit by the corrected semi-normal equations, or return None when QR is needed.

    Parameters
    ----------
    Xa, ya : validated design (n, p) and response (n,); never modified.  ``ya`` and ``w``
        are in the units of :mod:`lintools.models.lsq_scale` (largest entry in ``[1, 2)``).
    w : weights (n,), or None for unit weights.
    n_pos : number of rows with positive weight.
    lam : ridge strength on the slopes, per unit weight (``l2 / 2**ew``).
    intercept : whether an unpenalised intercept is fitted.
    rank_tol : a column is treated as constant (aliased with the intercept) when its
        centred weighted length is at most ``rank_tol`` times its raw weighted length
        (:data:`lintools.support.linalg.CONSTANT_TOLERANCE`).
    covariance, weight_type : as in :func:`lintools.least_squares`; the HC meat is
        accumulated in the last pass only when ``covariance`` is not ``"classical"``.
    diagnostics : also return leverage and residuals per row.
    block_rows : rows per block (default :func:`default_block_rows`).
    case_weights : the caller's weights, for the leverage of one copy of a case-weighted
        row (HC2, HC3).

    Column units: a column whose largest ``|x|`` on the subsample lies outside
    ``2**-COLUMN_BAND .. 2**COLUMN_BAND`` is divided by a power of two (exactly, block by
    block), so that no product in the Gram matrix overflows or underflows; the answer is
    then in those units (``col_exp``).  Otherwise the blocks are read in place.

    Returns
    -------
    GramSolution or None
        None when a column is constant or aliased, the Cholesky factorisation fails,
        the conditioning test fails, or the certificate is not reached.
    """
    n, p = Xa.shape
    rows = int(block_rows) if block_rows else default_block_rows(n, p)
    rows = max(1, min(rows, n))
    W_all = float(n) if w is None else float(w.sum())
    if intercept:
        ybar = (float(ya.sum()) if w is None else float(w @ ya)) / W_all
    else:
        ybar = 0.0
    idx = subsample_rows(n, w, n_pos, max(SUBSAMPLE_ROWS, 4 * (p + 1)))
    # the subsample's rows, copied once (into a buffer the thread keeps) for the column units and the start;
    # mode="clip" (the indices are in range): with the default "raise" NumPy takes into a temporary first
    Xs = np.take(Xa, idx, axis=0, out=row_buffer("subsample rows", (idx.size, p)), mode="clip")
    col_exp, inv = _column_units(Xs)
    lam = np.ldexp(lam, -2 * col_exp)  # the ridge on the unit coefficients
    if not np.all(np.isfinite(lam)):
        return None
    xm, sd, beta0, a0 = subsample_start(Xs, ya, ybar, w, idx, intercept, lam, W_all, inv)
    shift = None
    if intercept and np.any(np.abs(xm) > SHIFT_RATIO * sd):
        shift = xm.copy()
    mo = _moments(Xa, ya, ybar, w, shift, beta0, a0, intercept, rows, inv)
    if mo is None:
        return None
    fac = _factor(mo, lam, intercept, rank_tol, n, rows)
    if fac is None:
        return None
    tss = mo.tyy - mo.ty * mo.ty / mo.W if intercept else mo.tyy
    Linv = solve_lower(fac.L, np.eye(p))
    cov_scaled = Linv.T @ Linv
    lev = None
    if diagnostics or covariance in ("HC2", "HC3"):
        K = Linv / fac.s  # K xt = L^-1 D^-1 xt
        lev = (K, K @ mo.dm if intercept else None, 1.0 / mo.W if intercept else 0.0)
    meat = (covariance, weight_type) if covariance != "classical" else None
    passes = _Passes(Xa, ya, ybar, w, mo.shift, rows, diagnostics, lev, meat, inv, case_weights, mo.blocks)
    ref = _refine(passes, mo, fac, lam, intercept, tss, n_pos)
    if ref is None:
        return None
    beta_k, a_k, steps, size, trace, (rho, gx, rss, e, hat, M, first_one), step = ref
    # gradient of the objective in the original coordinates: d/db, d/dbeta
    cross = gx + mo.shift_vec * rho if intercept else gx  # X'W r = Xt'W r + shift * rho
    grad = np.concatenate([[-rho] if intercept else [], -cross + lam * beta_k])
    # fitted value: ybar + a + (x - shift)'beta
    b0 = a_k + ybar - float(mo.shift_vec @ beta_k) if intercept else 0.0
    theta_norm = float(np.linalg.norm(beta_k * fac.s))
    return GramSolution(
        beta=beta_k,
        intercept=float(b0),
        rss=rss,
        tss=tss,
        cov_scaled=0.5 * (cov_scaled + cov_scaled.T),
        condition=fac.kappa,
        scale=fac.s,
        mean=mo.shift_vec + mo.dm if intercept else np.zeros(p),
        gradient=grad,
        steps=steps,
        error_estimate=size / theta_norm if theta_norm > 0 else size,
        shifted=mo.shift is not None,
        residuals=e,
        hat=hat,
        meat_z=None if M is None else _meat_in_z(M, mo.dm, fac.s, intercept),
        leverage_one_row=first_one,
        col_exp=col_exp,
        lam_vec=lam,
        w1=w,
        trace=tuple(trace),
        last_correction=step,
    )


def _column_units(Xs: np.ndarray) -> tuple[np.ndarray, np.ndarray | None]:
    """Exponents of the powers of two that bring each column's largest ``|x|`` on the
    subsample ``Xs`` within ``2**+-COLUMN_BAND`` (0 for the others), and their inverses
    (None when no column needs one: the blocks are then read in place).

    First a cheap test that settles the usual case: a column's sum of squares ``q`` bounds
    its largest ``|x|`` = ``M`` by ``M**2 <= q <= k M**2`` (``k`` rows; rounding and squares
    that underflow change ``q`` by far less than the margins), so ``2**-700 <= q <= 2**700``
    puts ``M`` within ``2**-351 / sqrt(k) .. 2**350``, inside the band; a NaN, an inf, an
    overflowing square or a column near an edge gets the exact maxima."""
    q = np.einsum("ij,ij->j", Xs, Xs)
    if Xs.shape[0] < 2**80 and np.all((q >= _INSIDE[0]) & (q <= _INSIDE[1])):
        return np.zeros(Xs.shape[1], dtype=np.int64), None
    _, top = np.frexp(_largest_abs(Xs))
    col_exp = np.where(np.abs(top - 1) > COLUMN_BAND, top - 1, 0).astype(np.int64)
    return col_exp, (np.ldexp(1.0, -col_exp) if np.any(col_exp) else None)


def _largest_abs(Xs: np.ndarray) -> np.ndarray:
    """Each column's largest ``|x|`` (NaN when it holds one), over groups of rows laid side by
    side: a maximum is exact in any order, and a narrow column reduction is slow."""
    k, p = Xs.shape
    A = np.abs(Xs, out=row_buffer("subsample magnitudes", Xs.shape))
    g = max(1, 128 // max(p, 1))  # rows side by side
    whole = (k // g) * g
    top = A[:whole].reshape(-1, g * p).max(axis=0, initial=0.0).reshape(g, p).max(axis=0)
    return np.maximum(top, A[whole:].max(axis=0, initial=0.0))


@dataclass
class _Moments:
    """Pass 1 (:func:`lintools.models.lsq_gram_passes.first_pass`) with the centre it was taken about: ``shift`` (None: 0)
    and the start's intercept ``a_start`` in those coordinates; ``dm`` the weighted mean of
    the shifted columns, ``C`` their centred Gram matrix and ``diagC`` its diagonal."""

    shift: np.ndarray | None
    shift_vec: np.ndarray
    beta0: np.ndarray
    a_start: float
    W: float
    sx: np.ndarray
    rho: float
    gx: np.ndarray
    ty: float
    tyy: float
    dm: np.ndarray
    C: np.ndarray
    diagC: np.ndarray
    blocks: Blocks


def _moments(Xa, ya, ybar, w, shift, beta0, a0, intercept, rows, inv) -> _Moments | None:
    """Pass 1 about the provisional centre ``shift``, repeated once about the exact means
    when cancellation (``1 + W m_j^2 / C_jj > CANCELLATION_MAX``) shows that centre was
    poor (e.g. sorted rows); None when the sums overflow (the QR path scales first)."""
    p = Xa.shape[1]
    for attempt in range(2):
        # the start is a0 + x'beta0 = (a0 + shift'beta0) + (x - shift)'beta0
        a_start = a0 + (float(shift @ beta0) if shift is not None else 0.0) if intercept else 0.0
        blocks = Blocks(Xa, shift, rows, inv)  # for pass 1 and the residual passes about this centre
        W, sx, S, rho, gx, _, ty, tyy = first_pass(Xa, ya, ybar, w, shift, beta0, a_start, rows, inv, blocks)
        shift_vec = np.zeros(p) if shift is None else shift
        if not intercept:
            dm = np.zeros(p)
            C = S
            diagC = np.diag(C).copy()
            break
        dm = sx / W  # weighted mean of the shifted columns
        C = S - np.outer(sx, dm)
        C = 0.5 * (C + C.T)
        diagC = np.diag(C).copy()
        if attempt == 1 or np.any(diagC <= 0):
            break
        if np.max(1.0 + W * dm * dm / diagC) <= CANCELLATION_MAX:
            break
        shift = shift_vec + dm
    if not (np.all(np.isfinite(S)) and np.all(np.isfinite(sx)) and np.all(np.isfinite(gx))):
        return None  # overflow of huge entries: the QR path scales before it multiplies
    return _Moments(shift, shift_vec, beta0, a_start, W, sx, rho, gx, ty, tyy, dm, C, diagC, blocks)


@dataclass
class _Factor:
    """The column scales ``s = sqrt(diag C)``, the Cholesky factor ``L`` of the scaled
    ``Cs`` (ridge included), its singular values and the condition number ``kappa``."""

    s: np.ndarray
    L: np.ndarray
    sv: np.ndarray
    kappa: float


def _factor(mo: _Moments, lam, intercept, rank_tol, n, rows) -> _Factor | None:
    """Scale, factor and test: None when a column is constant or vanishing, the Cholesky
    factorisation fails, or the conditioning test (``kappa <= KAPPA_MAX`` and the
    worst-case contraction of the refinement ``<= CONTRACTION_MAX``) fails."""
    C, diagC, W = mo.C, mo.diagC, mo.W
    p = C.shape[0]
    centre = mo.shift_vec + mo.dm
    raw2 = diagC + (W * centre * centre if intercept else 0.0)
    if np.any(diagC <= 0) or np.any(diagC <= (rank_tol * rank_tol) * raw2):
        return None  # a constant or vanishing column: the QR path names it
    s = np.sqrt(diagC)
    Cs = C / np.outer(s, s)
    Cs[np.diag_indices(p)] = 1.0 + lam / diagC
    try:
        L = np.linalg.cholesky(Cs)
    except np.linalg.LinAlgError:
        return None
    sv = np.linalg.svd(L, compute_uv=False)
    if not (sv[-1] > 0 and np.all(np.isfinite(sv))):
        return None
    kappa = float(sv[0] / sv[-1])
    n_blocks = -(-n // rows)
    gram_error = p * (rows + n_blocks + p + 4) * UNIT_ROUNDOFF
    contraction = gram_error / float(sv[-1]) ** 2
    if kappa > KAPPA_MAX or contraction > CONTRACTION_MAX:
        return None
    return _Factor(s, L, sv, kappa)


@dataclass
class _Passes:
    """The arguments of every residual pass but the point (:func:`lintools.models.lsq_gram_passes.residual_pass`)."""

    X: np.ndarray
    y: np.ndarray
    ybar: float
    w: np.ndarray | None
    shift: np.ndarray | None
    rows: int
    keep_residuals: bool
    lev: tuple | None
    meat: tuple | None
    inv: np.ndarray | None
    case_weights: np.ndarray | None
    blocks: Blocks

    def at(self, beta: np.ndarray, a: float) -> tuple:
        return residual_pass(self.X, self.y, self.ybar, self.w, self.shift, beta, a, self.rows,
                              keep_residuals=self.keep_residuals, lev=self.lev, meat=self.meat, inv=self.inv,
                              case_weights=self.case_weights, blocks=self.blocks)


def _refine(passes: _Passes, mo: _Moments, fac: _Factor, lam, intercept, tss, n_pos) -> tuple | None:
    """The corrected step from the start, then residual passes until the correction is
    within the certificate's floor (at most ``MAX_RESIDUAL_PASSES``; None if never).

    Returns ``(beta, a, steps, size, trace, last, step)`` with ``last`` the last pass's sums and
    ``step`` its correction (centred intercept, scaled slopes), which is not applied."""
    W, s, L, dm, sx = mo.W, fac.s, fac.L, mo.dm, mo.sx
    u = UNIT_ROUNDOFF

    def correction(rho_k, gx_k, beta_k):
        rhs = gx_k - lam * beta_k
        if intercept:
            rhs = rhs - dm * rho_k  # Schur complement of the intercept
        dtheta = solve_upper(L.T, solve_lower(L, rhs / s))
        dbeta = dtheta / s
        da = (rho_k - float(sx @ dbeta)) / W if intercept else 0.0
        return dbeta, da, dtheta

    dbeta, da, _ = correction(mo.rho, mo.gx, mo.beta0)
    beta_k = mo.beta0 + dbeta
    a_k = mo.a_start + da
    kappa, norm_A = fac.kappa, float(fac.sv[0])
    n_rows = float(max(n_pos, 1))
    trace: list[tuple[float, float]] = []
    for steps in range(1, MAX_RESIDUAL_PASSES + 1):
        last = passes.at(beta_k, a_k)
        rho, gx, rss = last[:3]
        dbeta, da, dtheta = correction(rho, gx, beta_k)
        size = math.sqrt(float(dtheta @ dtheta) + (rho * rho / W if intercept else 0.0))
        floor = FLOOR_FACTOR * u * kappa * (
            float(np.linalg.norm(beta_k * s))
            + (math.sqrt(max(tss, 0.0)) + kappa * math.sqrt(max(rss, 0.0) / n_rows)) / norm_A
        )
        trace.append((size, floor))
        if size <= floor:
            break
        if steps == MAX_RESIDUAL_PASSES:
            return None
        beta_k = beta_k + dbeta
        a_k = a_k + da
    step = np.concatenate([[rho / W] if intercept else [], dtheta])  # the correction not applied
    return beta_k, a_k, steps, size, trace, last, step


def _meat_in_z(M: np.ndarray, dm: np.ndarray, s: np.ndarray, intercept: bool) -> np.ndarray:
    """The HC meat ``[1, xt]' diag(m) [1, xt]`` in (centred intercept, scaled slopes) coordinates."""
    p = s.shape[0]
    if intercept:
        T = np.zeros((p + 1, p + 1))
        T[0, 0] = 1.0
        T[1:, 0] = -dm / s
        T[1:, 1:] = np.diag(1.0 / s)
        meat_z = T @ M @ T.T
    else:
        meat_z = M[1:, 1:] / np.outer(s, s)
    return 0.5 * (meat_z + meat_z.T)
