"""Stage 4 of the pipeline: what a switching law does to a population (mean-field dynamics,
equilibria, Allee regimes, continuation in beta)."""

from ._continuation import BifurcationDiagram, Branch, CriticalPoint
from ._mean_field import REGIMES, MeanField, Trajectory
from ._scalar import Equilibrium, equilibria_of

__all__ = [
    "REGIMES",
    "BifurcationDiagram",
    "Branch",
    "CriticalPoint",
    "Equilibrium",
    "MeanField",
    "Trajectory",
    "equilibria_of",
]
