"""lintools: linear and logistic models you can audit, with NumPy only.

Public names only; see the README and each function's docstring.
"""

from .support.version import __version__
from .support.errors import (
    IllConditionedWarning,
    InputError,
    IterationLimitWarning,
    LintoolsError,
    LintoolsWarning,
    SeparationError,
)
from .models.records import Accuracy, CoefficientTable, Convergence, LinearFit
from .models.accuracy import Precision
from .exchange.model_files import load, save
from .exchange.pmml import DeliveredModel, read_pmml, write_pmml
from .exchange.csv_table import Table, read_table
from .models.least_squares import least_squares
from .models.records import LogisticFit
from .models.logistic import logistic
from .models.softmax_record import SoftmaxFit
from .models.softmax import softmax
from .blocks import least_squares_blocks, logistic_blocks, softmax_blocks
from .models.separation import MultinomialSeparationCheck, SeparationCheck, check_separation
from .metrics.scores import BrierScore, brier, cross_entropy
from .metrics.bins import ReliabilityTable, calibration_error, reliability
from .metrics.checks import (
    CalibrationLine,
    HosmerLemeshow,
    SpiegelhalterTest,
    calibration_line,
    hosmer_lemeshow,
    spiegelhalter,
)
from .exchange.crosscheck import CoefficientComparison, ImpliedPenalty, compare_coefficients, implied_l2
from .metrics.discrimination import ROCArea, ROCAreaDifference, roc_auc, roc_auc_difference
from .metrics.kolmogorov import KolmogorovSmirnov, kolmogorov_smirnov
from .metrics.gains import GainsTable, gains
from .metrics.band_tests import BandTests, band_tests
from .metrics.stability import PopulationStability, population_stability
from .metrics.collinearity import Collinearity, collinearity
from .metrics.recalibration import (
    IsotonicMap,
    PlattMap,
    TemperatureMap,
    isotonic_calibration,
    platt_scaling,
    temperature_scaling,
)
from .splitting.stratified import (
    SmallClassWarning,
    SplitBalance,
    repeated_stratified_folds,
    split_balance,
    stratified_bootstrap,
    stratified_folds,
    stratified_holdout,
)


__all__ = [
    "Accuracy",
    "Precision",
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
    "LogisticFit",
    "logistic",
    "SoftmaxFit",
    "softmax",
    "least_squares_blocks",
    "logistic_blocks",
    "softmax_blocks",
    "MultinomialSeparationCheck",
    "SeparationCheck",
    "check_separation",
    "load",
    "save",
    "DeliveredModel",
    "read_pmml",
    "write_pmml",
    "Table",
    "read_table",
    "SmallClassWarning",
    "SplitBalance",
    "repeated_stratified_folds",
    "split_balance",
    "stratified_bootstrap",
    "stratified_folds",
    "stratified_holdout",
    "BrierScore",
    "brier",
    "cross_entropy",
    "ReliabilityTable",
    "calibration_error",
    "reliability",
    "CalibrationLine",
    "HosmerLemeshow",
    "SpiegelhalterTest",
    "calibration_line",
    "hosmer_lemeshow",
    "spiegelhalter",
    "CoefficientComparison",
    "ImpliedPenalty",
    "compare_coefficients",
    "implied_l2",
    "ROCArea",
    "ROCAreaDifference",
    "roc_auc",
    "roc_auc_difference",
    "KolmogorovSmirnov",
    "kolmogorov_smirnov",
    "GainsTable",
    "gains",
    "BandTests",
    "band_tests",
    "PopulationStability",
    "population_stability",
    "Collinearity",
    "collinearity",
    "IsotonicMap",
    "PlattMap",
    "TemperatureMap",
    "isotonic_calibration",
    "platt_scaling",
    "temperature_scaling",
]
