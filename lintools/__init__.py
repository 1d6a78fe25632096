"""lintools: linear and logistic models you can audit, with NumPy only.

Public names only; see the README and each function's docstring.
"""

from ._errors import (
    IllConditionedWarning,
    InputError,
    IterationLimitWarning,
    LintoolsError,
    LintoolsWarning,
    SeparationError,
)
from ._records import CoefficientTable, Convergence, LinearFit
from .io import load, save
from .least_squares import least_squares
from .splitting import (
    SmallClassWarning,
    SplitBalance,
    repeated_stratified_folds,
    split_balance,
    stratified_bootstrap,
    stratified_folds,
    stratified_holdout,
)

__version__ = "0.1.0"

__all__ = [
    "CoefficientTable",
    "Convergence",
    "IllConditionedWarning",
    "InputError",
    "IterationLimitWarning",
    "LinearFit",
    "LintoolsError",
    "LintoolsWarning",
    "SeparationError",
    "least_squares",
    "load",
    "save",
    "SmallClassWarning",
    "SplitBalance",
    "repeated_stratified_folds",
    "split_balance",
    "stratified_bootstrap",
    "stratified_folds",
    "stratified_holdout",
]
