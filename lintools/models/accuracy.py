r"""How many digits of a fit's coefficients to trust: the solver's and the data's.

Every fit record carries an :class:`Accuracy`.  Both figures are counted in digits (the
log relative error, LRE) of the worst coefficient, in *column-scaled coordinates*: the
intercept ``b`` and ``rho_j beta_j`` with ``rho_j`` the weighted root mean square of
column ``j``.  A coefficient whose scaled size is below ``NEAR_ZERO`` times the largest
is measured against that largest (the scale of the others); every other one against its
own size.  Multiplying a column by a constant therefore changes neither figure.

``solver_digits``: how far the computed coefficients are from the exact optimum of the
data exactly as given.  First-order perturbation theory near a non-degenerate optimum
(Higham 2002, ch. 20 for least squares; for likelihoods the Newton step as the error
estimate, Dennis & Schnabel 1996, sec. 5.2): the error is estimated as

.. math::

    |\delta\theta_j| \approx |(T\,d)_j| + \kappa_f \sqrt{(T\,\Sigma_u T^\top)_{jj}}
    + u\,(|T|\,|z|)_j ,

with ``d`` the correction at the answer in the centred, scaled coordinates ``z`` of the
solver (the refinement correction of least squares, :math:`H_z^{-1} g_z` for a
likelihood), ``T`` the map from ``z`` to the column-scaled coordinates, ``u = 2^-53``
and :math:`\Sigma_u` the covariance of the change of ``z`` when every entry of X (and y)
carries an independent relative rounding error of size ``u``: a backward-stable solver
that forms its residual in float64 is as good as the data at ``u`` and no better
(Higham 2002, sec. 20.1 and 20.5).  Least squares refined in extended precision use
``u_ext / u`` times that term.

``data_digits``: how many digits the data determine at their stated precision.  With
``dX``, ``dy`` independent, uniform errors of the stated size (relative ``u`` for float64
input, or half a unit of the last decimal written in a file), the first-order change of
the optimum of :math:`\sum_i \ell(y_i, a_i'\theta)` is

.. math::

    H\,\delta\theta = -\Big[\sum_i dA_i\, r_i + \sum_i a_i\big(W_i\, dA_i'\theta
    + \psi_{y,i}\, dy_i\big)\Big],

``r_i = d\ell/d\eta``, ``W_i = d^2\ell/d\eta^2`` (the weights for least squares),
``psi_y = d^2\ell/d\eta\,dy`` (``-w_i``; none for labels, which are exact).  Its
covariance is :math:`H^{-1}(A'\,\mathrm{diag}(q)\,A + D_r + C + C')H^{-1}` with
``q_i = W_i^2 sum_j sigma_ij^2 theta_j^2 + w_i^2 tau_i^2``,
``(D_r)_jj = sum_i sigma_ij^2 r_i^2`` and the cross term
``C_jk = theta_j sum_i sigma_ij^2 r_i W_i a_ik``; its square-root diagonal is the
expected change, reported per coefficient.  The sums are taken on at most
``SUBSAMPLE_ROWS`` evenly spaced rows and scaled up, so the cost is ``O(m p^2)`` (``O(m p^2
K^2)`` for K outputs); the blocked fits take a uniform sample of as many rows during their
first evaluation pass (:mod:`lintools.blocks.sample`).  The sentence says when the data term
is estimated on a sample.

References
----------
Higham, N. J. (2002). Accuracy and Stability of Numerical Algorithms, 2nd ed. SIAM
(ch. 20, the least-squares problem: perturbation theory and iterative refinement).
Dennis, J. E. & Schnabel, R. B. (1996). Numerical Methods for Unconstrained Optimization
and Nonlinear Equations. SIAM (the Newton step at a non-degenerate minimiser).
Stewart, G. W. & Sun, J. (1990). Matrix Perturbation Theory. Academic Press (first-order
expansions of solutions of perturbed systems).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..support.errors import InputError
from ..support.text import intercept_label
from ..support.threads import row_buffer, scratch
from ..support.validate import INTERCEPT_NAME, ReadOnlyArrays

__all__ = ["Accuracy", "NEAR_ZERO", "SUBSAMPLE_ROWS", "UNIT", "Precision", "column_scaled", "digits_of",
           "sensitivity", "accuracy_record", "subsample", "sample_note", "checked_precision", "half_unit", "rows_of"]

#: Unit roundoff of float64.
UNIT = 2.0**-53
#: A scaled coefficient below this fraction of the largest is measured against the largest.
NEAR_ZERO = 1e-3
#: Rows used for the data term (evenly spaced); the sums are scaled up by n / m.
SUBSAMPLE_ROWS = 2048
#: Digits of a correctly rounded float64.
_MAX_DIGITS = -math.log10(UNIT)
#: Safety factor of the rounding floor of a solver that forms its residual in float64.
FLOOR_FACTOR = 4.0


@dataclass(frozen=True, eq=False)
class Accuracy(ReadOnlyArrays):
    """Digits of a fit's coefficients to trust (see :mod:`lintools.models.accuracy`).

    Attributes
    ----------
    solver_digits : float
        Estimated digits of the worst coefficient that agree with the exact optimum of the
        data exactly as given.
    data_digits : float
        Digits of the worst coefficient that the data determine at their stated precision.
    solver_worst, data_worst : str
        The term each figure comes from.
    solver_relative_to, data_relative_to : str
        ``"its own size"`` or ``"the scale of the others"`` (a coefficient near zero).
    precision : str
        The precision of the data the data figure assumes.
    solver_error, data_error : ndarray
        Per term (intercept first, as ``coefficient_table``), in the caller's units: the
        estimated error of the computed coefficient and the expected change of the
        coefficient under the data's rounding.
    sentence : str
        The two figures in one line.
    """

    solver_digits: float
    data_digits: float
    solver_worst: str
    data_worst: str
    solver_relative_to: str
    data_relative_to: str
    precision: str
    solver_error: np.ndarray
    data_error: np.ndarray
    sentence: str

    def report(self) -> str:
        """The two figures in one line."""
        return self.sentence

    def __eq__(self, other: object) -> bool:
        if type(other) is not Accuracy:
            return NotImplemented
        return all(np.array_equal(a, b) if isinstance(a, np.ndarray) else a == b
                   for a, b in ((getattr(self, f), getattr(other, f)) for f in self.__dataclass_fields__))

    __hash__ = None  # type: ignore[assignment]


@dataclass(frozen=True)
class Precision:
    """The rounding of the data: per column of X a relative and an absolute half-width of
    its rounding interval, and the same for y (None: float64 input, relative ``u``).

    A fit takes it as ``data_precision`` and states its ``data_digits`` at it.  Build it
    from a file with :meth:`lintools.exchange.csv_table.Table.data_precision`, or from the
    decimal places of each column with :meth:`written`.  ``what`` names it in the record's
    sentence.
    """

    x_relative: np.ndarray
    x_absolute: np.ndarray
    y_relative: float = UNIT
    y_absolute: float = 0.0
    what: str = "float64 input, relative rounding 1.1e-16"

    @staticmethod
    def float64(p: int) -> "Precision":
        """Float64 input of ``p`` columns: relative rounding ``u`` of every entry."""
        if isinstance(p, (bool, np.timedelta64)) or not isinstance(p, (int, np.integer)) or not 0 <= p < 2**31:
            raise InputError(f"p must be a whole number of columns from 0 to 2**31 - 1; got {p!r:.80}")
        return Precision(np.full(int(p), UNIT), np.zeros(int(p)))

    @staticmethod
    def written(x_decimals: Any, y_decimals: int | None = None, what: str = "the decimals written") -> "Precision":
        """Data written to ``x_decimals[j]`` decimal places in column ``j`` of X (None: the
        column is exact, an indicator for example) and ``y_decimals`` in y (None: exact or
        labels): an absolute half-unit ``0.5 * 10**-d`` beside float64's relative ``u``."""
        if not isinstance(what, str):
            raise InputError(f"what must be a str naming the precision; got {type(what).__name__}")
        def half(d: Any, label: str) -> float:
            if d is None:
                return 0.0
            if isinstance(d, (bool, np.timedelta64)) or not isinstance(d, (int, np.integer)):
                raise InputError(f"{label} must be a whole number of decimal places or None; got {d!r:.80}")
            return half_unit(int(d))
        try:
            cols = list(x_decimals)
        except TypeError:
            raise InputError(f"x_decimals must be a list with the decimal places of each column of X; got "
                             f"{type(x_decimals).__name__}") from None
        x_abs = np.array([half(d, f"x_decimals[{j}]") for j, d in enumerate(cols)], dtype=float)
        return Precision(np.full(len(cols), UNIT), x_abs, y_absolute=half(y_decimals, "y_decimals"), what=what)


