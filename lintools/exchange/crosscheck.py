"""Comparing delivered coefficients with a refit, and the ridge strength they imply.

A validator holds a model someone else fitted (its coefficients) and the development
data.  Two questions have statistical answers:

1. *Are the delivered coefficients the refit's, up to sampling noise?*  With the refit
   :math:`\\hat\\theta`, its covariance :math:`V` and the delivered :math:`\\theta_0`,
   the Wald statistic :math:`W = d' V^{-1} d`, :math:`d = \\theta_0 - \\hat\\theta`, is
   referred to :math:`\\chi^2_q`.  With the data, the score (Lagrange-multiplier) test at
   :math:`\\theta_0`, :math:`S = U(\\theta_0)' I(\\theta_0)^{-1} U(\\theta_0)`, asks whether
   the delivered coefficients solve the objective on these data (Rao 1948).
2. *Do they solve a ridge-penalised objective?*  At a penalised optimum the gradient of
   the unpenalised loss satisfies :math:`g_\\beta + \\lambda \\beta = 0` and
   :math:`g_b = 0`; :func:`implied_l2` returns the least-squares :math:`\\lambda` and the
   relative residual that says whether any :math:`\\lambda` does.

References
----------
Rao, C. R. (1948). Large sample tests of statistical hypotheses concerning several
parameters with applications to problems of estimation. Proc. Cambridge Phil. Soc. 44.
Wald, A. (1943). Tests of statistical hypotheses concerning several parameters when the
number of observations is large. Trans. AMS 54, 426-482.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from ..support import distributions as dist
from ..support.errors import InputError
from ..support.text import p_text
from ..models.kinds import KINDS, kind_of
from ..models.lsq_score import SCORE_UNDEFINED
from ..support.validate import (
    INTERCEPT_NAME,
    as_float,
    as_matrix,
    as_weights,
    check_choice,
    power_of_two,
)

__all__ = ["CoefficientComparison", "compare_coefficients", "ImpliedPenalty", "implied_l2"]


@dataclass(frozen=True)
class CoefficientComparison:
    """Result of :func:`compare_coefficients`; parameter order = the refit's, intercept first."""

    terms: tuple[str, ...]
    delivered: np.ndarray
    refit: np.ndarray
    difference: np.ndarray
    difference_in_se: np.ndarray
    wald_statistic: float
    wald_degrees_of_freedom: int
    wald_p_value: float
    score_statistic: float | None
    score_p_value: float | None
    max_abs_prediction_difference: float | None
    mean_abs_prediction_difference: float | None
    #: per compared term, the largest difference the data cannot resolve: three times the
    #: expected change of the refit's coefficient under the rounding of its data, plus the
    #: refit's estimated solver error (its ``accuracy`` record); None when the refit has none
    data_resolution: np.ndarray | None = None
    #: the precision of the data that ``data_resolution`` assumes
    data_precision: str = ""

    @property
    def within_data(self) -> np.ndarray | None:
        """Per compared term: the difference is within what the data determine."""
        if self.data_resolution is None:
            return None
        return np.abs(self.difference) <= self.data_resolution

    @property
    def all_within_data(self) -> bool:
        """Every difference is within what the data determine (no disagreement the data could show)."""
        inside = self.within_data
        return inside is not None and bool(np.all(inside))

    def report(self) -> str:
        """A text table of the per-term differences and the two tests."""
        w = max(len(t) for t in self.terms + ("term",))
        lines = [
            "term".ljust(w) + "delivered".rjust(15) + "refit".rjust(15) + "difference".rjust(14) + "in SEs".rjust(9),
        ]
        lines.append("-" * len(lines[0]))
        inside = self.within_data
        for i, t in enumerate(self.terms):
            lines.append(
                t.ljust(w) + f"{self.delivered[i]:15.7g}{self.refit[i]:15.7g}{self.difference[i]:14.4g}"
                f"{self.difference_in_se[i]:z9.2f}" + ("  within what the data determine" if inside is not None
                                                        and inside[i] else "")
            )
        lines.append("")
        if inside is not None:
            lines.append(self._data_sentence(inside))
        lines.append(
            f"Wald test that the delivered coefficients equal the refit: chi-square {self.wald_statistic:.4g} "
            f"with {self.wald_degrees_of_freedom} degrees of freedom, p-value {p_text(self.wald_p_value)}"
        )
        if self.score_statistic is not None:
            lines.append(
                f"Score test that the delivered coefficients solve the objective on these data: "
                f"chi-square {self.score_statistic:.4g} with {self.wald_degrees_of_freedom} degrees of freedom, "
                f"p-value {p_text(self.score_p_value)}"
            )
        if self.max_abs_prediction_difference is not None:
            lines.append(
                f"Predictions: largest absolute difference {self.max_abs_prediction_difference:.4g}, "
                f"mean {self.mean_abs_prediction_difference:.4g}"
            )
        return "\n".join(lines)


    def _data_sentence(self, inside: np.ndarray) -> str:
        what = f"the change the rounding of the data ({self.data_precision}) causes, three expected sizes, " \
               "plus the refit's solver error"
        if inside.all():
            return (f"Every difference is within what the data determine ({what}): the data cannot tell the "
                    "delivered coefficients from the refit, which is not a disagreement")
        if not inside.any():
            return f"No difference is within what the data determine ({what})"
        names = ", ".join(t for t, i in zip(self.terms, inside) if i)
        return f"Within what the data determine ({what}): {names}"


