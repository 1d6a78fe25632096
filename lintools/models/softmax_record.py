"""The record of a softmax (multinomial logistic) fit; re-exported by :mod:`lintools.models.records`."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..support.errors import InputError
from ..support.text import section, title
from .records import INTERCEPT_NAME, CoefficientTable, _FitBase, _likelihood_ratio_section, _wald_table, render_table
from ..support.validate import scored

__all__ = ["SoftmaxFit"]


@dataclass(frozen=True)
class SoftmaxFit(_FitBase):
    """Result of :func:`lintools.softmax`.

    ``coefficients`` is (p, K) and ``intercept`` (K,), one column per class in the order
    of ``classes`` (sorted labels).  With a reference class its column is pinned at zero
    and its standard errors are 0 (fixed, not estimated).  In the symmetric form
    (``reference_class`` None) the intercepts are reported with mean zero: the
    probabilities do not change when the same number is added to every intercept, so only
    their differences are determined by the data.

    ``covariance`` is the inverse (penalised) information of the **free parameters** in
    this order: for each estimated class in ``classes`` order (the reference class
    skipped), its intercept (when fitted) and then its ``p`` slopes.  ``parameter_terms()``
    names the rows.  In the symmetric form every term's class values sum to zero, and the
    matrix is the inverse penalised information within that subspace: it is singular along
    each term's shared shift over the classes (those directions are not estimated).

    ``null_deviance`` belongs to the intercept-only model (offset and weights kept); the
    likelihood-ratio test against it (``lr_statistic`` on ``lr_degrees_of_freedom`` =
    ``p (K - 1)``) is NaN under an l2 penalty.
    """

    classes: tuple = ()
    reference_class: Any = None
    null_deviance: float = float("nan")
    lr_statistic: float = float("nan")
    lr_p_value: float = float("nan")
    lr_degrees_of_freedom: int = 0
    has_offset: bool = False
    target: str = "y"

    kind = "softmax"

    # ----- layout of the free parameters --------------------------------------------------
    def _free_columns(self) -> list[int]:
        K = len(self.classes)
        if self.reference_class is None:
            return list(range(K))
        ref = self.classes.index(self.reference_class)
        return [k for k in range(K) if k != ref]

    def parameter_terms(self) -> tuple[str, ...]:
        """Names of the rows of ``covariance``: ``"<class>:<term>"``."""
        terms = ((INTERCEPT_NAME,) if self.with_intercept else ()) + tuple(self.names)
        return tuple(f"{self.classes[k]}:{t}" for k in self._free_columns() for t in terms)

    _parameter_terms = parameter_terms

    def _stack(self, B: np.ndarray, b: np.ndarray) -> np.ndarray:
        cols = self._free_columns()
        A = np.vstack([b[None, :], B]) if self.with_intercept else B
        return np.ravel(A[:, cols], order="F")

    def _free_parameters(self, coef: Any, intercept: Any) -> tuple[np.ndarray, np.ndarray]:
        """Delivered (p, K) slopes and (K,) intercepts as a vector in ``covariance`` order,
        re-expressed in this fit's parametrisation (reference column subtracted, or each
        term's class values centred in the symmetric form: the same probabilities), and the
        indices that are compared (the intercepts only when delivered; in the symmetric form
        every class but the last, whose values are minus the sum of the others')."""
        B = np.asarray(coef, dtype=float)
        K = len(self.classes)
        p = len(self.names)
        if B.shape != (p, K):
            raise InputError(f"coefficients has shape {B.shape} but the refit's is {(p, K)}: one column per class "
                             f"({', '.join(map(str, self.classes))})")
        b = np.asarray(self.intercept if intercept is None else intercept, dtype=float).reshape(-1)
        if self.reference_class is not None:
            ref = self.classes.index(self.reference_class)
            B, b = B - B[:, [ref]], b - b[ref]
        else:
            B, b = B - B.mean(axis=1, keepdims=True), b - b.mean()
        theta = self._stack(B, b)
        per = p + int(self.with_intercept)
        idx = np.arange(theta.size)
        if self.with_intercept and intercept is None:
            idx = idx[np.arange(theta.size) % per != 0]
        if self.reference_class is None:
            # centred terms: the last class is minus the sum of the others (the covariance is
            # singular along each term's shared shift), so it is left out of the comparison
            idx = idx[idx < (K - 1) * per]
        return theta, idx

    # ----- evaluation on new rows ---------------------------------------------------------
    def linear_predictor(self, X: Any, offset: Any = None) -> np.ndarray:
        """``intercept + X @ coefficients (+ offset)``, (n, K)."""
        arr = self._design(X)
        if offset is not None:
            from ..support.validate import as_offset

            offset = as_offset(offset, arr.shape[0], len(self.classes))
        return scored(arr, self.coefficients, self.intercept, offset)

    def _mean_from(self, E: np.ndarray) -> np.ndarray:
        from ..engine.multinomial import softmax_parts

        return softmax_parts(np.asarray(E, dtype=float))[0]

    def mean(self, X: Any, offset: Any = None) -> np.ndarray:
        """Class probabilities for new rows, (n, K), columns in ``classes`` order."""
        return self._mean_from(self.linear_predictor(X, offset))

    def labels(self, X: Any, offset: Any = None) -> np.ndarray:
        """The most probable class of each row (original label values)."""
        E = self.linear_predictor(X, offset)
        return np.asarray(self.classes)[np.argmax(E, axis=1)]

    # ----- inference ------------------------------------------------------------------------
    def coefficient_table(self, level: float = 0.95) -> CoefficientTable:
        """Estimates, standard errors, Wald z, p-values and intervals of the free parameters,
        in ``covariance`` order (terms named ``"<class>:<term>"``)."""
        est = self._stack(np.asarray(self.coefficients), np.asarray(self.intercept, dtype=float).reshape(-1))
        se = self._stack(np.asarray(self.standard_errors),
                         np.asarray(self.intercept_standard_error if self.with_intercept else np.zeros(len(self.classes)),
                                    dtype=float).reshape(-1))
        return _wald_table(self.parameter_terms(), est, se, level, None)

    def report(self, level: float = 0.95) -> str:
        """Plain-text report: title, Data, Estimation, Fit, Tests, Coefficients (one table
        per estimated class), Convergence."""
        table = self.coefficient_table(level)
        ref = (f"{self.reference_class!s} (its coefficients are 0)" if self.reference_class is not None
               else "none: symmetric form, every class has coefficients, each term centred over the classes")
        per = len(self.names) + int(self.with_intercept)
        shown = f"{len(table.terms)}" if self.reference_class is not None else \
            f"{len(table.terms)} ({per * (len(self.classes) - 1)} free: each term's class values sum to zero)"
        data = [("observations", f"{self.n_observations:g}"), ("parameters", shown),
                ("classes", f"{len(self.classes)}: {', '.join(str(c) for c in self.classes)}"),
                ("reference class", ref)] + ([("offset", "used")] if self.has_offset else [])
        estimation = [("method", "maximum likelihood")] + ([("ridge penalty l2", f"{self.l2:g}")] if self.l2 else [])
        fit = self._likelihood_rows(10)
        fit[-2:-2] = [("deviance", f"{self.deviance:.10g}"),
                      ("deviance of the intercept-only model", f"{self.null_deviance:.10g}")]
        blocks = []
        for j, k in enumerate(self._free_columns()):
            sl = slice(j * per, (j + 1) * per)
            sub = CoefficientTable(
                terms=((INTERCEPT_NAME,) if self.with_intercept else ()) + tuple(self.names),
                estimate=table.estimate[sl], standard_error=table.standard_error[sl], statistic=table.statistic[sl],
                p_value=table.p_value[sl], lower=table.lower[sl], upper=table.upper[sl], level=table.level,
                distribution=table.distribution)
            versus = f" versus {self.reference_class!s}" if self.reference_class is not None else ""
            blocks.append(f"class {self.classes[k]!s}{versus}\n" + render_table(sub, "z"))
        lines = (title(f"lintools softmax model of '{self.target}'") + section("Data", data)
                 + section("Estimation", estimation) + section("Fit", fit)
                 + _likelihood_ratio_section(self, "likelihood ratio") + self._closing(table, "z", blocks))
        return "\n".join(lines) + "\n"
