r"""Scale-free likelihood fits: case weights divided by the largest one, outputs scaled back.

Multiplying every case weight by ``c`` multiplies the negative log-likelihood by ``c`` and
leaves its minimiser unchanged (the ridge ``l2`` must be multiplied by ``c`` too for the
penalised objective to keep its optimum; Firth's penalty does not scale, so its estimate
does depend on ``c``, as the mathematics says).  The fits therefore divide the weights
by the largest one, ``s = max w``, before any arithmetic, minimise ``F / s`` (ridge
``l2 / s``, Firth's penalty ``1/s`` times its own), and multiply every
weight-proportional output back once at the end:

* ``s`` times: log-likelihood, deviance, null deviance, likelihood-ratio statistic,
  objective, number of observations (and hence AIC and BIC, which follow from them);
* ``1 / s`` times: covariance (the inverse information);
* unchanged: coefficients, convergence verdict, iteration count, stopping quantity.

Why the largest weight rather than a power of two near it: both make the iterations
bit-for-bit those of the unscaled weights when ``c`` is a power of two (``fl(c w_i) /
fl(c s) = fl(w_i / s)`` then), but only the largest weight does so for constant weights
of any size (they all become exactly 1, the unweighted fit), which is how frequency
weights of 1e-12 or 1e6 usually arrive.  The price is one rounding of each weight
(relative 1.1e-16), far below what the fits promise.  For other weights and factors the
caller's products ``c w_i`` are themselves rounded, so the scaled problems differ in
their last bits: the answer agrees to the rounding level and the iteration count is the
same unless the last step is decided by rounding (a gradient within a hair of ``tol``).

Weights of 1e-300 neither underflow in ``w mu (1 - mu)`` nor do weights of 1e300 overflow
a sum over the rows.  Only a reported total that float64 cannot hold (a log-likelihood
beyond 1.8e308 or among the subnormal numbers, a variance outside the normal range) is
refused, with an :class:`lintools.InputError` that names it and the remedy.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np

from .errors import InputError

__all__ = ["case_weight_scale", "scaled_case_weights", "scaled_back", "caller_covariance", "check_solver",
           "check_l2_scale", "check_firth_scale", "FIRTH_MIN_SCALE", "SUM_LIMIT", "wide_column_error"]

_TINY = float(np.finfo(float).tiny)
_REMEDY = "divide (or multiply) all weights by a common factor; the coefficients do not change"


def case_weight_scale(w: np.ndarray) -> float:
    """The factor the fits divide the case weights by: the largest weight (1 when none is positive)."""
    top = float(np.max(w)) if w.size else 0.0
    return top if top > 0 else 1.0


def scaled_case_weights(w: np.ndarray) -> tuple[np.ndarray, float]:
    """``(w / s, s)`` with ``s`` the largest weight: the weights in (0, 1], constant ones exactly 1."""
    s = case_weight_scale(w)
    return w / s, s


def scaled_back(value: float, scale: float, what: str) -> float:
    """``value * scale``, refused when a normal ``value`` leaves float64's normal range."""
    out = float(value) * scale
    if math.isfinite(value) and abs(value) >= _TINY and not (_TINY <= abs(out) < math.inf):
        where = "exceeds what float64 holds" if abs(out) >= 1 else "is below float64's normal range (digits lost)"
        raise InputError(f"the {what} ({value:.6g} x {scale:.6g}) {where}; {_REMEDY}")
    return out


def check_l2_scale(lam: float, scale: float) -> None:
    """The ridge enters as ``l2 / s``: refuse an ``l2`` that overflows it (weights tiny beside l2)."""
    if lam and not math.isfinite(lam / scale):
        raise InputError(
            f"l2 = {lam:g} is beyond float64 range relative to the case weights (largest about {scale:.3g}); "
            "the penalty would swamp the data: use a smaller l2 or larger weights"
        )


#: Firth fits refuse case weights whose largest is below this (their penalty's weight 1 / s
#: in the scaled objective would pass 2**1000, and its sums float64's range).
FIRTH_MIN_SCALE = 2.0**-1000