def _numbers(value: Any, name: str, *, vector: bool = False) -> np.ndarray:
    """``value`` as a finite float array (the validator's conversion), or an InputError naming ``name``."""
    arr = as_float(value, name)
    if vector and arr.ndim == 0:
        raise InputError(f"{name} is a single number; pass a 1-D array with one entry per column of X")
    if not np.all(np.isfinite(arr)):
        raise InputError(f"{name} holds a non-finite value (NaN or inf); delivered values must be finite numbers")
    return arr


def _name_list(names: Any) -> list[str]:
    """``names`` as a list of text, or an InputError (a string, a mapping or a non-sequence)."""
    try:
        flat = np.ndim(names) == 1
    except ValueError:  # ragged
        flat = False
    if isinstance(names, (str, bytes, Mapping)) or not isinstance(names, (list, tuple, np.ndarray)) or not flat:
        raise InputError(
            f"names must be a list with one name per delivered coefficient; got a {type(names).__name__}"
        )
    return [str(n) for n in names]


def _align(fit: Any, coefficients: Any, intercept: Any, names: Any) -> tuple[np.ndarray, np.ndarray]:
    """Delivered (p,) or (p, K) slopes in the refit's order, and the delivered intercept."""
    shape = np.shape(fit.coefficients)
    if isinstance(coefficients, Mapping) or names is not None:
        if isinstance(coefficients, Mapping):
            given = {str(k): v for k, v in coefficients.items()}
        else:
            names = _name_list(names)
            arr = _numbers(coefficients, "coefficients", vector=True)
            if len(names) != arr.shape[0]:
                raise InputError(f"names has {len(names)} entries but coefficients has {arr.shape[0]} rows")
            given = {n: arr[i] for i, n in enumerate(names)}
        if INTERCEPT_NAME in given:
            if intercept is not None:
                raise InputError(f"the intercept is given twice: as '{INTERCEPT_NAME}' and as intercept=")
            intercept = given.pop(INTERCEPT_NAME)
        missing = [n for n in fit.names if n not in given]
        extra = [n for n in given if n not in fit.names]
        if missing or extra:
            raise InputError(
                "the delivered coefficient names do not match the refit: "
                + (f"missing {missing}" if missing else "")
                + ("; " if missing and extra else "")
                + (f"not in the refit {extra}" if extra else "")
                + "; rename or refit with the same columns"
            )
        values = [_numbers(given[n], f"coefficient '{n}'") for n in fit.names]
        row = shape[1:]
        for n, v in zip(fit.names, values):
            if v.shape != row:
                raise InputError(f"coefficient '{n}' has shape {v.shape}; the refit's coefficients have {row or 'one number'} "
                                 "per name")
        coef = np.array(values)
    else:
        coef = _numbers(coefficients, "coefficients")
    if coef.shape != shape:
        raise InputError(f"coefficients has shape {coef.shape} but the refit's is {shape}; pass one per refit coefficient ({', '.join(fit.names)})")
    if intercept is not None:
        intercept = _numbers(intercept, "intercept")
        if intercept.shape != np.shape(fit.intercept):
            raise InputError(f"intercept has shape {intercept.shape} but the refit's is {np.shape(fit.intercept)}")
        if not fit.with_intercept:
            raise InputError("an intercept was delivered but the refit has none; refit with intercept=True")
    return coef, intercept


