"""Frozen result records shared by the fits, and the text report.

A fit returns a frozen dataclass that holds read-only NumPy arrays (never views of the
caller's data): ``fit.coefficients[0] = 1`` raises.  Methods that hand out arrays for the
caller to keep (``linear_predictor``, ``mean``, ``labels``) return new, writable ones.  The records know how to evaluate the fitted model on new rows
(``linear_predictor``, ``mean``, ``labels``), how to build the coefficient table
(estimate, standard error, statistic, two-sided p-value, interval) and how to render it
as text (``report``).  ``to_dict`` gives a JSON-ready dictionary; :mod:`lintools.exchange.model_files`
writes and reads model files from it.
"""

from __future__ import annotations

import dataclasses
import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np

from .accuracy import Accuracy
from ..support import distributions as dist
from ..support.categories import CategoricalField
from ..support.errors import InputError
from ..support.text import UNDEFINED, intercept_label, p_text, section, title
from ..support.validate import INTERCEPT_NAME, ReadOnlyArrays, as_matrix, scored

__all__ = ["Accuracy", "CategoricalField", "Convergence", "CoefficientTable", "LinearFit", "with_accuracy"]


@dataclass(frozen=True)
class Convergence:
    """How a fit ended.

    Attributes
    ----------
    converged : bool
        True only when the stopping rule was met.
    iterations : int
        Iterations (for direct solvers: 1 plus refinement steps).
    gradient_norm : float
        Max-abs gradient of the objective at the returned answer.  For the iterative
        (likelihood) fits it is taken per unit of total case weight and with respect to
        the intercept and the coefficients of the standardised, centred columns
        ``(x_j - c_j) / s_j`` (weighted mean and standard deviation): the quantity the
        stopping rule compares with ``tol``, unchanged when the weights or a column are
        multiplied by a constant or a constant is added to a column.
    objective : float
        Value of the minimised objective at the answer.
    solver : str
        Solver that produced the answer.
    message : str
        Plain-language account of how the fit ended.
    """

    converged: bool
    iterations: int
    gradient_norm: float
    objective: float
    solver: str
    message: str


@dataclass(frozen=True)
class CoefficientTable(ReadOnlyArrays):
    """Per-parameter inference: one entry per term (intercept first when fitted).

    ``statistic = estimate / standard_error``; ``p_value`` is two-sided against the
    reference distribution named by ``distribution`` (``"normal"`` or ``"t(df)"``);
    ``lower`` and ``upper`` bound the Wald interval at ``level``.  Where the standard error
    is zero (an exact fit, or a parameter fixed rather than estimated) or NaN (a coefficient
    that is not identified) the statistic and the p-value are not defined: NaN.
    """

    terms: tuple[str, ...]
    estimate: np.ndarray
    standard_error: np.ndarray
    statistic: np.ndarray
    p_value: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    level: float
    distribution: str




def _num(value: float) -> str:
    """A number in at most 14 characters (``%.7g``), ``nan``, ``inf`` or ``-inf``."""
    if value is None or not np.isfinite(value):
        return "nan" if value is None or np.isnan(value) else ("inf" if value > 0 else "-inf")
    return f"{value:.7g}"


def _fmt(value: float, width: int = 13) -> str:
    """:func:`_num`, right-aligned in ``width`` columns and never touching its left neighbour."""
    text = _num(value)
    return text.rjust(max(width, len(text) + 1))


def _stat_text(value: float) -> str:
    if np.isnan(value):
        return UNDEFINED
    if not np.isfinite(value):
        return "inf" if value > 0 else "-inf"
    return f"{value:.3f}" if abs(value) < 1e5 else f"{value:.3e}"


