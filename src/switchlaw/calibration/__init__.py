"""Calibration: fit ``beta`` and payoff parameters to observed phenotype data.

Maximum-likelihood fits with profile-likelihood intervals, identifiability flags, goodness of
fit against the saturated model and a free logistic, and the interval carried through to the
population model (:func:`population_verdict`).
"""

from ._data import Snapshot
from ._demo import invented_colony_data, run_calibration_section
from ._fit import CHI2_1_95, CUTOFF, calibrate
from ._population import population_verdict
from ._results import Calibration, PopulationVerdict, Profile

__all__ = [
    "CHI2_1_95",
    "CUTOFF",
    "Calibration",
    "PopulationVerdict",
    "Profile",
    "Snapshot",
    "calibrate",
    "invented_colony_data",
    "population_verdict",
    "run_calibration_section",
]
