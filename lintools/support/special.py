r"""The incomplete beta and gamma functions: the series and continued fractions underneath.

:mod:`lintools.support.distributions` checks its arguments and calls these cores with
validated one-dimensional float arrays.  The methods, their accuracy devices and the
references are described there; in short:

* :math:`I_x(a, b)` by the odd contraction of the continued fraction A&S 26.5.8
  (modified Lentz, Numerical Recipes ``betacf``), its prefactor from Stirling's series
  with the deviations :math:`a\,g(u)`, :math:`g(u) = u - \log(1+u)` (DiDonato & Morris
  1992);
* :math:`P(a, x)` and :math:`Q(a, x)` by the power series A&S 6.5.29 and Legendre's
  continued fraction A&S 6.5.31 (Numerical Recipes ``gser`` and ``gcf``), in
  :mod:`lintools.support.special_gamma` with the helpers here.

The vectorised loops retire each entry as soon as its own recurrence has converged, so a
long-converging entry costs no work on the others.

References
----------
Abramowitz, M. & Stegun, I. A. (1964). *Handbook of Mathematical Functions*, 6.1.40, 6.5,
26.5.8.  National Bureau of Standards.

Dekker, T. J. (1971). A floating-point technique for extending the available precision.
*Numerische Mathematik* 18, 224-242.

DiDonato, A. R. & Morris, A. H. (1992). Algorithm 708: significant digit computation of
the incomplete beta function ratios.  *ACM TOMS* 18, 360-373.

Press, W. H., Teukolsky, S. A., Vetterling, W. T. & Flannery, B. P. (2007).
*Numerical Recipes*, 3rd ed., sections 6.1, 6.2, 6.4.  Cambridge University Press.
"""

from __future__ import annotations

import math

import numpy as np

from .errors import LintoolsError

_EPS = float(np.finfo(float).eps)
_LOG_2PI = math.log(2.0 * math.pi)
_FPMIN = 1e-300
_MAX_TERMS = 10_000_000  # a safety net: convergence needs of the order of sqrt(a) terms
MAX_SHAPE = 1e10  # larger shape parameters would need more than ~1e7 terms


def _away_from_zero(v: np.ndarray) -> np.ndarray:
    """The modified Lentz guard: a partial value below 1e-300 in size becomes 1e-300."""
    return np.where(np.abs(v) < _FPMIN, _FPMIN, v)


def _lentz_step(alpha: np.ndarray, beta: np.ndarray, c: np.ndarray, d: np.ndarray) -> tuple:
    """One modified-Lentz step of a continued fraction whose next term is ``alpha / (beta + ...)``:
    the new ``C`` and ``1 / D`` (each guarded away from zero) and the factor ``C / D`` of the value."""
    d = 1.0 / _away_from_zero(beta + alpha * d)
    c = _away_from_zero(beta + alpha / c)
    return c, d, c * d


def _retire(done: np.ndarray, out: np.ndarray, value: np.ndarray, state: tuple) -> tuple | None:
    """Write the converged entries of ``value`` to ``out`` at ``state[0]`` (the entries'
    positions) and return the other entries of every array in ``state``, or None when
    every entry has converged."""
    out[state[0][done]] = value[done]
    keep = ~done
    if not keep.any():
        return None
    return tuple(v[keep] for v in state)


