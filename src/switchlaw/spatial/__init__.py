"""A stage of the pipeline (see docs/architecture.md): invasion fronts of a law-governed
population (reaction–diffusion by the method of lines, linear spreading speed, pushed/pulled)."""

from ._front import simulate_front
from ._linear import spreading_speed
from ._results import KINDS, FrontRun, SpreadingSpeed
from ._study import FrontScan, FrontStudy, front_study

__all__ = ["FrontRun", "FrontScan", "FrontStudy", "KINDS", "SpreadingSpeed", "front_study", "simulate_front",
           "spreading_speed"]