def half_unit(decimals: int) -> float:
    """Half a unit of the ``decimals``-th decimal place (held at the largest double beyond it)."""
    if decimals > 400:
        return 0.0  # below the smallest double
    return 0.5 * 10.0 ** -decimals if decimals > -308 else float(np.finfo(np.float64).max)


def checked_precision(value: Any, p: int) -> Precision | None:
    """The ``data_precision`` argument of a fit, checked against ``p`` columns of X."""
    if value is None:
        return None
    remedy = ("build it with Table.data_precision() after read_table(..., written_decimals=True), or with "
              "Precision.written([decimals of each column], y_decimals)")
    if not isinstance(value, Precision):
        raise InputError(f"data_precision must be a Precision or None; got {type(value).__name__}: {remedy}")
    for label, arr in (("x_relative", value.x_relative), ("x_absolute", value.x_absolute)):
        a = np.asarray(arr, dtype=float)
        if a.shape != (p,):
            raise InputError(f"data_precision.{label} has shape {a.shape}, but X has {p} columns: {remedy}, "
                             "with one entry per column of X in its order")
        if not (np.all(a >= 0) and np.all(a < np.inf)):
            raise InputError(f"data_precision.{label} must hold finite numbers >= 0: {remedy}")
    for label, v in (("y_relative", value.y_relative), ("y_absolute", value.y_absolute)):
        if not (isinstance(v, (int, float, np.floating)) and 0 <= float(v) < math.inf):
            raise InputError(f"data_precision.{label} must be a finite number >= 0; got {v!r:.80}: {remedy}")
    if not isinstance(value.what, str):
        raise InputError(f"data_precision.what must be a str naming the precision; got {value.what!r:.80}")
    return value