def _free_vector(fit: Any, coef: np.ndarray, intercept: Any) -> tuple[np.ndarray, np.ndarray]:
    """Parameter vector in the order of ``fit.covariance`` and the index of the compared ones."""
    if KINDS[fit.kind].per_class:
        return fit._free_parameters(coef, intercept)
    with_b = fit.with_intercept
    b = float(fit.intercept) if intercept is None else float(intercept)
    theta = np.concatenate([[b] if with_b else [], np.ravel(coef)])
    idx = np.arange(theta.size)
    if with_b and intercept is None:
        idx = idx[1:]
    return theta, idx


def compare_coefficients(
    fit: Any,
    coefficients: Any,
    intercept: Any = None,
    *,
    X: Any = None,
    y: Any = None,
    weights: Any = None,
    names: Any = None,
) -> CoefficientComparison:
    """Compare delivered coefficients with a lintools refit.

    Parameters
    ----------
    fit : LinearFit, LogisticFit or SoftmaxFit
        The refit on the development data.
    coefficients : array-like or mapping
        Delivered slopes in the refit's column order, or a mapping name -> value (the
        key ``"(intercept)"`` may carry the intercept).  With ``names`` an array is
        matched by name.
    intercept : float or array-like, optional
        Delivered intercept; when omitted it is not compared.
    X : array-like, optional
        Rows on which to compare predictions (the mean response) and, with ``y``, to run
        the score test.
    y, weights : array-like, optional
        The development responses (and case weights) for the score test.

    Returns
    -------
    CoefficientComparison
    """
    if kind_of(fit) is None or not hasattr(fit, "covariance"):
        raise InputError(f"fit must be a lintools fit record (from least_squares, logistic or softmax); "
                         f"got {type(fit).__name__}")
    coef, b_deliv = _align(fit, coefficients, intercept, names)
    theta0, idx = _free_vector(fit, coef, b_deliv)
    theta_hat, _ = _free_vector(fit, np.asarray(fit.coefficients), None if b_deliv is None else fit.intercept)
    with np.errstate(over="ignore", invalid="ignore"):
        d = (theta0 - theta_hat)[idx]
    V = np.asarray(fit.covariance)[np.ix_(idx, idx)]
    if not (np.all(np.isfinite(d)) and np.all(np.isfinite(V))):
        raise InputError(
            "the delivered coefficients differ from the refit by more than the float64 range (or the "
            "refit's covariance is not finite); check their units and order"
        )
    se = np.sqrt(np.diag(V))
    try:
        L = np.linalg.cholesky(V)
    except np.linalg.LinAlgError:
        raise InputError("the refit's covariance is not positive definite; the Wald comparison is undefined") from None
    m = power_of_two(float(np.max(np.abs(d), initial=0.0)))  # exact: d / m is of order 1
    with np.errstate(over="ignore", invalid="ignore"):
        u = np.linalg.solve(L, d / m)
        wald = float(u @ u) * m * m
    if not math.isfinite(wald):
        raise InputError(
            "the delivered coefficients differ from the refit by so many standard errors that the Wald "
            "statistic exceeds the float64 range (about 1.8e308): they plainly disagree; check their "
            "units, their order and the columns they belong to"
        )
    q = int(idx.size)
    terms = fit._parameter_terms() if hasattr(fit, "_parameter_terms") else (
        ((INTERCEPT_NAME,) if fit.with_intercept else ()) + tuple(fit.names)
    )
    terms = tuple(np.array(terms, dtype=object)[idx])

    score = score_p = None
    max_d = mean_d = None
    if X is not None:
        Xa = fit._design(X)
        b_used = fit.intercept if b_deliv is None else b_deliv
        with np.errstate(over="ignore", invalid="ignore"):
            diff = np.abs(_mean(fit, Xa, coef, b_used) - fit.mean(Xa))
            max_d, mean_d = float(diff.max()), float(np.mean(diff / max(1.0, float(diff.max()))))
            mean_d *= max(1.0, max_d)
        if not (np.isfinite(max_d) and np.isfinite(mean_d)):
            raise InputError(
                "the predictions on X overflow (a value beyond the float64 range): X or the delivered "
                "coefficients are too large; check their units, or rescale the columns of X"
            )
        if y is not None:
            score = _score_statistic(fit, Xa, y, weights, coef, b_used, idx)
            score_p = float(dist.chi2_sf(score, q))
    elif y is not None:
        raise InputError("y was given without X; the score test needs both")
    with np.errstate(over="ignore"):  # a difference of 1e300 in 1e-10 standard errors is inf: so be it
        in_se = d / se
    resolution, precision = _resolution(fit, idx)
    return CoefficientComparison(
        terms=terms,
        delivered=theta0[idx],
        refit=theta_hat[idx],
        difference=d,
        difference_in_se=in_se,
        wald_statistic=wald,
        wald_degrees_of_freedom=q,
        wald_p_value=float(dist.chi2_sf(wald, q)),
        score_statistic=score,
        score_p_value=score_p,
        max_abs_prediction_difference=max_d,
        mean_abs_prediction_difference=mean_d,
        data_resolution=resolution,
        data_precision=precision,
    )


