r"""The logistic function, once for the whole package (fits, scoring, recalibration maps).

:math:`\mu = 1 / (1 + e^{-\eta})` and its complement, each to full relative accuracy and
without overflow: :math:`e^{-|\eta|}` lies in (0, 1] and underflows harmlessly to 0.
"""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["halves", "sigmoid"]


def halves(eta: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``(mu, 1 - mu)`` with ``mu = 1 / (1 + exp(-eta))``, each to full relative accuracy."""
    e = np.exp(-np.abs(eta))  # in (0, 1]; underflows harmlessly to 0
    big = 1.0 / (1.0 + e)
    small = e * big
    pos = eta >= 0
    return np.where(pos, big, small), np.where(pos, small, big)


def sigmoid(eta: Any) -> np.ndarray:
    r"""The logistic function :math:`1 / (1 + e^{-\eta})`, overflow-safe."""
    return halves(np.asarray(eta, dtype=float))[0]
