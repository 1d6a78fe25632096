"""lintools: linear and logistic models you can audit, with NumPy only.

Public names only; see the README and each function's docstring.
"""

from ._version import __version__
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
from .pmml import DeliveredModel, read_pmml, write_pmml
from .table import Table, read_table
from .least_squares import least_squares
from ._records import LogisticFit
from .logistic import logistic
from ._softmax_record import SoftmaxFit
from .softmax import softmax
from .blocks import least_squares_blocks, logistic_blocks, softmax_blocks
from .separation import MultinomialSeparationCheck, SeparationCheck, check_separation
from .calibration import BrierScore, brier, cross_entropy
from .calibration_bins import ReliabilityTable, calibration_error, reliability
from .calibration_checks import (
    CalibrationLine,
    HosmerLemeshow,
    SpiegelhalterTest,
    calibration_line,
    hosmer_lemeshow,
    spiegelhalter,
)
from .crosscheck import CoefficientComparison, ImpliedPenalty, compare_coefficients, implied_l2
from .discrimination import ROCArea, ROCAreaDifference, roc_auc, roc_auc_difference
from .kolmogorov import KolmogorovSmirnov, kolmogorov_smirnov
from .gains import GainsTable, gains
from .band_tests import BandTests, band_tests
from .stability import PopulationStability, population_stability
from .collinearity import Collinearity, collinearity
from .recalibration import (
    IsotonicMap,
    PlattMap,
    TemperatureMap,
    isotonic_calibration,
    platt_scaling,
    temperature_scaling,
)
from .splitting import (
    SmallClassWarning,
    SplitBalance,
    repeated_stratified_folds,
    split_balance,
    stratified_bootstrap,
    stratified_folds,
    stratified_holdout,
)


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
