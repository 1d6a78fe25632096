"""Cox's (1958) calibration line and calibration-in-the-large, fitted with
:func:`lintools.logistic`.  Re-exported by :mod:`lintools.metrics.checks`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..support import distributions as dist
from ..support.errors import InputError
from ..support.text import p_text
from ..support.outcomes import (
    binary_forecast,
    binary_outcome,
    case_weights,
    check_level,
    fmt_number,
    two_sided,
)

__all__ = ["CalibrationLine", "calibration_line"]


@dataclass(frozen=True)
class CalibrationLine:
    """Result of :func:`calibration_line` (Cox 1958).

    Attributes
    ----------
    slope, slope_standard_error : float
        :math:`\\beta` of :math:`\\mathrm{logit}\\,P(y=1) = \\alpha + \\beta\\,\\mathrm{logit}(p)`.
    slope_statistic, slope_p_value : float
        Wald z of :math:`\\beta = 1` and its two-sided p-value.
    intercept, intercept_standard_error, intercept_statistic, intercept_p_value : float
        :math:`\\alpha` of the same fit and the Wald test of :math:`\\alpha = 0`.
    covariance : ndarray (2, 2)
        Covariance of :math:`(\\alpha, \\beta)`.
    joint_statistic, joint_p_value : float
        Wald chi-square (2 df) of :math:`(\\alpha, \\beta) = (0, 1)`.
    in_the_large, in_the_large_standard_error : float
        :math:`\\alpha_0` of :math:`\\mathrm{logit}\\,P(y=1) = \\alpha_0 + \\mathrm{logit}(p)`
        (logit(p) as offset): calibration-in-the-large.
    in_the_large_statistic, in_the_large_p_value : float
        Wald test of :math:`\\alpha_0 = 0`.
    level : float
    slope_interval, intercept_interval, in_the_large_interval : tuple of float
        Wald intervals at ``level``.
    line_fit, offset_fit : fit records
        The two logistic fits (:func:`lintools.logistic`), with their convergence records.
    """

    slope: float
    slope_standard_error: float
    slope_statistic: float
    slope_p_value: float
    intercept: float
    intercept_standard_error: float
    intercept_statistic: float
    intercept_p_value: float
    covariance: np.ndarray
    joint_statistic: float
    joint_p_value: float
    in_the_large: float
    in_the_large_standard_error: float
    in_the_large_statistic: float
    in_the_large_p_value: float
    level: float
    slope_interval: tuple[float, float]
    intercept_interval: tuple[float, float]
    in_the_large_interval: tuple[float, float]
    line_fit: Any
    offset_fit: Any

    def report(self) -> str:
        """Return the calibration line and its tests as text."""
        pct = f"{100 * self.level:g}%"
        head = ("term".ljust(22) + "estimate".rjust(12) + "standard error".rjust(16) + "null".rjust(6)
                + "z".rjust(9) + "p".rjust(10) + f"{pct} from".rjust(12) + f"{pct} to".rjust(12))
        rows = [
            ("slope", self.slope, self.slope_standard_error, 1, self.slope_statistic, self.slope_p_value, self.slope_interval),
            ("intercept (with slope)", self.intercept, self.intercept_standard_error, 0, self.intercept_statistic,
             self.intercept_p_value, self.intercept_interval),
            ("in the large (offset)", self.in_the_large, self.in_the_large_standard_error, 0,
             self.in_the_large_statistic, self.in_the_large_p_value, self.in_the_large_interval),
        ]
        lines = ["calibration line: logit P(y=1) = intercept + slope * logit(p)", head, "-" * len(head)]
        for name, est, se, null, z, pv, (lo, hi) in rows:
            lines.append(name.ljust(22) + fmt_number(est, 12, 7) + fmt_number(se, 16, 7) + str(null).rjust(6)
                         + f"{z:.3f}".rjust(9) + p_text(pv).rjust(10) + fmt_number(lo, 12, 7) + fmt_number(hi, 12, 7))
        lines.append(f"joint Wald test of (intercept, slope) = (0, 1): chi-square {self.joint_statistic:.6g} "
                     f"with 2 degrees of freedom, p-value {p_text(self.joint_p_value)}")
        return "\n".join(lines) + "\n"


def calibration_line(
    y: Any, p: Any, *, weights: Any = None, positive: Any = None, level: float = 0.95
) -> CalibrationLine:
    r"""Cox's (1958) calibration intercept and slope, and calibration-in-the-large.

    With :math:`\eta_i = \mathrm{logit}(p_i) = \log p_i - \log(1 - p_i)`, two logistic
    regressions are fitted by maximum likelihood (:func:`lintools.logistic`, case
    weights ``w``):

    .. math::
        \mathrm{logit}\,P(y_i = 1) = \alpha + \beta\,\eta_i
        \qquad\text{and}\qquad
        \mathrm{logit}\,P(y_i = 1) = \alpha_0 + \eta_i \ (\eta_i \text{ as offset}).

    Perfect calibration means :math:`\alpha = 0, \beta = 1`, and :math:`\alpha_0 = 0`.
    The fits inherit :func:`lintools.logistic`'s handling of scale: multiplying every weight
    by a constant leaves the estimates and the verdict unchanged and divides the
    covariance by it (the standard errors by its square root).
    A slope below 1 says the forecasts are too extreme, above 1 too timid.  Standard
    errors are from the inverse Fisher information; the tests are Wald z tests
    (:math:`(\beta - 1)/SE`, :math:`\alpha/SE`, :math:`\alpha_0/SE`, two-sided normal
    p-values) and Cox's joint Wald chi-square of :math:`(\alpha, \beta) = (0, 1)` on 2 df.

    Parameters
    ----------
    y : array-like
        Binary labels; both classes must occur.
    p : array-like
        Probability of the positive class, strictly between 0 and 1.
    weights : array-like, optional
        Case weights, passed to the logistic fits.
    positive : label, optional
    level : float
        Level of the Wald intervals.

    Returns
    -------
    CalibrationLine

    Raises
    ------
    InputError
        When a forecast is exactly 0 or 1 (its logit is infinite), or only one class occurs.
    lintools.SeparationError
        When the logistic fit has no finite maximum (raised by :func:`lintools.logistic`).

    References
    ----------
    Cox, D. R. (1958). Two further applications of a model for binary regression.
    Biometrika 45, 562-565.
    Steyerberg, E. W. (2019). Clinical Prediction Models, 2nd ed., chapter 15. Springer.
    """
    f = binary_forecast(p)
    o, _ = binary_outcome(y, positive, n=f.shape[0], need_both=True)
    w = case_weights(weights, f.shape[0])
    level = check_level(level)
    edge = (f == 0.0) | (f == 1.0)
    if edge.any():
        i = int(np.argmax(edge))
        raise InputError(
            f"p is exactly {f[i]:g} at row {i}, whose logit is infinite; the calibration line "
            "needs forecasts strictly between 0 and 1 (drop or clip those rows)"
        )
    eta = np.log(f) - np.log1p(-f)
    from ..models.logistic import logistic

    line = logistic(eta[:, None], o, weights=w)
    # intercept-only fit with offset, written as one column of ones without a separate intercept
    large = logistic(np.ones((f.shape[0], 1)), o, weights=w, offset=eta, intercept=False)
    a, b = float(line.intercept), float(line.coefficients[0])
    cov = np.array(line.covariance, dtype=float)
    se_a, se_b = float(line.intercept_standard_error), float(line.standard_errors[0])
    a0, se0 = float(large.coefficients[0]), float(large.standard_errors[0])
    d = np.array([a, b - 1.0])
    joint = float(d @ np.linalg.solve(cov, d))
    q = float(dist.normal_quantile(0.5 + level / 2.0))
    return CalibrationLine(
        slope=b,
        slope_standard_error=se_b,
        slope_statistic=(b - 1.0) / se_b,
        slope_p_value=two_sided((b - 1.0) / se_b),
        intercept=a,
        intercept_standard_error=se_a,
        intercept_statistic=a / se_a,
        intercept_p_value=two_sided(a / se_a),
        covariance=cov,
        joint_statistic=joint,
        joint_p_value=float(dist.chi2_sf(joint, 2)),
        in_the_large=a0,
        in_the_large_standard_error=se0,
        in_the_large_statistic=a0 / se0,
        in_the_large_p_value=two_sided(a0 / se0),
        level=level,
        slope_interval=(b - q * se_b, b + q * se_b),
        intercept_interval=(a - q * se_a, a + q * se_a),
        in_the_large_interval=(a0 - q * se0, a0 + q * se0),
        line_fit=line,
        offset_fit=large,
    )
