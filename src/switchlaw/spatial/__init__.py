"""A stage of the pipeline (see docs/architecture.md): invasion fronts of a law-governed
population (reaction–diffusion by the method of lines, linear spreading speed, pushed/pulled)."""

from ._front import simulate_front
from ._linear import spreading_speed
from ._results import KINDS, FrontRun, SpreadingSpeed

__all__ = ["FrontRun", "KINDS", "SpreadingSpeed", "simulate_front", "spreading_speed"]
