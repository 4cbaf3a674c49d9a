"""The switchlaw law under a sensing cost: which beta (and so which budget) maximises
long-run growth once each bit sensed is paid for."""

from __future__ import annotations

import numpy as np
from scipy.optimize import minimize_scalar

from .._deprecation import renamed_keyword
from .._errors import InputError
from .._validate import as_array, as_distribution, as_nonnegative, as_payoff
from ..decision import solve, tradeoff
from ._checks import check_cue, check_fitness
from ._growth_rate import memoryless_growth
from ._results import SensingTradeoff


def posterior_mean_fitness(fitness: np.ndarray, habitat: np.ndarray, cue: np.ndarray) -> np.ndarray:
    """``E[f(E, x) | c]`` per cue state (the prior mean where a cue state never occurs)."""
    joint = habitat[:, None] * cue
    cue_probs = joint.sum(axis=0)
    mean = np.tile(habitat @ fitness, (cue.shape[1], 1))
    seen = cue_probs > 0
    mean[seen] = (joint[:, seen] / cue_probs[seen]).T @ fitness
    return mean


@renamed_keyword("env", "habitat")
def sensing_tradeoff(
    fitness,
    habitat,
    cue,
    betas,
    *,
    cost_per_bit=0.0,
    payoff=None,
) -> SensingTradeoff:
    """Long-run growth of the min-information law along a grid of betas, net of sensing costs.

    Parameters
    ----------
    fitness : array_like, shape (environments, phenotypes)
        Offspring per individual, >= 0.
    habitat : array_like, shape (environments,), or an environment with ``.probs``
        Environments independent across generations.
    cue : array_like, shape (environments, cue states)
        Sensing channel ``cue[e, c]``; the identity matrix for a cell that sees its
        environment exactly.
    betas : array_like, shape (k,)
        Sensitivities to scan (nats per payoff unit), >= 0.
    cost_per_bit : float
        Growth lost per bit of information the law uses (nats per generation per bit).
    payoff : array_like, shape (cue states, phenotypes), optional
        Payoff of the decision problem over cue states. Default: posterior mean fitness
        ``u(c, x) = E[f(E, x) | c]``, the expected offspring of phenotype ``x`` given the cue.

    Returns
    -------
    SensingTradeoff
        Growth, information and net growth at each beta, and the best beta.

    Notes
    -----
    At each beta the law is ``switchlaw.tradeoff``'s min-information policy
    ``q(x | c) ∝ r(x) exp(beta u(c, x))`` for cue states with probabilities
    ``p(c) = sum_e p(e) cue[e, c]``. Its long-run growth is :func:`growth_rate` with that
    policy, and its cost is ``cost_per_bit * I(X; C)``. The best grid point is refined by a
    bounded Brent search on ``log beta`` between its neighbours (a beta of 0 at the edge of
    the grid is not refined); a refined value is kept only if it beats the grid. The best
    budget is ``best_information_bits``: a budget and a beta are two labels of one point
    on the curve.

    Examples
    --------
    >>> scan = sensing_tradeoff([[2.0, 0.2], [0.2, 2.0]], [0.5, 0.5],
    ...                         [[0.9, 0.1], [0.1, 0.9]], [0.1, 1.0, 10.0], cost_per_bit=0.05)
    >>> bool(scan.best_net_growth >= scan.net_growth.max())
    True
    """
    p = as_distribution(habitat, "habitat")
    f = check_fitness(fitness, p.size, p > 0)
    channel = check_cue(cue, p.size)
    grid = as_array(betas, "betas", ndim=1)
    if (grid < 0).any():
        raise InputError(f"`betas` must be >= 0 (got minimum {float(grid.min())!r})")
    cost = as_nonnegative(cost_per_bit, "cost_per_bit")
    cue_probs = p @ channel
    u = posterior_mean_fitness(f, p, channel) if payoff is None else as_payoff(
        payoff, channel.shape[1], "payoff")
    if u.shape[1] != f.shape[1]:
        raise InputError(
            f"`payoff` must have one column per phenotype ({f.shape[1]}) (got shape {u.shape})"
        )
    curve = tradeoff(u, cue_probs, grid)
    growth = np.array(
        [memoryless_growth(f, p, curve.probs_at(i), channel) for i in range(grid.size)]
    )
    net = growth - cost * curve.information_bits

    def net_at(beta: float):
        law = solve(u, cue_probs, beta)
        g = memoryless_growth(f, p, law.probs, channel)
        return g - cost * law.information_bits, g, law

    order = np.argsort(grid)
    i = int(np.argmax(net[order]))
    best_beta = float(grid[order][i])
    best = (net[order][i], growth[order][i], None)
    message = "best grid point"
    lo = grid[order][max(i - 1, 0)]
    hi = grid[order][min(i + 1, grid.size - 1)]
    lo = lo if lo > 0 else (best_beta if best_beta > 0 else 0.0)
    if lo > 0 and hi > lo:
        refined = minimize_scalar(
            lambda x: -net_at(float(np.exp(x)))[0], bounds=(np.log(lo), np.log(hi)),
            method="bounded", options={"xatol": 1e-8},
        )
        candidate = net_at(float(np.exp(refined.x)))
        if candidate[0] > best[0]:
            best_beta, best = float(np.exp(refined.x)), candidate
            message = "best grid point refined by bounded Brent search on log beta"
    if i in (0, grid.size - 1) and grid.size > 1:
        message += "; the optimum is at the edge of the grid: widen `betas`"
    law = best[2] if best[2] is not None else solve(u, cue_probs, best_beta)
    return SensingTradeoff(
        betas=grid, growth_rate=growth, information_bits=curve.information_bits,
        net_growth=net, cost_per_bit=cost, best_beta=best_beta,
        best_growth_rate=float(best[1]), best_information_bits=float(law.information_bits),
        best_net_growth=float(best[0]), best_policy=law.probs, message=message,
    )
