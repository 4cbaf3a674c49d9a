"""switchlaw: phenotype switching laws derived from information theory.

Research software, not a medical device.
"""

from ._errors import InfeasibleError, InputError
from .decision import (
    Capacity,
    CriticalBeta,
    LinearConstraint,
    Policy,
    Sensitivity,
    Tradeoff,
    beta_from_cost,
    capacity,
    cost_from_beta,
    first_critical_beta,
    max_information_bits,
    sensitivity,
    solve,
    solve_budget,
    tradeoff,
)
from .laws import (
    BINNING_RULES,
    Environment,
    FormulaFit,
    GaussianReceptor,
    Hill,
    Linear,
    PoissonReceptor,
    SwitchingLaw,
    Threshold,
    continuous_signal,
    derive_law,
    empirical,
    fit_formula,
    occupancy,
    product_environment,
)
from .information import (
    NATS_PER_BIT,
    conditional_entropy,
    entropy,
    kl_divergence,
    mutual_information,
    to_bits,
)

from .plotting import plot_law, plot_tradeoff

__version__ = "0.1.0"

__all__ = [
    "BINNING_RULES",
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
    "plot_law",
    "plot_tradeoff",
    "Capacity",
    "CriticalBeta",
    "InfeasibleError",
    "InputError",
    "LinearConstraint",
    "NATS_PER_BIT",
    "Policy",
    "Sensitivity",
    "Tradeoff",
    "beta_from_cost",
    "capacity",
    "conditional_entropy",
    "cost_from_beta",
    "entropy",
    "first_critical_beta",
    "kl_divergence",
    "max_information_bits",
    "mutual_information",
    "sensitivity",
    "solve",
    "solve_budget",
    "to_bits",
    "tradeoff",
]
