"""The line search of :class:`lintools.engine.problem.LinearModelProblem`: the objective
along ``z + t d``, reusing ``eta(z)`` and ``X d`` (see :mod:`lintools.engine.problem`)."""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["_Line"]


class _Line:
    """Changes ``F(z + t d) - F(z)`` and slopes ``d/dt F(z + t d)``; reuses ``eta(z)`` and ``X d``.

    Changes are computed directly (``loss.value_change``), so line searches resolve
    decreases far below the rounding of ``F`` itself.
    """

    #: declared capability (:class:`lintools.engine.contracts.Line`): :meth:`adopt`
    carries = True

    def __init__(self, problem: Any, z: np.ndarray, d: np.ndarray) -> None:
        self.p, self.z, self.d = problem, z, d
        self._eta0 = problem.eta(z)
        self._deta = problem.eta(d, with_offset=False)
        #: Firth's penalty: ``Li`` with ``I^{-1} = Li' Li`` at ``eta(z)`` (set by that problem's ``line``)
        self.root0: np.ndarray | None = None
        self._cache: tuple[float, float, float] | None = None
        #: (t, eta0 + t X d) of the last trial; K-output problems keep only t (their trials
        #: are evaluated one block of rows at a time) and form the sum when it is adopted
        self.trial: tuple[float, Any] | None = None

    @property
    def eta0(self) -> Any:
        """``eta(z)`` (formed again if :meth:`release` dropped it)."""
        if self._eta0 is None:
            self._eta0 = self.p.eta(self.z)
        return self._eta0

    @property
    def deta(self) -> Any:
        """``X d`` (formed again if :meth:`release` dropped it)."""
        if self._deta is None:
            self._deta = self.p.eta(self.d, with_offset=False)
        return self._deta

    def release(self) -> None:
        """Drop ``eta(z)`` and ``X d`` (the problem calls this once the search is over; they
        are formed again if the line is used after all)."""
        self._eta0 = self._deta = None

    def adopt(self, t: float, z_new: np.ndarray) -> None:
        """Hand the problem the linear predictor of the accepted trial ``t`` for ``z_new``."""
        if self.trial is not None and self.trial[0] == t and z_new.shape == self.z.shape:
            eta = self.trial[1]
            if eta is None:  # K outputs: eta0 + t X d, written over X d (no longer needed)
                eta = self.deta
                if t != 1.0:
                    eta *= t
                eta += self.eta0
                self.release()
                self.trial = None
            self.p._carry(z_new, eta)

    def change(self, t: float) -> float:
        return self.p._change(self, t, need_slope=False)[0]

    def change_and_slope(self, t: float) -> tuple[float, float]:
        if self._cache is not None and self._cache[0] == t:
            return self._cache[1], self._cache[2]
        c, slope = self.p._change(self, t, need_slope=True)
        self._cache = (t, c, slope)
        return c, slope
