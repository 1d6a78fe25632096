r"""Scale-free likelihood fits: case weights brought to a power-of-two scale, outputs scaled back.

Multiplying every case weight by ``c`` multiplies the negative log-likelihood by ``c`` and
leaves its minimiser unchanged (the ridge ``l2`` must be multiplied by ``c`` too for the
penalised objective to keep its optimum; Firth's penalty does not scale, so its estimate
does depend on ``c``, as the mathematics says).  The fits therefore divide the weights
by a power of two ``s`` (:func:`lintools._validate.weight_scale`: exact, and the largest
row weight lands in [1, 2)) before any arithmetic, minimise ``F / s`` (ridge ``l2 / s``,
Firth's penalty ``1/s`` times its own), and multiply every weight-proportional output
back once at the end:

* ``s`` times: log-likelihood, deviance, null deviance, likelihood-ratio statistic,
  objective, number of observations (and hence AIC and BIC, which follow from them);
* ``1 / s`` times: covariance (the inverse information);
* unchanged: coefficients, convergence verdict, iteration count, stopping quantity.

For a power of two ``c`` the iterations are then bit-for-bit those of the unscaled
weights; for any other ``c`` they differ only by the rounding of the caller's products
``c * w``.  Weights of 1e-300 neither underflow in ``w mu (1 - mu)`` nor do weights of
1e300 overflow a sum over the rows.  Only a reported total that float64 cannot hold (a
log-likelihood beyond 1.8e308, a variance below 2.2e-308) is refused, with an
:class:`lintools.InputError` that names it and the remedy.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np

from ._errors import InputError
from ._validate import weight_scale

__all__ = ["scaled_case_weights", "scaled_back", "caller_covariance", "check_solver", "check_l2_scale"]

_TINY = float(np.finfo(float).tiny)
_REMEDY = "divide (or multiply) all weights by a common factor; the coefficients do not change"


def scaled_case_weights(w: np.ndarray, trials: np.ndarray | None = None) -> tuple[np.ndarray, float]:
    """``(w / s, s)`` with ``s`` a power of two and ``max(w m / s)`` in [1, 2) (``m`` the trials).

    Raises :class:`InputError` when the scale itself is beyond float64 (weights times
    trials whose largest product exceeds 1.8e308)."""
    s1 = weight_scale(w)
    w1 = w / s1
    if trials is None:
        return w1, s1
    s2 = weight_scale(w1 * trials)
    s = s1 * s2
    if not math.isfinite(s) or s == 0.0:
        raise InputError(
            "weights times trials exceed what float64 holds (a product beyond 1.8e308); " + _REMEDY
        )
    return w1 / s2, s


def scaled_back(value: float, scale: float, what: str) -> float:
    """``value * scale``, refused when the product overflows float64."""
    out = float(value) * scale
    if math.isfinite(value) and not math.isfinite(out):
        raise InputError(f"the {what} ({value:.6g} x {scale:.6g}) exceeds what float64 holds; {_REMEDY}")
    return out


def check_l2_scale(lam: float, scale: float) -> None:
    """The ridge enters as ``l2 / s``: refuse an ``l2`` that overflows it (weights tiny beside l2)."""
    if lam and not math.isfinite(lam / scale):
        raise InputError(
            f"l2 = {lam:g} is beyond float64 range relative to the case weights (largest about {scale:.3g}); "
            "the penalty would swamp the data: use a smaller l2 or larger weights"
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
