"""A stage of the pipeline (see docs/architecture.md): switching laws from environmental statistics and sensing costs.

Environments (what the cell senses, as a function of density) and payoffs feed the decision
solvers at every density; the result is a :class:`SwitchingLaw` with rates for simulators and
closed-form approximations.
"""

from ._environments import (
    BINNING_RULES,
    Environment,
    GaussianReceptor,
    PoissonReceptor,
    continuous_signal,
    empirical,
    occupancy,
    product_environment,
)
from ._formula import FormulaFit, fit_formula
from ._law import SwitchingLaw, derive_law
from ._payoffs import DensityDependent, Hill, Linear, Threshold

__all__ = [
    "BINNING_RULES",
    "DensityDependent",
    "Environment",
    "FormulaFit",
    "GaussianReceptor",
    "Hill",
    "Linear",
    "PoissonReceptor",
    "SwitchingLaw",
    "Threshold",
    "continuous_signal",
    "derive_law",
    "empirical",
    "fit_formula",
    "occupancy",
    "product_environment",
]
