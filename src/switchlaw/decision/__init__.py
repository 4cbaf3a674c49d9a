"""A stage of the pipeline (see docs/architecture.md): decision solvers that turn payoffs and environment statistics into
phenotype policies (minimum information, maximum entropy, budgeted), trade-off curves and
sensing-channel capacities."""

from ._budget import LinearConstraint, max_information_bits, solve_budget
from ._capacity import capacity
from ._costs import beta_from_cost, cost_from_beta
from ._minimum_information import first_critical_beta
from ._results import Capacity, CriticalBeta, Policy, Tradeoff
from ._sensitivity import Sensitivity, sensitivity
from ._solve import solve
from ._tradeoff import tradeoff

__all__ = [
    "Capacity",
    "CriticalBeta",
    "LinearConstraint",
    "Policy",
    "Sensitivity",
    "Tradeoff",
    "beta_from_cost",
    "capacity",
    "cost_from_beta",
    "first_critical_beta",
    "max_information_bits",
    "sensitivity",
    "solve",
    "solve_budget",
    "tradeoff",
]
