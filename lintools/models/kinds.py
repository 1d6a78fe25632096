"""The registry of model kinds: what the exchange formats and the command line need to
know about each kind of fitted model, in one place.

A fit record's ``kind`` (and a model file's ``"kind"``) names an entry of :data:`KINDS`;
the PMML writer and reader, the cross-check, the model-file checks and the command line
look the entry up instead of naming kinds themselves, so a new model family is one entry
here plus its own module (front, record, score).

Each entry says:

* ``record``: the fit record type; ``fit``: the function that fits it;
* ``score_and_information``: ``(fit, X, y, weights, coef, b, free_intercept) -> (U, I)``,
  the score and information at given coefficients, in the order of ``fit.covariance``
  (the score test of :func:`lintools.compare_coefficients`);
* ``gradient``: ``(X, y, w, beta, intercept) -> (g_beta, g_b)``, the unpenalised loss's
  gradient (:func:`lintools.implied_l2`);
* ``mean_of``: the mean from the linear predictor (identity, logistic function, softmax);
* ``function_name`` and ``normalisation``: the PMML ``RegressionModel`` attributes
  (Data Mining Group, PMML 4.4 - Regression: functionName "regression" or
  "classification"; normalizationMethod "none", "logit" or "softmax");
* ``classes``: 0 for a response, 2 for exactly two classes, None for two or more;
  ``per_class``: one column of coefficients per class (the number of outputs is then the
  number of classes, else 1);
* ``words`` (in sentences), ``command`` (the ``--model`` value of ``lintools fit``),
  ``options`` (the command-line options, by argparse dest, that apply to it) and
  ``predicts`` (what its mean is, in words).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from ..engine.losses import sigmoid, unpenalised_gradient
from ..engine.multinomial import softmax_parts
from . import lsq_score
from .least_squares import least_squares
from .logistic import logistic
from .logistic import score_and_information as binary_score
from .records import LinearFit, LogisticFit
from .softmax import score_and_information as multinomial_score
from .softmax import softmax
from .softmax_record import SoftmaxFit

__all__ = ["KINDS", "ModelKind", "kind_of"]

#: The command-line options (argparse dests) of the iterative likelihood fits.
SOLVER_OPTIONS = ("solver", "tol", "max_iter")


@dataclass(frozen=True)
class ModelKind:
    """One kind of fitted model (see the module docstring for the fields)."""

    name: str
    words: str
    command: str
    record: type
    fit: Callable[..., Any]
    score_and_information: Callable[..., tuple[np.ndarray, np.ndarray]]
    gradient: Callable[..., tuple[np.ndarray, Any]]
    mean_of: Callable[[np.ndarray], np.ndarray]
    function_name: str
    normalisation: str
    classes: int | None
    per_class: bool
    options: tuple[str, ...]
    predicts: str

    @property
    def classifier(self) -> bool:
        """Whether the model gives class probabilities (its target is a label)."""
        return self.classes != 0

    def outputs(self, n_classes: int) -> int:
        """The number of linear predictors (columns of coefficients) for ``n_classes`` classes."""
        return n_classes if self.per_class else 1


def _identity(eta: np.ndarray) -> np.ndarray:
    return eta


def _softmax_mean(eta: np.ndarray) -> np.ndarray:
    return softmax_parts(np.asarray(eta, dtype=float))[0]


#: Every kind of fitted model, by the name its records and model files carry.
KINDS: dict[str, ModelKind] = {k.name: k for k in (
    ModelKind(
        name="least_squares", words="least-squares", command="linear", record=LinearFit, fit=least_squares,
        score_and_information=lsq_score.score_and_information, gradient=lsq_score.gradient, mean_of=_identity,
        function_name="regression", normalisation="none", classes=0, per_class=False,
        options=("covariance", "minimum_norm", "weight_type"), predicts="response",
    ),
    ModelKind(
        name="logistic", words="logistic", command="logistic", record=LogisticFit, fit=logistic,
        score_and_information=binary_score, gradient=functools.partial(unpenalised_gradient, "logistic"),
        mean_of=sigmoid, function_name="classification", normalisation="logit", classes=2, per_class=False,
        options=SOLVER_OPTIONS + ("firth", "positive"), predicts="probability",
    ),
    ModelKind(
        name="softmax", words="softmax", command="softmax", record=SoftmaxFit, fit=softmax,
        score_and_information=multinomial_score, gradient=functools.partial(unpenalised_gradient, "softmax"),
        mean_of=_softmax_mean, function_name="classification", normalisation="softmax", classes=None,
        per_class=True, options=SOLVER_OPTIONS + ("reference", "symmetric"), predicts="probability",
    ),
)}


def kind_of(model: Any) -> ModelKind | None:
    """The registry entry of ``model`` (a fit record or a delivered model, by its
    ``kind``); None when it is not a fitted model of a known kind."""
    kind = getattr(model, "kind", None)
    return KINDS.get(kind) if isinstance(kind, str) else None