def _resolution(fit: Any, idx: np.ndarray) -> tuple[np.ndarray | None, str]:
    """Per compared parameter, the difference the data cannot resolve (None: the refit has no
    accuracy record, or one of another shape)."""
    acc = getattr(fit, "accuracy", None)
    if acc is None:
        return None, ""
    data, solver = np.ravel(acc.data_error), np.ravel(acc.solver_error)
    if data.shape[0] <= int(np.max(idx, initial=-1)):
        return None, ""
    return (3.0 * data + solver)[idx], acc.precision


def _mean(fit: Any, Xa: np.ndarray, coef: np.ndarray, b: Any) -> np.ndarray:
    return KINDS[fit.kind].mean_of(Xa @ coef + b)


def _score_statistic(fit, Xa, y, weights, coef, b, idx) -> float:
    """``U' I^{-1} U`` at the delivered coefficients (penalised objective when l2 > 0)."""
    free_intercept = fit.with_intercept and 0 not in idx
    with np.errstate(all="ignore"):  # an overflow shows as a non-finite score, refused below
        U, info = KINDS[fit.kind].score_and_information(fit, Xa, y, weights, coef, b, free_intercept)
        if not (np.all(np.isfinite(U)) and np.all(np.isfinite(info))):
            raise InputError(SCORE_UNDEFINED.format(
                why="the score or the information overflows (a value beyond the float64 range): X or the "
                    "delivered coefficients are too large, or the weights too extreme"))
        # efficient score for the compared parameters: the nuisance intercept, when not
        # delivered, sits at its constrained estimate (its score is zero there)
        scale = np.sqrt(np.diag(info))
        scale = np.where(scale > 0, scale, 1.0)
        try:
            Vs = np.linalg.inv(info / np.multiply.outer(scale, scale))
        except np.linalg.LinAlgError:
            Vs = None
        if Vs is None or not np.all(np.isfinite(Vs)) or np.linalg.cond(Vs) > 1.0 / np.finfo(float).eps:
            raise InputError(SCORE_UNDEFINED.format(
                why="the information matrix there is singular (a column of X is constant or collinear with "
                    "others on these rows, or the delivered coefficients put every fitted probability at 0 or 1)"))
        # the quadratic form over every entry but the nuisance intercepts (whose score is
        # 0): the compared ones and, in the symmetric softmax form, the last class's, which
        # are minus the sum of the others' and are not compared separately
        keep = np.arange(U.size)
        if free_intercept:
            keep = keep[keep % (len(fit.names) + 1) != 0]
        Uq = (U / scale)[keep]
        stat = float(Uq @ Vs[np.ix_(keep, keep)] @ Uq)
    if not np.isfinite(stat):
        raise InputError(SCORE_UNDEFINED.format(why="the statistic exceeds the float64 range"))
    return max(stat, 0.0)


