"""Stochastic populations driven by a switching law (the stage after ``population``).

Two levels, both built on the same :class:`~switchlaw.SwitchingLaw`:

- well mixed: exact stochastic simulation (Gillespie) and tau-leaping of division, death and
  switching (:class:`BirthDeathSwitching`), extinction probabilities with confidence
  intervals, and the exact first-step solution for one-type birth–death chains
  (:func:`hitting_probability`, checked by :func:`simulate_hitting`);
- lattice agents with volume exclusion (:class:`Lattice`, :class:`LatticeModel`) whose cells
  decide on their actual number of occupied neighbours, compared with mean field.
"""

from ._birth_death import BirthDeathSwitching
from ._chain import simulate_hitting
from ._compare import compare_mean_field
from ._front import DIFFUSION_PER_MOTILITY, LatticeFront, lattice_front
from ._hitting import hitting_probability
from ._intervals import wilson_interval
from ._lattice import BOUNDARIES, NEIGHBOURHOODS, Lattice
from ._lattice_model import ENGINES, LatticeModel
from ._results import ExtinctionCurve, HittingEstimate, LatticeRun, MeanFieldComparison, StochasticRun

__all__ = [
    "BOUNDARIES",
    "DIFFUSION_PER_MOTILITY",
    "ENGINES",
    "NEIGHBOURHOODS",
    "BirthDeathSwitching",
    "ExtinctionCurve",
    "HittingEstimate",
    "Lattice",
    "LatticeFront",
    "LatticeModel",
    "LatticeRun",
    "MeanFieldComparison",
    "StochasticRun",
    "compare_mean_field",
    "hitting_probability",
    "lattice_front",
    "simulate_hitting",
    "wilson_interval",
]
