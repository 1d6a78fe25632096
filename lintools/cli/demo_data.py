"""The demo scenario: a bottling plant's inspection station (invented data).

Every bottle that passes the inspection station is recorded with the conditions it was
filled under: fill temperature (deg C), line speed (bottles per minute), cap torque (N m),
nozzle age (days since the nozzle was replaced) and hall humidity (% relative). The
station measures the fill-volume deviation from the nominal volume in millilitres, tests
the seal for a leak (yes/no), and sorts visible defects into none, underfill, cap
misaligned and label skew.  A supplier delivered a leak-risk model for the line; the demo
refits it and finds where it disagrees.

The data are generated here, deterministically from a seed, from known true coefficients
(``TRUE_FILL_DEVIATION``), so a fit can be checked against the truth that made them.  A
recent sample (:func:`recent_inspection_data`) comes from the same models after the plant
stretched its nozzle-replacement interval: only the nozzle age has drifted
(:data:`RECENT_NOZZLE_AGE_DAYS` against :data:`NOZZLE_AGE_DAYS`).
This module is the only place in lintools that holds invented data.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..support.logistic_function import sigmoid

__all__ = [
    "FEATURES", "TRUE_FILL_DEVIATION", "TRUE_LEAK", "TRUE_DEFECT", "DEFECT_CLASSES", "InspectionData",
    "inspection_data", "recent_inspection_data", "NOZZLE_AGE_DAYS", "RECENT_NOZZLE_AGE_DAYS", "supplier_leak_model", "SHIFTS", "SupplierLeakModel", "supplier_leak_record", "true_leak_raw",
    "true_defect_raw",
]

FEATURES = ("fill_temperature", "line_speed", "cap_torque", "nozzle_age", "humidity")

#: Nozzle ages (whole days, from the first up to but excluding the second) of the
#: development sample, and of the recent sample after the replacement interval was stretched.
NOZZLE_AGE_DAYS = (0, 120)
RECENT_NOZZLE_AGE_DAYS = (30, 180)

#: True model of the fill-volume deviation (ml): intercept, then one slope per feature.
TRUE_FILL_DEVIATION = {
    "intercept": -4.0,
    "fill_temperature": 0.35,
    "line_speed": -0.012,
    "cap_torque": 0.0,
    "nozzle_age": -0.045,
    "humidity": 0.02,
}
FILL_NOISE_SD = 0.8

#: Centres used by the true leak and defect models (so intercepts read as baseline risks).
CENTRES = {"fill_temperature": 18.0, "line_speed": 450.0, "cap_torque": 2.2, "nozzle_age": 60.0, "humidity": 55.0}

#: True leak model: logit P(leak) = intercept + sum slope_j * (x_j - centre_j).
TRUE_LEAK = {
    "intercept": -3.0,
    "fill_temperature": 0.12,
    "line_speed": 0.004,
    "cap_torque": -2.5,
    "nozzle_age": 0.012,
    "humidity": 0.0,
}

#: Defect classes; "none" is the reference class of the true softmax model.
DEFECT_CLASSES = ("none", "underfill", "cap misaligned", "label skew")
TRUE_DEFECT = {
    "underfill": {"intercept": -2.2, "fill_temperature": -0.10, "line_speed": 0.006, "cap_torque": 0.0, "nozzle_age": 0.02, "humidity": 0.0},
    "cap misaligned": {"intercept": -2.6, "fill_temperature": 0.0, "line_speed": 0.002, "cap_torque": -3.0, "nozzle_age": 0.0, "humidity": 0.0},
    "label skew": {"intercept": -2.4, "fill_temperature": 0.0, "line_speed": 0.003, "cap_torque": 0.0, "nozzle_age": 0.0, "humidity": 0.05},
}

#: The supplier's leak-risk model (on the raw, uncentred features): it agrees with the
#: truth except that it understates the cap-torque effect and overstates nozzle wear,
#: as a model fitted on an older line would.
SUPPLIER_LEAK_SLOPES = {
    "fill_temperature": 0.12,
    "line_speed": 0.004,
    "cap_torque": -1.5,
    "nozzle_age": 0.025,
    "humidity": 0.0,
}


@dataclass(frozen=True)
class InspectionData:
    """Inspection records: a feature matrix with column names and the targets."""

    X: np.ndarray
    names: tuple[str, ...]
    fill_deviation: np.ndarray
    leak: np.ndarray
    defect: np.ndarray
    shift: np.ndarray


#: The work shifts of the plant (a segment column) and their shares of the bottles.
SHIFTS = ("early", "late", "night")
SHIFT_SHARES = (0.45, 0.4, 0.15)

def inspection_data(n: int = 2000, seed: int = 20261201) -> InspectionData:
    """Generate ``n`` inspection records from the known true coefficients.

    The draw uses only ``numpy.random.default_rng(seed)``, so the same seed gives the same
    records on every platform.  The work shift of each bottle (a segment column) is drawn
    last, so it changes no other number.
    """
    return _draw(np.random.default_rng(seed), n, NOZZLE_AGE_DAYS)


def recent_inspection_data(n: int = 2000, seed: int = 20261201) -> InspectionData:
    """Generate ``n`` recent inspection records: the same true models and feature
    distributions as :func:`inspection_data` except the nozzle age, drawn from
    :data:`RECENT_NOZZLE_AGE_DAYS`.

    The draw uses only ``numpy.random.default_rng([seed, 1])``, a stream of its own, so the
    recent records do not repeat the development ones and are the same on every platform.
    """
    return _draw(np.random.default_rng([seed, 1]), n, RECENT_NOZZLE_AGE_DAYS)


def _draw(rng: np.random.Generator, n: int, nozzle_age_days: tuple[int, int]) -> InspectionData:
    """``n`` records drawn with ``rng``, nozzle ages uniform on the whole days of ``nozzle_age_days``."""
    temperature = rng.normal(18.0, 2.5, n)
    speed = rng.uniform(300.0, 600.0, n)
    torque = rng.normal(2.2, 0.25, n)
    age = rng.integers(*nozzle_age_days, n).astype(float)
    humidity = np.clip(rng.normal(55.0, 10.0, n), 20.0, 95.0)
    X = np.column_stack([temperature, speed, torque, age, humidity])
    beta = np.array([TRUE_FILL_DEVIATION[f] for f in FEATURES])
    deviation = TRUE_FILL_DEVIATION["intercept"] + X @ beta + rng.normal(0.0, FILL_NOISE_SD, n)
    Xc = X - np.array([CENTRES[f] for f in FEATURES])
    leak_eta = TRUE_LEAK["intercept"] + Xc @ np.array([TRUE_LEAK[f] for f in FEATURES])
    leak = rng.uniform(size=n) < 1.0 / (1.0 + np.exp(-leak_eta))
    eta = np.zeros((n, len(DEFECT_CLASSES)))
    for k, name in enumerate(DEFECT_CLASSES[1:], start=1):
        m = TRUE_DEFECT[name]
        eta[:, k] = m["intercept"] + Xc @ np.array([m[f] for f in FEATURES])
    prob = np.exp(eta - eta.max(axis=1, keepdims=True))
    prob /= prob.sum(axis=1, keepdims=True)
    u = rng.uniform(size=n)[:, None]
    code = (u > np.cumsum(prob, axis=1)).sum(axis=1)
    defect = np.array(DEFECT_CLASSES, dtype=object)[np.minimum(code, len(DEFECT_CLASSES) - 1)]
    shift = rng.choice(np.array(SHIFTS, dtype=object), n, p=SHIFT_SHARES)
    return InspectionData(X=X, names=FEATURES, fill_deviation=deviation, leak=leak, defect=defect, shift=shift)


def supplier_leak_model() -> tuple[dict, float]:
    """The supplier's delivered leak-risk slopes (raw features) and intercept."""
    centre_shift = sum(SUPPLIER_LEAK_SLOPES[f] * CENTRES[f] for f in FEATURES)
    return dict(SUPPLIER_LEAK_SLOPES), TRUE_LEAK["intercept"] - centre_shift