def _wald_table(
    terms: tuple[str, ...],
    estimate: np.ndarray,
    se: np.ndarray,
    level: float,
    df: float | None,
) -> CoefficientTable:
    if isinstance(level, (bool, np.bool_)) or not isinstance(level, numbers.Real) or not 0.0 < float(level) < 1.0:
        raise InputError(f"level must lie strictly between 0 and 1; got {level!r:.60}")
    level = float(level)
    estimate = np.asarray(estimate, dtype=float)
    se = np.asarray(se, dtype=float)
    # a statistic needs a positive standard error: zero (exact fit, fixed parameter) and
    # NaN (not identified) leave it undefined
    defined = (se > 0) & np.isfinite(estimate)
    stat = np.full(estimate.shape, np.nan)
    with np.errstate(over="ignore"):
        stat[defined] = estimate[defined] / se[defined]
    tail = 0.5 + level / 2.0
    p = np.full(estimate.shape, np.nan)
    if df is None:
        p[defined] = 2.0 * dist.normal_sf(np.abs(stat[defined]))
        q = float(dist.normal_quantile(tail))
        name = "normal"
    else:
        p[defined] = 2.0 * dist.t_sf(np.abs(stat[defined]), df)
        q = float(dist.t_quantile(tail, df))
        name = f"t({df:g})"
    p = np.minimum(p, 1.0)
    with np.errstate(over="ignore", invalid="ignore"):  # an end beyond float64 is +-inf
        lower, upper = estimate - q * se, estimate + q * se
    return CoefficientTable(
        terms=terms,
        estimate=estimate,
        standard_error=se,
        statistic=stat,
        p_value=p,
        lower=lower,
        upper=upper,
        level=level,
        distribution=name,
    )


def _shown_terms(terms: tuple[str, ...]) -> tuple[str, ...]:
    """The terms as a report prints them: the intercept's stored name becomes its printed
    label (:func:`lintools.support.text.intercept_label`, never a column's name)."""
    label = intercept_label(t for t in terms if t != INTERCEPT_NAME)
    return tuple(label if t == INTERCEPT_NAME else t for t in terms)


def render_table(table: CoefficientTable, stat_label: str) -> str:
    """Render a :class:`CoefficientTable` as fixed-width text.

    Every column is at least as wide as before and one character wider than its widest
    entry, so neighbours never touch whatever the magnitude.  Figures that are not defined
    print as ``-`` (t and p where the standard error is zero or NaN; the standard error and
    interval where it is NaN, a coefficient that is not identified), with a note below."""
    pct = f"{100 * table.level:g}%"
    heads = ("estimate", "standard error", stat_label, "two-sided p", f"{pct} from", f"{pct} to")
    widths = [13, 15, 10, 12, 13, 13]
    terms = _shown_terms(table.terms)
    rows, zero_se, loose = [], False, False
    for i in range(len(table.terms)):
        se = table.standard_error[i]
        free = not np.isnan(se)
        zero_se = zero_se or se == 0
        loose = loose or not free
        cells = [
            _num(table.estimate[i]),
            _num(se) if free else UNDEFINED,
            _stat_text(table.statistic[i]),
            p_text(table.p_value[i]) if not np.isnan(table.statistic[i]) else UNDEFINED,
            _num(table.lower[i]) if free else UNDEFINED,
            _num(table.upper[i]) if free else UNDEFINED,
        ]
        rows.append(cells)
    for j in range(len(heads)):
        widths[j] = max([widths[j], len(heads[j]) + 1] + [len(r[j]) + 1 for r in rows])
    width = max([len(t) for t in terms] + [4])
    head = "term".ljust(width) + "".join(h.rjust(wd) for h, wd in zip(heads, widths))
    lines = [head, "-" * len(head)]
    for term, cells in zip(terms, rows):
        lines.append(term.ljust(width) + "".join(c.rjust(wd) for c, wd in zip(cells, widths)))
    notes = ([f"no {stat_label} or p where the standard error is zero"] if zero_se else []) + (
        [f"no standard error, interval, {stat_label} or p for a coefficient that is not identified"] if loose else [])
    if notes:
        lines.append(f"{UNDEFINED} not defined: " + "; ".join(notes))
    return "\n".join(lines)


def _to_jsonable(value: Any) -> Any:
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, (np.floating, np.integer, np.bool_)):
        return value.item()
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: _to_jsonable(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, tuple):
        return [_to_jsonable(v) for v in value]
    return value


def with_accuracy(record: Any, accuracy: Accuracy) -> Any:
    """The record with its :class:`Accuracy` (a new record; the arrays are shared)."""
    return dataclasses.replace(record, accuracy=accuracy)


