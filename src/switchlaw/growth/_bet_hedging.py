"""Growth-optimal bet hedging (the log-optimal portfolio) and the fitness value of a cue.

Maximising ``Lambda(pi) = sum_e w(e) log sum_x f(e, x) pi(x)`` over the simplex is the
min-information problem of the decision stage with payoff ``log f`` at ``beta = 1``, reduced
to its marginal: ``F(r) = -sum_e w(e) log sum_x r(x) f(e, x)`` (see ``decision/_problem.py``).
So the same active-set Newton solver, with its Blahut–Arimoto fallback, solves it, and the
same certificate ``Lambda* - Lambda(pi) <= log max_x c(x)``, with
``c(x) = sum_e w(e) f(e, x) / sum_x' f(e, x') pi(x')``, bounds the distance from the optimum
(Cover 1984; Blahut 1972).
"""

from __future__ import annotations

import numpy as np

from .._deprecation import renamed_keyword
from .._validate import as_distribution, as_nonnegative
from ..decision._minimum_information import METHODS, _unique_phenotypes
from ..decision._problem import Reduced
from ..information import mutual_information
from ._checks import check_count, check_cue, check_fitness
from ._growth_rate import memoryless_growth
from ._results import BetHedging, CueValue


def log_optimal(fitness: np.ndarray, weights: np.ndarray, *, tol: float, max_iter: int):
    """The growth-optimal phenotype distribution for environment weights ``weights``.

    Returns ``(strategy, gap_nats, iterations, converged, message)``.
    """
    keep = weights > 0
    distinct, inverse, counts = _unique_phenotypes(fitness[keep])
    n = distinct.shape[1]
    if n == 1:
        return np.full(fitness.shape[1], 1.0 / fitness.shape[1]), 0.0, 0, True, "one distinct phenotype"
    row_max = distinct.max(axis=1)
    expo = distinct / row_max[:, None]
    with np.errstate(divide="ignore"):
        gaps = np.log(expo)
    w = weights[keep]
    problem = Reduced(p=w, gaps=gaps, beta=1.0, expo=expo, offset=float(w @ np.log(row_max)))
    allowed = np.ones(n, dtype=bool)
    record = METHODS["newton"](problem, allowed / n, allowed=allowed, tol=tol, max_iter=max_iter)
    strategy = record.marginal[inverse] / counts[inverse]
    return strategy, record.gap_nats, record.iterations, record.converged, record.message