def check_firth_scale(scale: float) -> None:
    """Firth's penalty enters the scaled objective ``F / s`` with weight ``1 / s``: refuse a
    weight scale ``s`` so small that the penalty outweighs the data beyond float64's range."""
    if scale < FIRTH_MIN_SCALE:
        raise InputError(
            f"firth=True with case weights whose largest is {scale:.3g}: Firth's penalty does not scale with "
            "the weights, and against weights below 2**-1000 (9.3e-302) it outweighs the log-likelihood beyond "
            "float64's range (the estimate would be the penalty's alone); multiply all weights by a common "
            "factor (for example divide them by their largest, or pass case counts)"
        )


#: The largest bound accepted on a fit's sums over the rows of entry times residual
#: (2**1020, 1/8 of float64's largest): a column whose largest magnitude times the total
#: weight (the sum of |residual| is at most that) passes it is refused by name.
SUM_LIMIT = 2.0**1020


def wide_column_error(column: int, name: str, top: float) -> InputError:
    """The refusal of X column ``column`` (``name``), whose entries up to ``top`` times the
    residuals, summed over the rows, would pass float64's range (see :data:`SUM_LIMIT`)."""
    return InputError(
        f"X column {column} ('{name}') has entries up to {top:.3g} in magnitude: the fit's sums over the "
        "rows of entry times residual would pass 1.8e308, which float64 cannot hold: rescale that column "
        "by a power of ten so that its entries are nearer 1 (its coefficient and standard error then scale by "
        "the inverse factor)"
    )


def caller_covariance(T: np.ndarray, Vz: np.ndarray, scale: float, terms: Sequence[str],
                      spreads: np.ndarray | None = None) -> np.ndarray:
    """The caller's covariance ``T Vz T' / s`` from the covariance ``Vz`` of the scaled
    problem in its standardised coordinates (``theta = T z``), symmetric to the last bit.

    A variance that float64 cannot hold (beyond 1.8e308, or below 2.2e-308 where digits
    are lost) is refused naming its term: it comes from a column whose spread is extreme
    (its coefficient scales by 1 / spread, its variance by 1 / spread^2) or from extreme
    weights.  ``terms`` names the parameters in order (quoted, as they go into the
    message); ``spreads`` (one per parameter, NaN
    for an intercept) goes into the message."""
    with np.errstate(over="ignore", under="ignore", invalid="ignore"):
        V = (T @ Vz @ T.T) / scale
        V = 0.5 * (V + V.T)
        d = np.diag(V)
        bad = np.flatnonzero(~(np.isfinite(d) & (d >= _TINY)) & (np.diag(Vz) > 0))
    if not bad.size and np.all(np.isfinite(V)):
        return V
    j = int(bad[0]) if bad.size else int(np.argmax(~np.all(np.isfinite(V), axis=1)))
    row = T[j]
    top = float(np.max(np.abs(row)))
    size = math.log10(max(float((row / top) @ Vz @ (row / top)), _TINY)) + 2.0 * math.log10(top) - math.log10(scale)
    where = "above 1.8e308" if size > 0 else "below 2.2e-308"
    spread = ""
    if spreads is not None and math.isfinite(float(spreads[j])):
        spread = f" (its column's weighted spread is {float(spreads[j]):.3g})"
    raise InputError(
        f"the variance of the coefficient of {terms[j]} would be about 1e{size:.0f}, {where}, which float64 "
        f"cannot hold{spread}: rescale that column by a power of ten so that its spread is nearer 1 (its "
        "coefficient and standard error then scale by the inverse factor), or rescale the weights"
    )


def check_solver(solver: Any, choices: Sequence[str]) -> str:
    """``solver`` when it names one of ``choices``, else an :class:`InputError` naming both."""
    if isinstance(solver, str) and solver in choices:
        return solver
    shown = ", ".join(repr(c) for c in choices)
    raise InputError(f"solver={solver!r} is not one of {shown}; name one of them (default 'newton')")