def subsample(n: int) -> np.ndarray:
    """At most ``SUBSAMPLE_ROWS`` evenly spaced row indices (all rows when fewer)."""
    m = min(n, SUBSAMPLE_ROWS)
    return (np.arange(m, dtype=np.int64) * n) // m


def rows_of(Xa: np.ndarray, idx: np.ndarray) -> np.ndarray:
    """The rows ``idx`` of ``Xa`` (the subsample), in a buffer the thread keeps (``idx`` in range: with
    ``mode="raise"``, the default, NumPy would take into a temporary and copy it over)."""
    return np.take(Xa, idx, axis=0, out=row_buffer("accuracy rows", (idx.size, Xa.shape[1])), mode="clip")


def column_scaled(c: np.ndarray, s: np.ndarray, rho: np.ndarray, intercept: bool, K: int = 1) -> np.ndarray:
    """``T`` with ``theta' = T z``: from centred, scaled coordinates (``z_0 = b + c'beta``,
    ``z_j = s_j beta_j``) to column-scaled ones (``b``, ``rho_j beta_j``), K outputs
    interleaved as in the engine (``index = j K + k``)."""
    p = s.shape[0]
    off = int(intercept)
    T = np.zeros((p + off, p + off))
    T[off:, off:] = np.diag(rho / s)
    if intercept:
        T[0, 0] = 1.0
        T[0, 1:] = -c / s
    return np.kron(T, np.eye(K)) if K > 1 else T