@dataclass(frozen=True)
class _FitBase(ReadOnlyArrays):
    """Fields and methods shared by every fit record (its arrays are read-only).

    ``categorical_fields`` names the text columns behind indicator columns ``column=level``
    among ``names``, with their levels (see :class:`lintools.support.categories.CategoricalField`);
    empty unless set (``lintools fit`` sets it from the table, :func:`lintools.save` and
    :func:`lintools.write_pmml` from ``reference_levels=``).  The methods take the
    indicator columns themselves.
    """

    coefficients: np.ndarray
    intercept: Any
    standard_errors: np.ndarray
    intercept_standard_error: Any
    covariance: np.ndarray
    log_likelihood: float
    deviance: float
    aic: float
    bic: float
    n_observations: float
    names: tuple[str, ...]
    convergence: Convergence
    with_intercept: bool
    l2: float
    categorical_fields: tuple[CategoricalField, ...] = ()
    #: digits of the coefficients to trust (:mod:`lintools.models.accuracy`); None for a
    #: record read from a file written before it existed
    accuracy: Accuracy | None = None

    kind = "fit"

    # ----- evaluation on new rows -------------------------------------------------
    def _design(self, X: Any) -> np.ndarray:
        arr, _ = as_matrix(X, "X")
        p = self.coefficients.shape[0]
        if arr.shape[1] != p:
            raise InputError(
                f"X has {arr.shape[1]} columns but the model has {p} coefficients "
                f"({', '.join(self.names)}); pass the same columns in the same order"
            )
        return arr

    def linear_predictor(self, X: Any) -> np.ndarray:
        """Return ``intercept + X @ coefficients`` for new rows ``X``."""
        return scored(self._design(X), self.coefficients, self.intercept)

    def to_dict(self) -> dict[str, Any]:
        """Return the record as a dictionary of plain Python values (lists for arrays)."""
        out = {f.name: _to_jsonable(getattr(self, f.name)) for f in dataclasses.fields(self)}
        out["kind"] = self.kind
        return out

    # ----- the text report (layout: lintools.support.text) ----------------------------
    def _likelihood_rows(self, digits: int) -> list[tuple[str, str]]:
        return [("log-likelihood", f"{self.log_likelihood:.{digits}g}"),
                ("Akaike information criterion", f"{self.aic:.{digits}g}"),
                ("Bayesian information criterion", f"{self.bic:.{digits}g}")]

    def _closing(self, table: CoefficientTable, stat_label: str, blocks: list[str] | None = None) -> list[str]:
        """The Coefficients section (one table, or ``blocks``) and the Convergence line."""
        body = blocks if blocks is not None else [render_table(table, stat_label)]
        end = [f"Convergence: {self.convergence.message}"]
        if self.accuracy is not None:
            end.insert(0, self.accuracy.report())
        return ["", "Coefficients", "\n\n".join(body), "", *end]

    # ----- inference ----------------------------------------------------------------
    def _reference_df(self) -> float | None:
        return None

    def coefficient_table(self, level: float = 0.95) -> CoefficientTable:
        """Return estimates, standard errors, Wald statistics, p-values and intervals.

        The intercept comes first when it was fitted.  Intervals are Wald intervals
        ``estimate +- q * standard_error`` with ``q`` the ``(1 + level) / 2`` quantile of
        the reference distribution (Student t with the residual degrees of freedom for
        least squares, the standard normal otherwise).
        """
        terms = list(self.names)
        est = list(np.ravel(self.coefficients))
        se = list(np.ravel(self.standard_errors))
        if self.with_intercept:
            terms.insert(0, INTERCEPT_NAME)
            est.insert(0, float(self.intercept))
            se.insert(0, float(self.intercept_standard_error))
        return _wald_table(tuple(terms), np.array(est), np.array(se), level, self._reference_df())