@dataclass(frozen=True)
class ImpliedPenalty:
    """Result of :func:`implied_l2`.

    ``l2`` is the least-squares solution of ``g_beta + l2 * beta = 0``; ``residual`` is
    ``|g_beta + l2 beta| / |g_beta|`` (0 when the coefficients are exactly a ridge
    optimum for some l2; near 1 when no l2 explains them); ``intercept_gradient`` is the
    unpenalised intercept's gradient, which must also vanish.
    """

    l2: float
    residual: float
    intercept_gradient: float
    gradient_norm: float


def implied_l2(
    X: Any,
    y: Any,
    coefficients: Any,
    intercept: Any = None,
    *,
    model: str = "logistic",
    weights: Any = None,
) -> ImpliedPenalty:
    r"""The ridge strength that makes delivered coefficients a penalised optimum.

    At a minimum of ``loss(b, beta) + l2/2 |beta|^2`` the slopes satisfy
    :math:`\nabla_\beta \text{loss} + \lambda\beta = 0`.  Given :math:`\beta`, the
    least-squares :math:`\lambda = -g'\beta / \beta'\beta` is returned with the relative
    residual of that equation.  ``model`` is ``"least_squares"``, ``"logistic"`` or
    ``"softmax"``; the losses are this library's (half the weighted residual sum of
    squares, or the negative weighted log-likelihood).
    """
    check_choice(model, "model", tuple(KINDS))
    kind = KINDS[model]
    Xa, _ = as_matrix(X, "X")
    n = Xa.shape[0]
    w = as_weights(weights, n)
    beta = _numbers(coefficients, "coefficients", vector=True)
    if intercept is not None:
        intercept = _numbers(intercept, "intercept")
    if beta.shape[0] != Xa.shape[1]:
        raise InputError(f"coefficients has {beta.shape[0]} rows but X has {Xa.shape[1]} columns")
    if beta.ndim != (2 if kind.per_class else 1):
        want = "(columns, classes): one column per class" if kind.per_class else "1-D: one per column of X"
        raise InputError(f"coefficients has shape {beta.shape}; a {model} model needs {want}")
    if intercept is not None and intercept.shape != beta.shape[1:]:
        want = f"({beta.shape[1]},): one per class" if kind.per_class else "a single number"
        raise InputError(f"intercept has shape {intercept.shape}; a {model} model needs {want}")
    if not np.any(beta):
        raise InputError("coefficients are all zero; no l2 is identified by them")
    with np.errstate(all="ignore"):  # an overflow shows as a non-finite gradient, refused below
        g, g0 = kind.gradient(Xa, y, w, beta, intercept)
        gb, bb = np.ravel(g), np.ravel(beta)
        if not (np.all(np.isfinite(gb)) and np.all(np.isfinite(g0))):
            raise InputError(
                "the gradient at the delivered coefficients overflows (a value beyond the float64 range): "
                "X, y, the weights or the coefficients are too large; rescale the columns of X or check "
                "the units of the coefficients"
            )
        # l2 = -g'b / b'b on b and g divided by powers of two (exact): no overflow, no underflow to 0
        mb, mg = power_of_two(float(np.max(np.abs(bb)))), power_of_two(float(np.max(np.abs(gb), initial=0.0)))
        bs, gs = bb / mb, gb / mg
        lam = -float(gs @ bs) / float(bs @ bs) * (mg / mb)
        gnorm = float(np.linalg.norm(gs)) * mg
        resid = float(np.linalg.norm(gs + lam * (mb / mg) * bs)) / float(np.linalg.norm(gs)) if gnorm > 0 else 0.0
    if not (math.isfinite(lam) and math.isfinite(gnorm) and math.isfinite(resid)):
        raise InputError(
            "the implied l2 exceeds the float64 range: the delivered coefficients are too small for the "
            "gradient at them (no ridge strength that a float can hold makes them an optimum); check "
            "their units"
        )
    return ImpliedPenalty(l2=lam, residual=resid, intercept_gradient=float(np.max(np.abs(g0))), gradient_norm=gnorm)
