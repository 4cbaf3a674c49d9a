"""A stage of the pipeline (see docs/architecture.md): what a switching law does to a population (mean-field dynamics,
equilibria, Allee regimes, continuation in beta)."""

from ._continuation import BifurcationDiagram, Branch, CriticalPoint
from ._laws import LawCache
from ._mean_field import PARAMETERS, REGIMES, MeanField, RegimeMap, Trajectory
from ._scalar import Equilibrium, equilibria_of

__all__ = [
    "PARAMETERS",
    "REGIMES",
    "RegimeMap",
    "BifurcationDiagram",
    "Branch",
    "CriticalPoint",
    "Equilibrium",
    "LawCache",
    "MeanField",
    "Trajectory",
    "equilibria_of",
]
