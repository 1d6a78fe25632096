r"""The self-check's cases: fits and metrics on data whose answers are known exactly or
certified, each judged by the digits it achieves (:func:`run_cases`).

Every case builds its data here (exactly representable floats wherever the case is an
exact one), runs the library's public function with its defaults, and compares the
result with a reference that never passes through floating-point arithmetic: rationals
(``fractions``), logarithms and square roots of rationals to 40 digits (``decimal``), or
NIST's certified decimals.  A check's digits are the worst log relative error
(McCullough 1998; :func:`lintools.support.exact.log_relative_error`) over the numbers it
covers, capped at the digits the reference is given to (16 for an exact value, a float64's
worth; 15 for NIST's certified values).  It passes when they reach the digits required,
which each case states and justifies beside its data.  One case must be refused: a fit of
separated classes has to raise :class:`lintools.SeparationError`.

Where a required figure leans on a condition number, it is the condition number of the
centred design with columns scaled to unit length (the problem the solver works on); a
backward-stable solver in float64 guarantees, to first order, about
``16 - log10(condition number)`` digits (Higham 2002, ch. 20); for the logistic and softmax
fits the weaker guarantee is the stopping rule's.  Every requirement leaves at least one
digit (1.7 to 2 for least squares and the metrics) below its guarantee, so that a
sound installation on any platform passes while a wrong BLAS, a broken build or a broken
change does not (common practice for acceptance tests of numerical software).

References
----------
McCullough, B. D. (1998). Assessing the reliability of statistical software: Part I.
The American Statistician 52, 358-366.
Higham, N. J. (2002). Accuracy and Stability of Numerical Algorithms, 2nd ed. SIAM.
Albert, A. & Anderson, J. A. (1984). On the existence of maximum likelihood estimates in
logistic regression models. Biometrika 71, 1-10.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field, replace
from fractions import Fraction
from typing import Any, Callable, Sequence

import numpy as np

from ..support.certified import CERTIFIED_DIGITS, LONGLEY_CERTIFIED, LONGLEY_NAMES, LONGLEY_ROWS
from ..support.errors import SeparationError
from ..support.exact import (
    FLOAT64_DIGITS,
    decimal_ln,
    decimal_sqrt,
    exact_least_squares,
    log_relative_error,
)

__all__ = ["Check", "CASES", "run_cases"]


@dataclass(frozen=True)
class Check:
    """One verdict of the self-check.

    Attributes
    ----------
    case : str
        The case (data set and model).
    quantity : str
        What is compared (``"coefficients"``, ``"standard errors"``, ... or ``"refusal"``).
    source : str
        Where the reference values come from.
    digits : float or None
        Digits achieved: the worst log relative error over the numbers compared (None for a
        refusal, or when the case stopped with an error).
    required : float or None
        Digits required (None for a refusal).
    worst : str
        The number that achieved the fewest digits, or what happened (refusals, errors).
    passed : bool
    warnings : tuple of str
        Warnings the case raised (they are expected on ill-conditioned data).
    """

    case: str
    quantity: str
    source: str
    digits: float | None
    required: float | None
    worst: str
    passed: bool
    warnings: tuple[str, ...] = field(default=())


def _digits(case: str, quantity: str, source: str, labels: Sequence[str], computed: Sequence[float],
            reference: Sequence[Any], cap: float, required: float) -> Check:
    """The check of ``computed`` against ``reference``: the worst LRE and the number behind it."""
    scores = [log_relative_error(float(c), r, cap) for c, r in zip(computed, reference, strict=True)]
    j = int(np.argmin(scores))
    return Check(case, quantity, source, round(scores[j], 1), required, labels[j],
                 round(scores[j], 1) >= required)


def _fractions(values: Any) -> list[Fraction]:
    return [Fraction(float(v)) for v in np.ravel(values)]


# --------------------------------------------------------------------- least squares
EXACT = "exact rational arithmetic (fractions) on the very floats passed in"


def _least_squares_exact(case: str, X: np.ndarray, y: np.ndarray, w: np.ndarray, required: tuple[float, float]
                         ) -> list[Check]:
    from ..models.least_squares import least_squares

    fit = least_squares(X, y, weights=w)
    columns = [[Fraction(1)] * X.shape[0]] + [_fractions(X[:, j]) for j in range(X.shape[1])]
    theta, _, var = exact_least_squares(columns, _fractions(y), _fractions(w))
    labels = ["intercept"] + [f"x{j + 1}" for j in range(X.shape[1])]
    return [
        _digits(case, "coefficients", EXACT, labels, [fit.intercept, *fit.coefficients], theta,
                FLOAT64_DIGITS, required[0]),
        _digits(case, "standard errors", EXACT, labels, [fit.intercept_standard_error, *fit.standard_errors],
                [decimal_sqrt(v) for v in var], FLOAT64_DIGITS, required[1]),
    ]


def least_squares_small() -> list[Check]:
    """Three columns of dyadic rationals on 20 rows with case weights 1 to 3 and residuals.

    Scaled condition number 1.15, so float64 guarantees about 16 - log10(20) = 14.7
    digits after summing 20 rows; required 13 for both coefficients and standard errors
    (1.7 digits of margin).  Measured 15.4 to 16 on the development machine.
    """
    i = np.arange(20.0)
    X = np.column_stack([i / 4 - 2, ((7 * i) % 11) / 8, ((3 * i * i) % 13) / 2])
    y = 3 + X @ [1.5, -2.0, 0.25] + ((5 * i) % 7) / 16
    return _least_squares_exact("least squares, 20 rows, weighted (exact)", X, y, 1 + i % 3, (13.0, 13.0))


def least_squares_polynomial() -> list[Check]:
    """A degree-6 polynomial in x = 1 + i/32 (i = 0..32, every power exact in float64).

    Scaled condition number 1.6e6: float64 guarantees about 16 - 6.2 = 9.8 digits; required
    8 for coefficients and standard errors (1.8 digits of margin).  Measured on the
    development machine: coefficients 13.8 (refined in extended precision; 10.4 with the
    refinement held to float64, as on platforms without an 80-bit long double), standard
    errors 10.1.
    """
    i = np.arange(33.0)
    x = 1 + i / 32
    X = np.column_stack([x**k for k in range(1, 7)])
    y = ((7 * i) % 11) / 8 - (i % 3) / 4
    return _least_squares_exact("least squares, degree-6 polynomial (exact)", X, y, np.ones(33), (8.0, 8.0))


def longley() -> list[Check]:
    """Longley (1967) against the NIST StRD certified values (15 significant digits).

    The decimal data are rounded to float64 (the GNP deflator's tenths), a relative change
    of at most 1.1e-16.  The centred design with columns scaled to unit length has condition
    number 111 (Longley's notorious collinearity lies mostly in the offsets and scales of its
    columns, which the solver removes), so float64 guarantees about 16 - 2.0 = 14 digits,
    the data's rounding costing as much again at worst; required 12 for every certified
    value (about 2 digits of margin, common practice).  Measured 14.6 (coefficients), 14.7
    (standard errors) and 15.0 (residual standard deviation, R-squared) on the development
    machine; the normal equations in float64 (uncentred) keep 7.4 digits of the coefficients here.
    """

    from ..models.least_squares import least_squares

    data = np.array(LONGLEY_ROWS, dtype=float)
    fit = least_squares(data[:, 1:], data[:, 0], names=LONGLEY_NAMES[1:])
    case, source = "least squares, Longley (NIST certified)", "NIST StRD Longley certified values"
    labels = ["intercept", *LONGLEY_NAMES[1:]]
    cert = LONGLEY_CERTIFIED
    return [
        _digits(case, "coefficients", source, labels, [fit.intercept, *fit.coefficients], cert["coefficients"],
                CERTIFIED_DIGITS, 12.0),
        _digits(case, "standard errors", source, labels, [fit.intercept_standard_error, *fit.standard_errors],
                cert["standard_errors"], CERTIFIED_DIGITS, 12.0),
        _digits(case, "residual sd and R-squared", source, ["residual standard deviation", "R-squared"],
                [fit.residual_standard_error, fit.r_squared],
                [cert["residual_standard_deviation"], cert["r_squared"]], CERTIFIED_DIGITS, 12.0),
    ]


# ------------------------------------------------------------------- logistic models
SATURATED = "the saturated model's closed form (logs and square roots of rationals to 40 digits)"


def logistic_grouped() -> list[Check]:
    r"""Four groups of binomial counts, an intercept and three indicator columns.

    The model is saturated, so the fitted probabilities are the observed proportions
    :math:`s_g / m_g`: the intercept is :math:`\log(s_0 / f_0)` (:math:`f = m - s`), the
    coefficient of group g is :math:`\log(s_g f_0 / (f_g s_0))`, and the inverse information
    gives the variances :math:`1/s_0 + 1/f_0` and :math:`1/s_g + 1/f_g + 1/s_0 + 1/f_0`
    exactly (rational).  The default stopping rule alone promises the standardised
    coefficients to 1e-13 times the norm of the inverse information per unit weight (17.4
    here), an error of 1.7e-12 on standardised coefficients of at least 0.17: 11 digits;
    required 10 (1 digit of margin below the weakest guarantee; the standard errors follow
    the coefficients to first order).  Newton's last step usually goes much further (the
    information's condition number is 5.4): measured 15.5 and 15.2 on the development
    machine.
    """
    from ..models.logistic import logistic

    s = [3, 7, 10, 1]
    m = [10, 12, 13, 9]
    X = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]], dtype=float)
    fit = logistic(X, np.array(s, dtype=float), trials=np.array(m, dtype=float))
    f = [mm - ss for ss, mm in zip(s, m)]
    coef = [decimal_ln(Fraction(s[0], f[0]))] + [decimal_ln(Fraction(s[g] * f[0], f[g] * s[0])) for g in (1, 2, 3)]
    v0 = Fraction(1, s[0]) + Fraction(1, f[0])
    var = [v0] + [Fraction(1, s[g]) + Fraction(1, f[g]) + v0 for g in (1, 2, 3)]
    case = "logistic, grouped counts, saturated (exact)"
    labels = ["intercept", "group 2", "group 3", "group 4"]
    return [
        _digits(case, "coefficients", SATURATED, labels, [fit.intercept, *fit.coefficients], coef,
                FLOAT64_DIGITS, 10.0),
        _digits(case, "standard errors", SATURATED, labels, [fit.intercept_standard_error, *fit.standard_errors],
                [decimal_sqrt(v) for v in var], FLOAT64_DIGITS, 10.0),
    ]


def softmax_grouped() -> list[Check]:
    r"""Three levels of a factor by three classes, one row per cell weighted by its count.

    Saturated again: with counts :math:`n_{gk}` and the first class as reference, the
    intercept of class k is :math:`\log(n_{0k}/n_{00})`, the coefficient of level g for
    class k is :math:`\log(n_{gk} n_{00} / (n_{g0} n_{0k}))`; the variances are
    :math:`1/n_{0k} + 1/n_{00}` and :math:`1/n_{gk} + 1/n_{g0} + 1/n_{0k} + 1/n_{00}`
    (the multinomial information inverted per level).  Required 10 digits, as for the
    binary case: the same stopping rule, with the norm of the inverse information per unit
    weight 27 (condition number 13).  Measured 15.3 and 15.5 on the development machine.
    """
    from ..models.softmax import softmax

    n = [[5, 3, 2], [4, 9, 1], [2, 3, 8]]
    X, y, w = [], [], []
    for g in range(3):
        for k in range(3):
            X.append([float(g == 1), float(g == 2)])
            y.append(k)
            w.append(float(n[g][k]))
    fit = softmax(np.array(X), np.array(y), weights=np.array(w))
    got, ref, got_se, var, labels = [], [], [], [], []
    for k in (1, 2):
        base = Fraction(1, n[0][k]) + Fraction(1, n[0][0])
        got += [fit.intercept[k]] + [fit.coefficients[g - 1, k] for g in (1, 2)]
        got_se += [fit.intercept_standard_error[k]] + [fit.standard_errors[g - 1, k] for g in (1, 2)]
        ref += [decimal_ln(Fraction(n[0][k], n[0][0]))]
        ref += [decimal_ln(Fraction(n[g][k] * n[0][0], n[g][0] * n[0][k])) for g in (1, 2)]
        var += [base] + [Fraction(1, n[g][k]) + Fraction(1, n[g][0]) + base for g in (1, 2)]
        labels += [f"class {k + 1}: intercept", f"class {k + 1}: level 2", f"class {k + 1}: level 3"]
    case = "softmax, 3 classes, grouped counts, saturated (exact)"
    return [
        _digits(case, "coefficients", SATURATED, labels, got, ref, FLOAT64_DIGITS, 10.0),
        _digits(case, "standard errors", SATURATED, labels, got_se, [decimal_sqrt(v) for v in var],
                FLOAT64_DIGITS, 10.0),
    ]


def separated() -> list[Check]:
    """Completely separated classes (every failure below every success on one column): the
    maximum-likelihood estimate does not exist (Albert & Anderson 1984), so the fit must be
    refused with :class:`lintools.SeparationError`, with or without SciPy."""
    from ..models.logistic import logistic

    x = np.array([[1.0], [2.0], [3.0], [4.0], [5.0], [6.0], [7.0], [8.0]])
    y = np.array([0, 0, 0, 0, 1, 1, 1, 1])
    case, source = "logistic, completely separated classes", "Albert & Anderson (1984): no finite estimate"
    try:
        fit = logistic(x, y)
    except SeparationError as exc:
        how = ("the exact linear-programme check confirmed it" if exc.diagnosis is not None else
               "found by the divergence of the fit (the exact check needs SciPy)")
        return [Check(case, "refusal", source, None, None, f"refused with SeparationError; {how}", True)]
    return [Check(case, "refusal", source, None, None,
                  f"not refused: returned slope {float(fit.coefficients[0]):.6g}", False)]


# ------------------------------------------------------------------ probability metrics
def _calibration_data() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Ten forecasts (3g + 2)/32, eight rows each with weights 1, 2, 1, 2, ...: every forecast
    carries a tenth of the total weight, so the deciles of risk are the ten forecasts."""
    positives = [0, 1, 1, 2, 3, 4, 4, 6, 7, 8]  # rows of each forecast with outcome 1 (the first ones)
    p, y, w = [], [], []
    for g, k in enumerate(positives):
        for r in range(8):
            p.append((3 * g + 2) / 32)
            y.append(int(r < k))
            w.append(float(1 + r % 2))
    return np.array(y), np.array(p), np.array(w)


def _exact_scores(y: np.ndarray, p: np.ndarray, w: np.ndarray) -> dict[str, Fraction]:
    """Brier score and Murphy's terms, the Hosmer-Lemeshow statistic (10 groups), the ROC area
    and DeLong's variance, in rationals straight from their definitions."""
    f, o, u = _fractions(p), [Fraction(int(v)) for v in y], _fractions(w)
    W = sum(u)
    out = {"Brier score": sum(wi * (fi - oi) ** 2 for wi, fi, oi in zip(u, f, o)) / W}
    obar = sum(wi * oi for wi, oi in zip(u, o)) / W
    groups: dict[Fraction, list[int]] = {}
    for i, fi in enumerate(f):
        groups.setdefault(fi, []).append(i)
    rel = res = Fraction(0)
    for value, rows in groups.items():
        Wk = sum(u[i] for i in rows)
        ok = sum(u[i] * o[i] for i in rows) / Wk
        rel += Wk * (value - ok) ** 2
        res += Wk * (ok - obar) ** 2
    out.update({"reliability": rel / W, "resolution": res / W, "uncertainty": obar * (1 - obar)})
    # Hosmer-Lemeshow: cut j is the smallest forecast whose cumulative weight reaches j/10 of
    # the total; a row's group is the number of cuts below its forecast
    values = sorted(groups)
    cuts = []
    for j in range(1, 10):
        cum = Fraction(0)
        for v in values:
            cum += sum(u[i] for i in groups[v])
            if cum >= Fraction(j, 10) * W:
                cuts.append(v)
                break
    hl = Fraction(0)
    for g in range(10):
        rows = [i for i, fi in enumerate(f) if sum(1 for c in cuts if c < fi) == g]
        tot = sum(u[i] for i in rows)
        if tot == 0:  # coinciding cuts leave a group empty; it is dropped
            continue
        obs = sum(u[i] * o[i] for i in rows)
        exp = sum(u[i] * f[i] for i in rows)
        hl += (obs - exp) ** 2 / exp + (obs - exp) ** 2 / (tot - exp)
    out["Hosmer-Lemeshow statistic"] = hl
    # ROC area (Mann-Whitney) and DeLong's variance from the placement values
    pos = [i for i in range(len(o)) if o[i] == 1]
    neg = [i for i in range(len(o)) if o[i] == 0]
    W1, W0 = sum(u[i] for i in pos), sum(u[i] for i in neg)

    def beats(a: Fraction, b: Fraction) -> Fraction:
        return Fraction(1) if a > b else Fraction(1, 2) if a == b else Fraction(0)

    v10 = {i: sum(u[j] * beats(f[i], f[j]) for j in neg) / W0 for i in pos}
    v01 = {j: sum(u[i] * beats(f[i], f[j]) for i in pos) / W1 for j in neg}
    area = sum(u[i] * v10[i] for i in pos) / W1
    s10 = sum(u[i] * (v10[i] - area) ** 2 for i in pos) / (W1 - 1)
    s01 = sum(u[j] * (v01[j] - area) ** 2 for j in neg) / (W0 - 1)
    out["ROC area"] = area
    out["ROC area variance"] = s10 / W1 + s01 / W0
    return out


def probability_metrics() -> list[Check]:
    """Brier score with Murphy's decomposition, the Hosmer-Lemeshow statistic and the ROC area
    with DeLong's standard error on 80 weighted rows of dyadic forecasts, against their
    definitions evaluated in rationals.

    Each is a short sum of non-negative terms or a ratio of such sums (no cancellation beyond
    the observed-minus-expected differences, which are exact here): float64 keeps about
    16 - log10(80) = 14.1 digits; required 12 (2.1 digits of margin).
    """
    from ..metrics.checks import hosmer_lemeshow
    from ..metrics.discrimination import roc_auc
    from ..metrics.scores import brier

    y, p, w = _calibration_data()
    exact = _exact_scores(y, p, w)
    b = brier(y, p, weights=w)
    hl = hosmer_lemeshow(y, p, groups=10, weights=w)
    roc = roc_auc(y, p, weights=w)
    source = "the definitions evaluated in exact rational arithmetic"
    calibration = ["Brier score", "reliability", "resolution", "uncertainty", "Hosmer-Lemeshow statistic"]
    return [
        _digits("calibration, 80 weighted rows (exact)", "Brier terms and Hosmer-Lemeshow", source, calibration,
                [b.score, b.reliability, b.resolution, b.uncertainty, hl.statistic],
                [exact[k] for k in calibration], FLOAT64_DIGITS, 12.0),
        _digits("discrimination, 80 weighted rows (exact)", "ROC area and DeLong standard error", source,
                ["ROC area", "standard error"], [roc.area, roc.standard_error],
                [exact["ROC area"], decimal_sqrt(exact["ROC area variance"])], FLOAT64_DIGITS, 12.0),
    ]


#: The cases in the order they run: (name, function returning its checks).
CASES: tuple[tuple[str, Callable[[], list[Check]]], ...] = (
    ("least squares, weighted (exact)", least_squares_small),
    ("least squares, polynomial (exact)", least_squares_polynomial),
    ("least squares, Longley (NIST)", longley),
    ("logistic, grouped (exact)", logistic_grouped),
    ("softmax, grouped (exact)", softmax_grouped),
    ("logistic, separated (refusal)", separated),
    ("probability metrics (exact)", probability_metrics),
)


def run_cases() -> list[Check]:
    """Run every case; a case that stops with an error fails with the error's text.

    Warnings raised by a case are recorded on its checks, not shown (ill-conditioned cases
    warn by design)."""
    out: list[Check] = []
    for name, run in CASES:
        with warnings.catch_warnings(record=True) as seen:
            warnings.simplefilter("always")
            try:
                checks = run()
            except Exception as exc:  # noqa: BLE001 - any failure of a case is its verdict
                checks = [Check(name, "run", "-", None, None, f"stopped: {type(exc).__name__}: {exc}", False)]
        texts = tuple(dict.fromkeys(str(m.message) for m in seen))
        out += [replace(c, warnings=texts) for c in checks]
    return out
