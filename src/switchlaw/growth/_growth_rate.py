"""Long-run growth of a bet-hedging lineage whose environments are independent across
generations (exact formula)."""

from __future__ import annotations

import numpy as np

from .._deprecation import renamed_keyword
from .._validate import as_distribution
from ._checks import check_cue, check_fitness, check_policy


def memoryless_growth(fitness: np.ndarray, weights: np.ndarray, policy: np.ndarray,
                      cue: np.ndarray | None) -> float:
    """``sum_e w(e) sum_c cue[e, c] log sum_x f(e, x) q(x | c)`` on validated inputs (nats).

    ``policy`` is ``[cue_state, phenotype]`` (one row and ``cue=None`` without a cue). Terms of
    zero weight count as zero; a term of positive weight with no offspring gives ``-inf``.
    """
    joint = weights[:, None] if cue is None else weights[:, None] * cue
    factor = fitness @ policy.T
    used = joint > 0
    if (factor[used] <= 0).any():
        return -np.inf
    return float(joint[used] @ np.log(factor[used]))


@renamed_keyword("env", "habitat")
def growth_rate(fitness, habitat, strategy, *, cue=None) -> float:
    """Long-run growth rate of a bet-hedging lineage (nats per generation).

    Each generation the environment is drawn afresh from ``habitat``; a fraction ``strategy[x]``
    of offspring take phenotype ``x`` (with a cue: ``strategy[c, x]`` of those born when the
    cue reads ``c``), whatever their parent's phenotype, and each individual of phenotype
    ``x`` leaves ``fitness[e, x]`` offspring in environment ``e``.

    Parameters
    ----------
    fitness : array_like, shape (environments, phenotypes)
        Offspring per individual, >= 0; every environment that occurs needs a phenotype with
        positive fitness.
    habitat : array_like, shape (environments,), or an environment with ``.probs``
        Environment probabilities. A :class:`MarkovHabitat` also works: its stationary
        distribution gives the exact long-run growth of a memoryless strategy (ergodic
        theorem).
    strategy : array_like
        Phenotype distribution ``(phenotypes,)`` without a cue, or a policy
        ``[cue_state, phenotype]`` with one.
    cue : array_like, shape (environments, cue states), optional
        Sensing channel ``cue[e, c] = P(cue reads c | environment e)``, seen by the whole
        cohort before its phenotypes are set.

    Returns
    -------
    float
        ``-inf`` when the strategy leaves no offspring in some environment that occurs.

    Notes
    -----
    ``Lambda = sum_e p(e) log sum_x f(e, x) pi(x)`` without a cue and
    ``Lambda = sum_e p(e) sum_c P(c|e) log sum_x f(e, x) q(x|c)`` with one: the population
    multiplies by ``sum_x f(e, x) pi(x)`` each generation, and the law of large numbers
    turns the log of the product into this average (Kelly 1956; Cover & Thomas 2006, ch. 6).

    References
    ----------
    Kelly, J. L. (1956). A new interpretation of information rate. *Bell Syst. Tech. J.*
    35:917–926. Donaldson-Matasci, M. C., Bergstrom, C. T. & Lachmann, M. (2010). The fitness
    value of information. *Oikos* 119:219–230.

    Examples
    --------
    Two environments, each phenotype doubling in its own and dying in the other; hedging
    half and half keeps the lineage level:

    >>> growth_rate([[2.0, 0.0], [0.0, 2.0]], [0.5, 0.5], [0.5, 0.5])
    0.0
    """
    weights = as_distribution(habitat, "habitat")
    f = check_fitness(fitness, weights.size, weights > 0)
    channel = None if cue is None else check_cue(cue, weights.size)
    policy = check_policy(strategy, f.shape[1], None if channel is None else channel.shape[1])
    return memoryless_growth(f, weights, policy, channel)