def digits_of(err: np.ndarray, theta: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per-term digits of ``err`` against ``theta`` (column-scaled), and which terms are
    measured against the scale of the others (their size below ``NEAR_ZERO`` of it)."""
    top = float(np.max(np.abs(theta), initial=0.0))
    near = np.abs(theta) < NEAR_ZERO * top
    ref = np.where(near, NEAR_ZERO * top, np.abs(theta))
    with np.errstate(divide="ignore", invalid="ignore"):
        d = -np.log10(err / ref)
    d = np.where(ref > 0, d, 0.0)
    return np.clip(np.nan_to_num(d, nan=0.0, posinf=_MAX_DIGITS), 0.0, _MAX_DIGITS), near


def sensitivity(Z: np.ndarray, gz: np.ndarray, r: np.ndarray, W: np.ndarray, B: np.ndarray, intercept: bool,
                errors: list[tuple[np.ndarray, np.ndarray | None]], scale: float = 1.0) -> list[np.ndarray]:
    r"""Variance of the first-order change of each column-scaled coefficient, for each
    ``(sig, tau_w)`` of ``errors``: independent errors of standard deviation ``sig`` (rows
    by columns, in the units of ``Z``) in the design and ``tau_w`` in each row's first
    derivative ``r_i`` ((m,) or (m, K); ``|psi_y| sd(dy)`` for an error of the response;
    None: none).

    ``Z``: rows of the centred, scaled design (no intercept column); ``gz``: the slopes in
    those coordinates, (p,) or (p, K) for K outputs; ``r``, ``W``: the first and second
    derivative of each row's loss in eta, (m,) and (m,) or (m, K) and (m, K, K); ``B = T
    H_z^{-1}``: the inverse information in ``z`` (term-major, intercepts first, ``index = j
    K + k``) followed by any linear map to the reported coordinates; ``scale``: the factor
    from the rows given to all rows.  An error ``dX_ij`` moves the gradient by
    ``dX_ij (e_j r_i' + a_i (W_i gz_j)')`` and the coefficients by ``B`` times it, so the
    variance is ``sum_ij sig_ij^2 (Bs_j r_i + BA_i W_i gz_j)^2`` (``Bs_j`` the columns of
    ``B`` of term j, ``BA_i = sum_l a_il B_l``), summed as squares of these row terms (never
    through ``H^{-1} Cov(g) H^{-1}``, which cancels catastrophically when ``H`` is
    ill-conditioned)."""
    m, p = Z.shape
    if np.ndim(r) == 1 or r.shape[1] == 1:  # one output, however shaped
        one = [(sig, None if tau_w is None else np.ravel(tau_w)) for sig, tau_w in errors]
        return _one_output(Z, np.ravel(gz), np.ravel(r), np.ravel(W), B, intercept, one, scale)
    K, off, P = r.shape[1], int(intercept), B.shape[0]
    gz = np.reshape(gz, (p, K))
    Bl = B.reshape(P, p + off, K)
    Bs = Bl[:, off:, :]
    WG = np.matmul(W, gz.T)  # (m, K, p): W_i gz_j
    var = [np.zeros(P) for _ in errors]
    step = max(1, (1 << 17) // max(P * (p + K), 1))  # rows at a time: (rows, P, p + K) within 1 MB
    for lo in range(0, m, step):
        rows = slice(lo, lo + step)
        BA = np.tensordot(Z[rows], Bs, axes=([1], [1]))  # (rows, P, K): B a_i per output
        if intercept:
            BA += Bl[:, 0, :]
        U = _row_terms(BA, WG[rows], r[rows], Bs)
        U *= U
        BA *= BA
        BA2 = np.ascontiguousarray(BA.transpose(1, 0, 2)).reshape(P, -1)  # (P, rows K): BA_i^2 as one matrix
        for v, (sig, tau_w) in zip(var, errors):
            v += np.einsum("ij,ipj->p", sig[rows] * sig[rows], U)
            if tau_w is not None:  # an error of r_i (per output) moves the gradient by a_i times it
                t = np.reshape(tau_w[rows], (-1, K))
                v += BA2 @ (t * t).ravel()
    return [scale * v for v in var]


def _one_output(Z: np.ndarray, gz: np.ndarray, r: np.ndarray, W: np.ndarray, B: np.ndarray, intercept: bool,
                errors: list[tuple[np.ndarray, np.ndarray | None]], scale: float) -> list[np.ndarray]:
    """:func:`sensitivity` for one output, through matrix products: with ``a = B_kj r_i`` and
    ``b = BA_ik W_i gz_j``, ``sum_ij s_ij^2 (a + b)^2`` is the sum of the three products
    ``own`` (``a^2``), ``through`` (``b^2``) and ``cross`` (``2ab``), each O(m p P) in BLAS
    where the row-term form builds (m, P, p) arrays (20 times slower at p = 50).  The sum
    is clipped at 0; a variance needs about one digit, so the rounding of the expansion
    (relative u times the terms' sizes) never shows in a figure."""
    off = int(intercept)
    Bs = B[:, off:]  # B e_j for the slopes
    shape = (Z.shape[0], B.shape[0])  # the row-sized arrays: buffers the thread keeps
    BA = np.matmul(Z, Bs.T, out=row_buffer("sensitivity BA", shape))  # rows: B a_i
    if intercept:
        BA += B[:, 0]
    BA2 = np.multiply(BA, BA, out=row_buffer("sensitivity BA2", shape))
    rW, rr, WW = r * W, r * r, W * W
    g2, gB = gz * gz, gz[:, None] * Bs.T
    own_factor = Bs * Bs
    P = row_buffer("sensitivity P", shape)
    out = []
    for sig, tau_w in errors:
        s2 = sig * sig
        q = WW * (s2 @ g2)
        if tau_w is not None:  # an error of r_i moves the gradient by a_i times it
            q += tau_w * tau_w
        own = own_factor @ (s2.T @ rr)
        through = BA2.T @ q
        np.matmul(s2, gB, out=P)  # (m, P): sum_j s2_ij gz_j B_kj
        P *= BA
        cross = 2.0 * (P.T @ rW)
        out.append(scale * np.clip(own + through + cross, 0.0, None))
    return out


def _row_terms(BA: np.ndarray, WG: np.ndarray, r: np.ndarray, Bs: np.ndarray) -> np.ndarray:
    """``BA_i W_i gz_j + Bs_j r_i`` (rows, P, p) for K > 1 outputs, in a buffer the thread keeps."""
    m, P, _ = BA.shape
    U = np.matmul(BA, WG, out=scratch("sensitivity terms", (m, P, WG.shape[2])))
    U += np.tensordot(r, Bs, axes=([1], [2]))
    return U


def sample_note(used: int, rows: int, how: str = "evenly spaced") -> str:
    """What the sentence says of a data term estimated on ``used`` of ``rows`` rows ("" when all)."""
    return "" if used >= rows else f"; the data term is estimated on {used} of the {rows} rows ({how})"


def accuracy_record(theta: np.ndarray, z: np.ndarray, T: np.ndarray, step_z: np.ndarray, floor_var: np.ndarray, floor: float,
                    data_var: np.ndarray, to_caller: np.ndarray, terms: tuple[str, ...], precision: str,
                    note: str = "") -> Accuracy:
    """The :class:`Accuracy` of a fit.

    ``theta``, ``z``: the coefficients in column-scaled and in the solver's coordinates
    (each stored coefficient carries its rounding, ``u |T| |z|``); ``T``: from ``z`` to ``theta``;
    ``step_z``: the correction at the answer in ``z``; ``floor_var``: the variances at
    relative rounding ``u`` (:func:`sensitivity`), times ``floor**2`` for the solver's
    floor; ``data_var``: the variances at the data's precision; ``to_caller``: per term,
    the factor from column-scaled coordinates to the caller's units; ``note`` ends the
    sentence (:func:`sample_note`)."""
    solver_err = np.abs(T @ step_z) + floor * np.sqrt(floor_var) + UNIT * (np.abs(T) @ np.abs(z))
    data_err = np.sqrt(data_var)
    sd_, s_near = digits_of(solver_err, theta)
    dd_, d_near = digits_of(data_err, theta)
    shown = tuple(intercept_label(t for t in terms if t != INTERCEPT_NAME) if t == INTERCEPT_NAME else t
                  for t in terms)
    js, jd = int(np.argmin(sd_)), int(np.argmin(dd_))
    rel = ("its own size", "the scale of the others")
    s_rel, d_rel = rel[int(s_near[js])], rel[int(d_near[jd])]
    sentence = (f"Accuracy: about {sd_[js]:.1f} digits agree with the exact optimum of these data (worst: "
                f"{shown[js]}, relative to {s_rel}); the data determine about {dd_[jd]:.1f} digits at their "
                f"precision, {precision} (worst: {shown[jd]}, relative to {d_rel}){note}")
    return Accuracy(
        solver_digits=float(round(sd_[js], 2)), data_digits=float(round(dd_[jd], 2)),
        solver_worst=shown[js], data_worst=shown[jd], solver_relative_to=s_rel, data_relative_to=d_rel,
        precision=precision, solver_error=solver_err * to_caller, data_error=data_err * to_caller,
        sentence=sentence,
    )