def true_leak_raw() -> tuple[dict, float]:
    """The true leak model on the raw (uncentred) features: slopes and intercept."""
    slopes = {f: TRUE_LEAK[f] for f in FEATURES}
    return slopes, TRUE_LEAK["intercept"] - sum(slopes[f] * CENTRES[f] for f in FEATURES)


def true_defect_raw() -> tuple[np.ndarray, np.ndarray]:
    """The true defect model on the raw features: (p, K) slopes and (K,) intercepts.

    Columns follow :data:`DEFECT_CLASSES`; the column of ``"none"`` is zero.
    """
    B = np.zeros((len(FEATURES), len(DEFECT_CLASSES)))
    b = np.zeros(len(DEFECT_CLASSES))
    centre = np.array([CENTRES[f] for f in FEATURES])
    for k, name in enumerate(DEFECT_CLASSES[1:], start=1):
        B[:, k] = [TRUE_DEFECT[name][f] for f in FEATURES]
        b[k] = TRUE_DEFECT[name]["intercept"] - float(B[:, k] @ centre)
    return B, b


@dataclass(frozen=True)
class SupplierLeakModel:
    """The supplier's leak-risk model as a delivered file holds it (coefficients only).

    Carries what :func:`lintools.exchange.pmml.write_pmml` writes for a logistic model: the kind,
    feature names, slopes, intercept, the two classes and the positive one, the target.
    """

    coefficients: np.ndarray
    intercept: float
    names: tuple[str, ...] = FEATURES
    classes: tuple = (False, True)
    positive_class: object = True
    target: str = "leak"
    kind = "logistic"

    def mean(self, X: np.ndarray) -> np.ndarray:
        """The supplier's leak probability for rows of the five features."""
        return sigmoid(np.asarray(X, dtype=float) @ self.coefficients + self.intercept)


def supplier_leak_record() -> SupplierLeakModel:
    """The supplier's model as a record that :func:`lintools.exchange.pmml.write_pmml` can write."""
    slopes, intercept = supplier_leak_model()
    return SupplierLeakModel(coefficients=np.array([slopes[f] for f in FEATURES]), intercept=float(intercept))