# ------------------------------------------------------------ error-free arithmetic
def _split(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    c = 134217729.0 * a  # Veltkamp splitting, 2**27 + 1
    hi = c - (c - a)
    return hi, a - hi


def _two_prod(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Return ``p, e`` with ``p = fl(a*b)`` and ``a*b = p + e`` exactly (Dekker 1971)."""
    p = a * b
    ah, al = _split(a)
    bh, bl = _split(b)
    return p, ((ah * bh - p) + ah * bl + al * bh) + al * bl


# ------------------------------------------------------------------ small helpers
_STIRLING = (
    1.0 / 12.0,
    -1.0 / 360.0,
    1.0 / 1260.0,
    -1.0 / 1680.0,
    1.0 / 1188.0,
    -691.0 / 360360.0,
    1.0 / 156.0,
    -3617.0 / 122400.0,
    43867.0 / 244188.0,
)


def _stirling_rest(z: np.ndarray) -> np.ndarray:
    r"""Return :math:`\mu(z) = \log\Gamma(z) - [(z-\tfrac12)\log z - z + \tfrac12\log 2\pi]`.

    Stirling's series (A&S 6.1.40) for z >= 10, the definition with ``math.lgamma``
    below; either way the absolute error is a few units of 1e-16.
    """
    z = np.asarray(z, dtype=float)
    if z.size == 1 and z.item() >= 10.0:  # one argument: the series on a Python float (same bits)
        return np.full(z.shape, _stirling_series(z.item()))
    out = np.empty_like(z)
    big = z >= 10.0
    if big.any():
        out[big] = _stirling_series(z[big])
    if (~big).any():
        zs = z[~big]
        lg = np.array([math.lgamma(v) for v in zs])
        out[~big] = lg - ((zs - 0.5) * np.log(zs) - zs + 0.5 * _LOG_2PI)
    return out


def _stirling_series(zb):
    """Stirling's series for ``z >= 10`` (an array, or one Python float)."""
    r = (1.0 / zb) ** 2
    acc = 0.0
    for c in reversed(_STIRLING):
        acc = acc * r + c
    return acc / zb


def _log1pmx_neg(u: np.ndarray) -> np.ndarray:
    r"""Return :math:`g(u) = u - \log(1+u) \ge 0` without cancellation, for u > -1.

    For |u| < 1 the series in :math:`s = u/(2+u)`,
    :math:`g = u s - 2 \sum_{k\ge1} s^{2k+1}/(2k+1)`, is used (|s| <= 1/3).
    """
    u = np.asarray(u, dtype=float)
    if u.size == 1 and abs(u.item()) < 1.0:  # one argument: the series on a Python float (same bits)
        return np.full(u.shape, _log1pmx_series(u.item()))
    out = np.empty_like(u)
    near = np.abs(u) < 1.0
    if near.any():
        out[near] = _log1pmx_series(u[near])
    far = ~near
    if far.any():
        with np.errstate(divide="ignore"):
            out[far] = u[far] - np.log1p(u[far])
    return out


def _log1pmx_series(un):
    """The series of :func:`_log1pmx_neg` for ``|u| < 1`` (an array, or one Python float)."""
    s = un / (2.0 + un)
    s2 = s * s
    acc = 0.0
    for k in range(20, 0, -1):
        acc = acc * s2 + 1.0 / (2 * k + 1)
    return un * s - 2.0 * s * s2 * acc


# ------------------------------------------------------------- incomplete beta
def _beta_cf(a, b, x, y, delta):
    r"""Continued fraction of A&S 26.5.8 (Numerical Recipes ``betacf``), vectorised.

    With :math:`d_{2m+1} = -\frac{(a+m)(a+b+m)x}{(a+2m)(a+2m+1)}` and
    :math:`d_{2m} = \frac{m(b-m)x}{(a+2m-1)(a+2m)}`, :math:`I_x(a,b)` is the prefactor
    over :math:`a\,(1 + d_1/(1 + d_2/(1 + \dots)))`.  The odd contraction of that
    fraction is evaluated instead,

    .. math:: T = 1 + d_1 - \cfrac{d_1 d_2}{1 + d_2 + d_3 - \cfrac{d_3 d_4}{1 + d_4 + d_5
              - \dotsb}},

    because its partial denominators have closed forms that do not cancel when ``x`` is
    close to 1 and ``a`` large: :math:`1 + d_1 = (1 - \delta)/(a+1)` with
    :math:`\delta = b x - a y`, and :math:`1 + d_{2m} + d_{2m+1} = C_m + y S_m`, where
    :math:`x S_m = -(d_{2m} + d_{2m+1})` and :math:`C_m = 1 - S_m` is written out.
    Returns :math:`1/T`.
    """
    n = a.size
    if n == 1:
        return np.array([_beta_cf_one(float(a[0]), float(b[0]), float(x[0]), float(y[0]), float(delta[0]))])
    out = np.empty(n)
    idx = np.arange(n)
    near_one = x > 0.5
    f = (1.0 - delta) / (a + 1.0)
    f = _away_from_zero(f)
    c = f.copy()
    d = np.zeros(n)
    prev = -((a + b) / (a + 1.0)) * x  # d_1
    for m in range(1, _MAX_TERMS):
        a2m = a + 2.0 * m
        t_odd = ((a + m) / a2m) * ((a + b + m) / (a2m + 1.0))
        t_even = (m / (a2m - 1.0)) * ((b - m) / a2m)
        even = t_even * x  # d_2m
        alpha = -prev * even
        s_m = t_odd - t_even
        c_m = (
            (2.0 * m + 1.0 - b) * (a / a2m) / (a2m + 1.0)
            + (m / a2m) * ((3.0 * m + 2.0 - b) / (a2m + 1.0))
            + t_even
        )
        beta = np.where(near_one, c_m + y * s_m, 1.0 - x * s_m)
        prev = -t_odd * x  # d_2m+1
        c, d, step = _lentz_step(alpha, beta, c, d)
        f = f * step
        done = np.abs(step - 1.0) <= 2.0 * _EPS
        if done.any():
            rest = _retire(done, out, 1.0 / f, (idx, a, b, x, y, near_one, f, c, d, prev))
            if rest is None:
                return out
            idx, a, b, x, y, near_one, f, c, d, prev = rest
    raise LintoolsError(  # pragma: no cover - the fraction converges for every a, b > 0
        "incomplete beta continued fraction did not converge; please report the inputs"
    )


def _beta_core(a, b, x, y, lx, ly):
    """Return ``(I_x(a,b), 1 - I_x(a,b), prefactor)`` for 1-d float arrays.

    ``x`` and ``y = 1 - x`` are each given to full relative precision (so the smaller
    one carries its own digits), ``lx`` and ``ly`` are accurate logarithms of them
    (``lx`` may lie below the exponent range of doubles when ``x`` underflowed to 0).
    0 < x < 1 is assumed.  The prefactor is ``x**a * y**b / B(a, b)``.
    """
    apb = a + b
    small_x = x <= y
    delta = np.where(small_x, x * apb - a, b - y * apb)  # = b x - a y
    ua = delta / a
    ub = -delta / b
    a_log = ua <= -0.5
    b_log = ub <= -0.5
    with np.errstate(invalid="ignore", divide="ignore"):
        ga = a * _log1pmx_neg(np.where(a_log, 0.0, ua))
        gb = b * _log1pmx_neg(np.where(b_log, 0.0, ub))
        expo = -(ga + gb)
        expo = np.where(a_log, a * (lx + np.log1p(b / a)) - delta - gb, expo)
        expo = np.where(b_log, b * (ly + np.log1p(a / b)) + delta - ga, expo)
    expo = expo + _stirling_rest(apb) - _stirling_rest(a) - _stirling_rest(b)
    pref = np.sqrt(b * (a / apb) / (2.0 * math.pi)) * np.exp(expo)

    # continued fraction in x when x < (a+1)/(a+b+2), tested on the smaller variable
    direct = np.where(small_x, x * (apb + 2.0) < a + 1.0, y * (apb + 2.0) > b + 1.0)
    lower = np.empty_like(x)
    upper = np.empty_like(x)
    if direct.any():
        i = direct
        lower[i] = pref[i] * _beta_cf(a[i], b[i], x[i], y[i], delta[i]) / a[i]
        upper[i] = 1.0 - lower[i]
    if (~direct).any():
        i = ~direct
        upper[i] = pref[i] * _beta_cf(b[i], a[i], y[i], x[i], -delta[i]) / b[i]
        lower[i] = 1.0 - upper[i]
    return lower, upper, pref


def _pair_from_ratio(w, v, log_w):
    r"""Beta arguments for :math:`x = 1/(1+w)`, :math:`y = w/(1+w)`, with ``v = 1/w``.

    ``w`` and ``v`` need only be accurate where they are at most 1 (one of them may
    have overflowed); ``log_w`` is an accurate :math:`\log w`.  Returns
    ``x, y, lx, ly``, each to full relative precision.
    """
    with np.errstate(all="ignore"):
        small = w <= 1.0
        x = np.where(small, 1.0 / (1.0 + w), v / (1.0 + v))
        y = np.where(small, w / (1.0 + w), 1.0 / (1.0 + v))
        lx = np.where(small, -np.log1p(w), -log_w - np.log1p(v))
        ly = np.where(small, log_w - np.log1p(w), -np.log1p(v))
    return x, y, lx, ly


def _ratio(num_a, num_b, den):
    """``w = num_a * num_b / den`` and ``v = 1/w`` without intermediate overflow."""
    ma, ea = np.frexp(num_a)
    mb, eb = np.frexp(num_b)
    md, ed = np.frexp(den)
    m = ma * mb
    scale = ea + eb - ed
    with np.errstate(all="ignore"):
        return np.ldexp(m / md, scale), np.ldexp(md / m, -scale)


# One argument (a p-value of one statistic, the usual call): the recurrence on Python floats,
# the same IEEE operations in the same order as the vectorised loop (so the same bits),
# without the per-term cost of NumPy calls on one-element arrays.
def _beta_cf_one(a: float, b: float, x: float, y: float, delta: float) -> float:
    """:func:`_beta_cf` for one argument."""
    f = (1.0 - delta) / (a + 1.0)
    f = _FPMIN if abs(f) < _FPMIN else f
    c, d = f, 0.0
    prev = -((a + b) / (a + 1.0)) * x  # d_1
    for m in range(1, _MAX_TERMS):
        a2m = a + 2.0 * m
        t_odd = ((a + m) / a2m) * ((a + b + m) / (a2m + 1.0))
        t_even = (m / (a2m - 1.0)) * ((b - m) / a2m)
        alpha = -prev * (t_even * x)
        s_m = t_odd - t_even
        if x > 0.5:
            c_m = (
                (2.0 * m + 1.0 - b) * (a / a2m) / (a2m + 1.0)
                + (m / a2m) * ((3.0 * m + 2.0 - b) / (a2m + 1.0))
                + t_even
            )
            beta = c_m + y * s_m
        else:
            beta = 1.0 - x * s_m
        prev = -t_odd * x  # d_2m+1
        d = beta + alpha * d
        d = 1.0 / (_FPMIN if abs(d) < _FPMIN else d)
        c = beta + alpha / c
        c = _FPMIN if abs(c) < _FPMIN else c
        step = c * d
        f = f * step
        if abs(step - 1.0) <= 2.0 * _EPS:
            return 1.0 / f if f else math.copysign(math.inf, f)
    raise LintoolsError(  # pragma: no cover - the fraction converges for every a, b > 0
        "incomplete beta continued fraction did not converge; please report the inputs"
    )