@dataclass(frozen=True)
class LinearFit(_FitBase):
    """Result of :func:`lintools.least_squares`.

    Besides the shared fields it holds the residual standard error, R-squared (centred
    when an intercept is fitted, uncentred otherwise), the adjusted R-squared, the
    overall F statistic (a Wald F with the chosen covariance; for ``"classical"`` this is
    the usual ANOVA F) and its p-value, the residual degrees of freedom, the numerical
    rank, the covariance type, and, when asked for, leverage and Cook's distance.
    """

    residual_standard_error: float = float("nan")
    r_squared: float = float("nan")
    adjusted_r_squared: float = float("nan")
    f_statistic: float = float("nan")
    f_p_value: float = float("nan")
    f_degrees_of_freedom: tuple[float, float] = (float("nan"), float("nan"))
    degrees_of_freedom: float = float("nan")
    #: numerical rank of the design including the intercept column
    rank: int = 0
    covariance_type: str = "classical"
    weight_type: str = "case"
    condition_number: float = float("nan")
    aliased: tuple[str, ...] = ()
    leverage: np.ndarray | None = None
    cooks_distance: np.ndarray | None = None
    target: str = "y"

    kind = "least_squares"

    def _reference_df(self) -> float | None:
        return float(self.degrees_of_freedom)

    def mean(self, X: Any) -> np.ndarray:
        """Expected response for new rows: the linear predictor."""
        return self.linear_predictor(X)

    def _f_text(self) -> str:
        fdf = self.f_degrees_of_freedom
        if np.isfinite(self.f_statistic):
            return (f"{self.f_statistic:.6g} with {fdf[0]:g} and {fdf[1]:g} degrees of freedom, "
                    f"p-value {p_text(self.f_p_value)}")
        return "not defined" + (" (zero residuals: an exact fit)" if self.deviance == 0 else "")

    def report(self, level: float = 0.95) -> str:
        """Return a plain-text report: title, Data, Estimation, Fit, Tests, Coefficients, Convergence."""
        table = self.coefficient_table(level)
        data = [("observations", f"{self.n_observations:g} ({self.weight_type} weights)"),
                ("parameters", f"{len(table.terms)}"), ("rank of the design", f"{self.rank}"),
                ("residual degrees of freedom", f"{self.degrees_of_freedom:g}")]
        if self.aliased:
            data.append(("aliased columns", f"{', '.join(self.aliased)} (minimum-norm solution)"))
        estimation = [("covariance", self.covariance_type), ("ridge penalty l2", f"{self.l2:g}"),
                      ("scaled condition number", f"{self.condition_number:.3g}")]
        fit = [("residual standard error", f"{self.residual_standard_error:.7g}"),
               ("coefficient of determination", f"{self.r_squared:.6f}"),
               ("the same, adjusted for parameters", f"{self.adjusted_r_squared:.6f}")] + self._likelihood_rows(8)
        tested = "every slope zero" if self.with_intercept else "every coefficient zero"
        lines = (title(f"lintools least squares model of '{self.target}'") + section("Data", data)
                 + section("Estimation", estimation) + section("Fit", fit)
                 + section("Tests", [(f"F test, {tested}", self._f_text())])
                 + self._closing(table, "t"))
        return "\n".join(lines) + "\n"