@renamed_keyword("env", "habitat")
def bet_hedging(fitness, habitat, *, cue=None, tol: float = 1e-12, max_iter: int = 500) -> BetHedging:
    """The strategy that maximises long-run growth in environments independent across
    generations, and its growth rate.

    Parameters
    ----------
    fitness : array_like, shape (environments, phenotypes)
        Offspring per individual, >= 0.
    habitat : array_like, shape (environments,), or an environment with ``.probs``
    cue : array_like, shape (environments, cue states), optional
        Sensing channel ``cue[e, c]``; the optimal policy is then ``[cue_state, phenotype]``.
        A cue state that never occurs gets the optimal strategy without a cue.
    tol : float
        Certified tolerance on the growth rate, per cue state (nats per generation).
    max_iter : int
        Newton iterations per cue state (Blahut–Arimoto finishes if they run out).

    Returns
    -------
    BetHedging

    Notes
    -----
    The optimum solves ``max_pi sum_e p(e) log sum_x f(e, x) pi(x)`` over the simplex
    (concave). With a cue it splits into one such problem per cue state, weighted by the
    posterior ``p(e | c)``. With diagonal fitness ``f(e, x) = o_e [e = x]`` the answer is
    proportional betting, ``pi = p`` (``q(x | c) = p(x | c)`` with a cue), whatever the
    odds ``o_e`` (Kelly 1956).

    References
    ----------
    Kelly, J. L. (1956). *Bell Syst. Tech. J.* 35:917. Cover, T. M. (1984). An algorithm for
    maximizing expected log investment return. *IEEE Trans. Inf. Theory* 30:369–373.
    Donaldson-Matasci, M. C., Bergstrom, C. T. & Lachmann, M. (2010). *Oikos* 119:219.

    Examples
    --------
    >>> result = bet_hedging([[3.0, 0.0], [0.0, 3.0]], [0.7, 0.3])
    >>> result.strategy.round(9).tolist()
    [0.7, 0.3]
    """
    p = as_distribution(habitat, "habitat")
    f = check_fitness(fitness, p.size, p > 0)
    tol = as_nonnegative(tol, "tol")
    max_iter = check_count(max_iter, "max_iter")
    if cue is None:
        strategy, gap, iterations, converged, message = log_optimal(f, p, tol=tol, max_iter=max_iter)
        return BetHedging(
            strategy=strategy, growth_rate=memoryless_growth(f, p, strategy[None, :], None),
            gap_nats=gap, converged=converged, iterations=iterations, message=message,
        )
    channel = check_cue(cue, p.size)
    joint = p[:, None] * channel
    cue_probs = joint.sum(axis=0)
    policy = np.empty((channel.shape[1], f.shape[1]))
    gap, iterations, converged, messages = 0.0, 0, True, set()
    for c, weight in enumerate(cue_probs):
        if weight == 0:
            continue
        row = log_optimal(f, joint[:, c] / weight, tol=tol, max_iter=max_iter)
        policy[c] = row[0]
        gap += weight * row[1]
        iterations += row[2]
        converged &= row[3]
        messages.add(row[4])
    if (cue_probs == 0).any():
        policy[cue_probs == 0] = log_optimal(f, p, tol=tol, max_iter=max_iter)[0]
        messages.add("cue states that never occur take the optimal strategy without a cue")
    return BetHedging(
        strategy=policy, growth_rate=memoryless_growth(f, p, policy, channel), gap_nats=gap,
        converged=bool(converged), iterations=iterations, message="; ".join(sorted(messages)),
    )


@renamed_keyword("env", "habitat")
def cue_value(fitness, habitat, cue, *, tol: float = 1e-12) -> CueValue:
    """The fitness value of a cue: optimal growth with it minus optimal growth without it.

    Parameters
    ----------
    fitness : array_like, shape (environments, phenotypes)
    habitat : array_like, shape (environments,), or an environment with ``.probs``
    cue : array_like, shape (environments, cue states)
    tol : float
        Certified tolerance of each optimisation (nats per generation).

    Returns
    -------
    CueValue
        ``value_nats`` beside ``information_bits = I(E; C)``.

    Notes
    -----
    The value never exceeds the mutual information between cue and environment, and equals
    it when fitness is diagonal (each phenotype survives in one environment only): then
    ``Lambda = E[log o_E] - H(E | C)`` with the cue and ``E[log o_E] - H(E)`` without it.

    References
    ----------
    Kelly (1956); Barron, A. R. & Cover, T. M. (1988). A bound on the financial value of
    information. *IEEE Trans. Inf. Theory* 34:1097–1100. Donaldson-Matasci, Bergstrom &
    Lachmann (2010), *Oikos* 119:219.

    Examples
    --------
    A cue that is right 90 % of the time about a fair coin, with diagonal fitness, is worth
    ``1 - H_b(0.1)`` bits per generation:

    >>> value = cue_value([[2.0, 0.0], [0.0, 2.0]], [0.5, 0.5], [[0.9, 0.1], [0.1, 0.9]])
    >>> round(value.value_bits, 8), round(value.information_bits, 8)
    (0.53100441, 0.53100441)
    """
    with_cue = bet_hedging(fitness, habitat, cue=cue, tol=tol)
    without_cue = bet_hedging(fitness, habitat, tol=tol)
    return CueValue(
        value_nats=with_cue.growth_rate - without_cue.growth_rate,
        information_bits=mutual_information(habitat, cue, unit="bits"),
        with_cue=with_cue,
        without_cue=without_cue,
    )
