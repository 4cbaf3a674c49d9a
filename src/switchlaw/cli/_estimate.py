"""Rough time and memory of a study's stages, judged before anything is computed.

The model counts evaluations of the sensed environment, which dominate every stage: one per
density for the law, about :data:`CALLS_PER_BETA` per beta for the regime scan and the
continuation, and as many per cell of the regime map. Each evaluation costs a few times
:data:`SECONDS_PER_CALL` (larger for a finite lattice, a continuous signal and many states).
The constants are rough orders of magnitude on a 2-core laptop-class machine (common
practice, no source): the estimate says "minutes or days", not seconds. Above
:data:`TIME_LIMIT` or :data:`MEMORY_LIMIT` ``check`` and ``run`` refuse the study unless
``--yes`` is given.
"""

from __future__ import annotations

#: Seconds of one evaluation of a Binomial neighbour count with few states.
SECONDS_PER_CALL = 2e-5
#: How much slower a finite lattice (hypergeometric) or a binned continuous signal is.
LATTICE_FACTOR = 50.0
SIGNAL_FACTOR = 100.0
#: Environment evaluations per beta of the scan and the continuation (equilibria, stability).
CALLS_PER_BETA = 200
#: Refuse above these without --yes.
TIME_LIMIT = 30 * 60.0
MEMORY_LIMIT = 4 * 2**30
#: float64 arrays of the law's size held at once (probabilities, payoffs, policies, marginals).
ARRAYS = 16


def states(study) -> int:
    """Sensed states of one environment (neighbour counts, or bins)."""
    senses = study.senses
    if senses.kind == "neighbours":
        return int(senses.neighbours) + 1
    return max(len(senses.edges or ()) - 1, 1)


def estimate(study) -> dict:
    """``{"seconds": ..., "bytes": ...}`` for the whole study (rough)."""
    n = states(study)
    phenotypes = len(study.study.phenotypes)
    per_call = SECONDS_PER_CALL * (1.0 + n * phenotypes / 100.0)
    if study.senses.kind == "signal":
        per_call *= SIGNAL_FACTOR
    elif study.senses.lattice_sites is not None:
        per_call *= LATTICE_FACTOR
    densities = study.decision.densities.points
    calls = densities + 81
    if study.population is not None:
        calls += 2 * study.population.betas.points * CALLS_PER_BETA
    if study.regime_map is not None:
        calls += study.regime_map.beta_points * study.regime_map.values.points * CALLS_PER_BETA
    memory = 8.0 * ARRAYS * densities * n * n * phenotypes if study.senses.receptor else \
        8.0 * ARRAYS * densities * n * phenotypes
    return {"seconds": calls * per_call, "bytes": memory}


def over_limit(study) -> str | None:
    """Why the study is above the limits (one line), or None."""
    found = estimate(study)
    if found["bytes"] > MEMORY_LIMIT:
        return (f"the law needs about {found['bytes'] / 2**30:.1f} GiB of memory (limit "
                f"{MEMORY_LIMIT / 2**30:.0f} GiB): fewer decision.densities points, states or phenotypes")
    if found["seconds"] > TIME_LIMIT:
        return (f"the study would take about {found['seconds'] / 60:.0f} minutes (limit "
                f"{TIME_LIMIT / 60:.0f}): fewer points in population.betas or regime_map, or fewer states")
    return None
