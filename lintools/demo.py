"""The demo scenario: a bottling plant's inspection station (invented data).

Every bottle that passes the inspection station is recorded with the conditions it was
filled under: fill temperature (deg C), line speed (bottles per minute), cap torque (N m),
nozzle age (days since the nozzle was replaced) and hall humidity (% relative). The
station measures the fill-volume deviation from the nominal volume in millilitres.

The data are generated here, deterministically from a seed, from known true coefficients
(``TRUE_FILL_DEVIATION``), so a fit can be checked against the truth that made them.
This module is the only place in lintools that holds invented data.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["FEATURES", "TRUE_FILL_DEVIATION", "InspectionData", "inspection_data"]

FEATURES = ("fill_temperature", "line_speed", "cap_torque", "nozzle_age", "humidity")

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


@dataclass(frozen=True)
class InspectionData:
    """Inspection records: a feature matrix with column names and the targets."""

    X: np.ndarray
    names: tuple[str, ...]
    fill_deviation: np.ndarray


def inspection_data(n: int = 2000, seed: int = 20261201) -> InspectionData:
    """Generate ``n`` inspection records from the known true coefficients.

    The draw uses only ``numpy.random.default_rng(seed)``, so the same seed gives the same
    records on every platform.
    """
    rng = np.random.default_rng(seed)
    temperature = rng.normal(18.0, 2.5, n)
    speed = rng.uniform(300.0, 600.0, n)
    torque = rng.normal(2.2, 0.25, n)
    age = rng.integers(0, 120, n).astype(float)
    humidity = np.clip(rng.normal(55.0, 10.0, n), 20.0, 95.0)
    X = np.column_stack([temperature, speed, torque, age, humidity])
    beta = np.array([TRUE_FILL_DEVIATION[f] for f in FEATURES])
    deviation = TRUE_FILL_DEVIATION["intercept"] + X @ beta + rng.normal(0.0, FILL_NOISE_SD, n)
    return InspectionData(X=X, names=FEATURES, fill_deviation=deviation)
