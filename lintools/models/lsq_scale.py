"""Power-of-two units for least squares: the fit never depends on the scale of its data.

Before any arithmetic, :func:`lintools.least_squares` and
:func:`lintools.blocks.least_squares_blocks` divide the response by ``2**ey``, the
weights by ``2**ew`` and column ``j`` of the design by ``2**ex[j]``, each chosen so that
the largest absolute value becomes a number in ``[1, 2)``.  Division by a power of two is
exact (but for entries that fall below ``2**-1022`` times the largest, which become
subnormal), so the problem solved is the caller's problem in other units, and every sum
and product stays far from overflow and underflow.  The answer is mapped back by exact
multiplications by powers of two (:func:`numpy.ldexp`), once, at the end:

* ``b = 2**ey b'``, ``beta_j = 2**(ey - ex_j) beta'_j``;
* covariances ``2**(e_i + e_j + es) V'_ij`` with ``e`` those exponents and ``es`` the
  exponent that the weights and the residual degrees of freedom contribute;
* the residual sum of squares and the objective ``2**(2 ey + ew)``, the gradient
  ``2**(ew + ey)`` (intercept) and ``2**(ew + ey + ex_j)`` (slopes);
* the ridge on unit coefficients ``l2 / (2**ew 4**ex_j)`` per column, so the penalised
  problem is also the caller's.

A figure whose true value lies beyond the largest float64 number is refused with an
:class:`lintools.InputError` that names the figure, the input whose scale drives it and
the remedy.  A figure below the smallest normal number is rounded as float64 rounds it
(gradual underflow): its absolute error stays below ``2**-1074``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from ..support.errors import InputError
from ..support.validate import power_of_two, weight_scale

__all__ = ["Units", "exponent", "column_exponents", "scaled_sqrt", "to_caller"]

_TINY = float(np.finfo(float).tiny)
_LOG10_2 = math.log10(2.0)


def exponent(scale: float) -> int:
    """``k`` with ``scale == 2**k`` for a power of two."""
    return math.frexp(scale)[1] - 1


def column_exponents(X: np.ndarray) -> np.ndarray:
    """Per column, the exponent of the power of two just below its largest ``|x|`` (0 for a
    zero column): dividing the column by ``2**k`` leaves its largest entry in ``[1, 2)``."""
    top = np.max(np.abs(X), axis=0) if X.shape[0] else np.zeros(X.shape[1])
    _, e = np.frexp(top)
    return np.where(top > 0, e - 1, 0).astype(np.int64)


def to_caller(value, exp):
    """``value * 2**exp`` exactly (overflow gives inf, underflow rounds as float64 does)."""
    with np.errstate(over="ignore", under="ignore"):
        return np.ldexp(np.asarray(value, dtype=float), np.asarray(exp, dtype=np.int64))


def scaled_sqrt(value, exp):
    """``sqrt(value * 2**exp)`` without forming ``value * 2**exp`` (which may leave the range)."""
    v = np.asarray(value, dtype=float)
    e = np.asarray(exp, dtype=np.int64)
    odd = e % 2
    with np.errstate(over="ignore", under="ignore"):
        return np.ldexp(np.sqrt(v * np.ldexp(1.0, odd)), (e - odd) // 2)


@dataclass(frozen=True)
class Units:
    """The exponents of the units in which a least-squares fit is computed.

    ``ey``: the response is divided by ``2**ey``; ``ew``: the weights by ``2**ew``;
    ``ex``: column ``j`` by ``2**ex[j]``.  ``names`` and ``target`` name the columns and the
    response in messages.
    """

    ey: int
    ew: int
    ex: np.ndarray
    names: tuple[str, ...]
    target: str = "y"

    @staticmethod
    def response(y: np.ndarray) -> tuple[np.ndarray, int]:
        """``y / 2**ey`` (a new array) and ``ey``."""
        s = power_of_two(float(np.max(np.abs(y)))) if y.size else 1.0
        return y / s, exponent(s)

    @staticmethod
    def weights(w: np.ndarray | None) -> tuple[np.ndarray | None, int]:
        """``w / 2**ew`` (a new array; None for unit weights or weights all equal to a power
        of two) and ``ew``, with :func:`lintools.support.validate.weight_scale`."""
        if w is None:
            return None, 0
        s = weight_scale(w)
        w1 = w / s
        if bool(np.all(w1 == 1.0)):
            return None, exponent(s)
        return w1, exponent(s)

    def theta(self, intercept: bool) -> np.ndarray:
        """Exponents of ``(b, beta)`` (intercept first when fitted): ``ey``, ``ey - ex_j``."""
        slopes = self.ey - self.ex
        return np.concatenate([[self.ey], slopes]) if intercept else slopes

    # ----- refusals -------------------------------------------------------------------
    def check(self, figure: str, unit_value, exp, sources: Sequence[tuple[str, float]], *,
              underflow_ok: bool = False) -> np.ndarray:
        """``unit_value * 2**exp``, or an InputError when a finite unit value leaves the float64
        range: above it, or (unless ``underflow_ok``: a figure such as the gradient at the
        optimum, whose size is rounding anyway) wholly below the normal range, where it would
        read as 0 or keep few digits.  ``sources``: (input, power) pairs, the inputs whose
        scale drives ``exp`` and how (e.g. ``("y", 2)`` for a variance); the message names the
        one that pushes most."""
        out = to_caller(unit_value, exp)
        uv = np.asarray(unit_value, dtype=float)
        if not np.all(np.isfinite(uv)):
            raise InputError(
                f"the {figure} of this least-squares fit is not a finite number in float64 arithmetic "
                "even in scaled units; the data span more orders of magnitude than float64 can "
                "combine: rescale the columns of X, y or the weights to moderate sizes"
            )
        bad = ~np.isfinite(out)
        if not bad.any():
            top = float(np.max(np.abs(out))) if out.size else 0.0
            if top < _TINY and not underflow_ok and np.any(uv != 0):  # the figure as a whole below the normal range
                at = int(np.argmax(np.ravel(np.abs(uv) * np.ldexp(1.0, np.broadcast_to(np.asarray(exp), uv.shape)))))
                e = int(np.ravel(np.broadcast_to(np.asarray(exp), uv.shape))[at])
                size = math.log10(abs(float(np.ravel(uv)[at]))) + e * _LOG10_2
                raise InputError(self._underflow_message(figure, size, sources))
            return out
        at = np.flatnonzero(np.ravel(bad))[0]
        e = int(np.ravel(np.broadcast_to(np.asarray(exp), uv.shape))[at])
        size = math.log10(abs(float(np.ravel(uv)[at]))) + e * _LOG10_2
        raise InputError(self._overflow_message(figure, size, sources))

    def _underflow_message(self, figure: str, size: float, sources: Sequence[tuple[str, float]]) -> str:
        push = []
        for source, power in sources:
            e, label = self._exponent_of(source)
            push.append((power * e, label))
        push.sort(key=lambda t: t[0])
        label = push[0][1] if push and push[0][0] < 0 else "the data"
        what = label.split(" (")[0]
        return (
            f"the {figure} of this least-squares fit would be about 1e{size:+.0f}, below the "
            f"smallest normal float64 number (about 2.2e-308), where it would be stored as 0 or "
            f"with few digits; it is the scale of {label} that takes it there. Rescale {what} by "
            "a power of ten before fitting and scale the answer back"
        )

    def _exponent_of(self, source: str) -> tuple[int, str]:
        if source == "y":
            return self.ey, f"{self.target} (largest |value| about 1e{self.ey * _LOG10_2:+.0f})"
        if source == "weights":
            return self.ew, f"the weights (largest about 1e{self.ew * _LOG10_2:+.0f})"
        j = int(source)
        return int(self.ex[j]), (f"column {j} ('{self.names[j]}') of X "
                                 f"(largest |value| about 1e{self.ex[j] * _LOG10_2:+.0f})")

    def _overflow_message(self, figure: str, size: float, sources: Sequence[tuple[str, float]]) -> str:
        push = []
        for source, power in sources:
            e, label = self._exponent_of(source)
            push.append((power * e, label))
        push.sort(key=lambda t: -t[0])
        label = push[0][1] if push and push[0][0] > 0 else "the data"
        what = label.split(" (")[0]
        return (
            f"the {figure} of this least-squares fit would be about 1e{size:+.0f}, beyond the "
            f"largest float64 number (about 1.8e+308); it is the scale of {label} that takes it "
            f"there. Rescale {what} by a power of ten before fitting and scale the answer back"
        )