@dataclass(frozen=True)
class LogisticFit(_FitBase):
    """Result of :func:`lintools.logistic` (binary or grouped binomial, logit link).

    Besides the shared fields: ``classes`` (the two sorted labels; ``(0, 1)`` for grouped
    data, where 1 means a success), ``positive_class`` (the label whose probability the
    model gives), the ``null_deviance`` of the intercept-only model (offset and weights
    kept; without an intercept the null model is ``eta = offset``), the likelihood-ratio
    test against it (``lr_statistic``, ``lr_p_value``, ``lr_degrees_of_freedom``; NaN
    under an l2 penalty, penalised-likelihood ratio for Firth fits), ``firth``,
    ``penalised_log_likelihood`` (the maximised objective with its sign flipped), and
    ``profile_intervals`` ((k, 2), intercept first; None unless requested) at
    ``profile_level``: an end the profile does not reach (within 1e8 times the standard
    error) is infinite, and an end that was not found (a fit with the coefficient held
    fixed did not converge) is NaN, with a :class:`LintoolsWarning` naming the term.
    ``n_observations`` is ``sum(w * m)``: the number of Bernoulli trials the rows stand for.
    """

    classes: tuple = ()
    positive_class: Any = None
    null_deviance: float = float("nan")
    lr_statistic: float = float("nan")
    lr_p_value: float = float("nan")
    lr_degrees_of_freedom: int = 0
    firth: bool = False
    penalised_log_likelihood: float = float("nan")
    profile_intervals: np.ndarray | None = None
    profile_level: float = float("nan")
    grouped: bool = False
    has_offset: bool = False
    target: str = "y"

    kind = "logistic"

    def linear_predictor(self, X: Any, offset: Any = None) -> np.ndarray:
        """``intercept + X @ coefficients (+ offset)`` for new rows ``X``."""
        arr = self._design(X)
        if offset is not None:
            from ..support.validate import as_offset

            offset = as_offset(offset, arr.shape[0])
        return scored(arr, self.coefficients, self.intercept, offset)

    def _mean_from(self, eta: np.ndarray) -> np.ndarray:
        from ..support.logistic_function import sigmoid

        return sigmoid(eta)

    def mean(self, X: Any, offset: Any = None) -> np.ndarray:
        """Probability of ``positive_class`` for new rows (overflow-safe logistic function)."""
        return self._mean_from(self.linear_predictor(X, offset))

    def labels(self, X: Any, offset: Any = None) -> np.ndarray:
        """Predicted labels (the original label values): the positive class where its probability > 1/2."""
        eta = self.linear_predictor(X, offset)
        pos = self.classes.index(self.positive_class)
        return np.asarray(self.classes)[np.where(eta > 0, pos, 1 - pos)]

    def report(self, level: float = 0.95) -> str:
        """Return a plain-text report: title, Data, Estimation, Fit, Tests, Coefficients
        (and profile intervals when computed), Convergence."""
        table = self.coefficient_table(level)
        data = [("observations", f"{self.n_observations:g}"), ("parameters", f"{len(table.terms)}"),
                ("classes", ", ".join(str(c) for c in self.classes)),
                ("modelled probability", f"of {self.positive_class!s}")]
        if self.grouped:
            data.append(("response", "successes out of trials"))
        if self.has_offset:
            data.append(("offset", "used"))
        method = "Firth bias-reduced (penalised) likelihood" if self.firth else "maximum likelihood"
        estimation = [("method", method)] + ([("ridge penalty l2", f"{self.l2:g}")] if self.l2 else [])
        fit = self._likelihood_rows(10)
        if self.firth or self.l2:
            fit.insert(1, ("penalised log-likelihood", f"{self.penalised_log_likelihood:.10g}"))
        fit[-2:-2] = [("deviance", f"{self.deviance:.10g}"),
                      ("deviance of the intercept-only model", f"{self.null_deviance:.10g}")]
        lines = (title(f"lintools logistic model of '{self.target}'") + section("Data", data)
                 + section("Estimation", estimation) + section("Fit", fit)
                 + _likelihood_ratio_section(self, "penalised likelihood ratio" if self.firth else "likelihood ratio"))
        closing = self._closing(table, "z")
        if self.profile_intervals is not None:
            pct = f"{100 * self.profile_level:g}%"
            terms = _shown_terms(table.terms)
            width = max(len(t) for t in terms)
            prof = [f"Profile-{'penalised-' if self.firth else ''}likelihood {pct} intervals",
                    "term".ljust(width) + "from".rjust(15) + "to".rjust(15)]
            for term, (lo, hi) in zip(terms, self.profile_intervals):
                prof.append(term.ljust(width) + _fmt(lo, 15) + _fmt(hi, 15))
            closing[3:3] = ["", *prof]  # after the coefficient table
        return "\n".join(lines + closing) + "\n"


def _likelihood_ratio_section(fit: Any, what: str) -> list[str]:
    """The Tests section of a likelihood fit: the ratio test against the intercept-only model
    (none under an l2 penalty, where the statistic is NaN)."""
    if not np.isfinite(fit.lr_statistic):
        why = "not computed under an l2 penalty" if fit.l2 else "not defined"
        return section("Tests", [(f"{what}, against the intercept-only model", why)])
    return section("Tests", [(f"{what}, against the intercept-only model",
                              f"{fit.lr_statistic:.6g} with {fit.lr_degrees_of_freedom} degrees of freedom, "
                              f"p-value {p_text(fit.lr_p_value)}")])
