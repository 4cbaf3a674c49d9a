"""A stage of the pipeline (see docs/architecture.md): what a switching law is worth in long-run growth when the
environment fluctuates — bet hedging, the value of a cue, the price of sensing, and growth
with phenotype switching in discrete generations and in continuous time."""

from .._deprecation import renamed_attribute
from ._bet_hedging import bet_hedging, cue_value
from ._continuous import continuous_growth, switching_generator
from ._cues import symmetric_cue
from ._environments import MarkovHabitat, PeriodicHabitat, SwitchingHabitat
from ._generations import generation_growth
from ._growth_rate import growth_rate
from ._results import BetHedging, CueValue, GrowthEstimate, SensingTradeoff, SwitchingOptimum
from ._sensing import sensing_tradeoff
from ._switching import optimal_switching

__all__ = [
    "BetHedging",
    "CueValue",
    "GrowthEstimate",
    "MarkovHabitat",
    "PeriodicHabitat",
    "SensingTradeoff",
    "SwitchingHabitat",
    "SwitchingOptimum",
    "bet_hedging",
    "continuous_growth",
    "cue_value",
    "generation_growth",
    "growth_rate",
    "optimal_switching",
    "sensing_tradeoff",
    "switching_generator",
    "symmetric_cue",
]

#: Old names of the habitat classes (the fluctuating environment of growth; the sensed
#: environment of the decision problem keeps "environment"), kept for one release.
_RENAMED = {"MarkovEnvironment": "MarkovHabitat", "PeriodicEnvironment": "PeriodicHabitat",
            "SwitchingEnvironment": "SwitchingHabitat"}
__getattr__ = renamed_attribute(__name__, _RENAMED, globals())
