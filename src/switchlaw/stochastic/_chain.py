"""Simulated hitting probabilities of a one-type birth–death chain (exact or tau-leaping)."""

from __future__ import annotations

import numpy as np

from .._errors import InputError
from .._validate import as_positive, choice
from ._checks import as_count, as_replicates, as_seed
from ._hitting import _check_upper_and_starts, chain_rates
from ._intervals import wilson_interval
from ._jump_chain import jump_chain
from ._network import Network, run_network
from ._results import HittingEstimate
from ._streams import Streams


def _seed_label(seed):
    """The integer seed for a result's record (``None`` for a ``SeedSequence``)."""
    return int(seed) if isinstance(seed, (int, np.integer)) and not isinstance(seed, bool) else None

METHODS = ("exact", "tau-leap")
#: Replicates that share one random stream (and advance together); see ``_streams``.
BLOCK = 64


def _elasticity(rates: np.ndarray) -> np.ndarray:
    """``|n a'(n) / a(n)|`` by central differences (0 where the rate is 0)."""
    n = np.arange(rates.size, dtype=float)
    slope = np.gradient(rates)
    out = np.zeros(rates.size)
    positive = rates > 0
    out[positive] = np.abs(n[positive] * slope[positive] / rates[positive])
    return out


def chain_network(b: np.ndarray, d: np.ndarray, upper: int) -> Network:
    """The chain as a two-reaction network on one species, stopped at 0 and at ``upper``.

    The leap condition's ``g`` is the larger elasticity ``|n a'(n) / a(n)|`` of the two rates
    (at least 1): for rates ``c n^k`` it is the order ``k`` that Cao, Gillespie & Petzold
    (2006) use, and it carries over to any smooth rate function.
    """
    g = np.maximum(1.0, np.maximum(_elasticity(b), _elasticity(d)))
    top = upper

    def propensities(x):
        n = np.clip(x[:, 0], 0, top)
        return np.stack([b[n], d[n]], axis=1)

    def order(x):
        return g[np.clip(x[:, 0], 0, top)][:, None]

    def stop(x):
        return (x[:, 0] <= 0) | (x[:, 0] >= top)

    def invalid(x):
        return x[:, 0] < 0

    def room(x):
        return np.minimum(x[:, 0], top - x[:, 0]).astype(float)

    return Network(np.array([[1], [-1]]), propensities, order, stop, invalid, room)


def simulate_hitting(
    birth,
    death,
    n0,
    upper,
    *,
    replicates,
    seed,
    method: str = "exact",
    epsilon: float = 0.03,
    max_steps: int = 10_000_000,
) -> HittingEstimate:
    """Estimate by simulation the probability that a birth–death chain hits 0 before ``upper``.

    Parameters
    ----------
    birth, death : callable, array_like or float
        Rates per unit time at each size ``n`` (as in :func:`hitting_probability`).
    n0 : int
        Starting size, ``0 <= n0 <= upper``.
    upper : int
        Ceiling; reaching it (or, when tau-leaping, overshooting it) ends a run.
    replicates : int
        Independent runs, ``>= 1``.
    seed : int or numpy.random.SeedSequence
        The same seed gives the same numbers. Replicates run in blocks of 64 that each have
        their own stream, so replicate ``i`` gives the same outcome whatever the number of
        replicates.
    method : {"exact", "tau-leap"}
        ``"exact"`` simulates the embedded jump chain of Gillespie's SSA: it visits exactly the
        states an SSA run visits, and the waiting times do not change which end is hit first,
        so they are not drawn. ``"tau-leap"`` runs the approximate engine in time.
    epsilon : float
        Tau-leaping error control: the expected relative change of each propensity within a
        leap is at most ``epsilon`` (Cao, Gillespie & Petzold 2006; default 0.03). Leaps are
        also kept short enough that their mean plus three standard deviations stays between 0
        and ``upper``. Exact steps are taken when fewer than 10 events are expected in a leap or
        fewer than 10 individuals are present; a leap that would make the size negative is
        rejected and retried with half the step.
    max_steps : int
        Iterations at most (jumps per replicate, or steps of the tau-leap engine); replicates
        still running then are reported as ``unfinished`` and left out of the estimate.

    Returns
    -------
    HittingEstimate
        ``estimate`` and its 95 % Wilson score ``interval``.

    References
    ----------
    Gillespie, D. T. (1977). Exact stochastic simulation of coupled chemical reactions.
    *J. Phys. Chem.* 81:2340–2361. Gillespie, D. T. (2001). Approximate accelerated stochastic
    simulation of chemically reacting systems. *J. Chem. Phys.* 115:1716–1733. Cao, Y.,
    Gillespie, D. T. & Petzold, L. R. (2006). Efficient step size selection for the
    tau-leaping simulation method. *J. Chem. Phys.* 124:044109. Wilson, E. B. (1927). *J. Am.
    Stat. Assoc.* 22:209.

    Examples
    --------
    >>> result = simulate_hitting(1.0, 1.0, 3, 10, replicates=2000, seed=7)
    >>> result.interval[0] < 0.7 < result.interval[1]
    True
    """
    choice(method, "method", METHODS)
    n0 = as_count(n0, "n0")
    upper, _ = _check_upper_and_starts(n0, upper)
    replicates = as_replicates(replicates)
    root = as_seed(seed)
    epsilon = as_positive(epsilon, "epsilon")
    max_steps = as_count(max_steps, "max_steps", minimum=1)
    b, d = chain_rates(birth, death, upper)
    streams = Streams(root, replicates, block=BLOCK)
    if method == "exact":
        total = b + d
        p_up = np.divide(b, total, out=np.zeros_like(b), where=total > 0)
        hit_zero, finished, jumps = jump_chain(p_up, n0, upper, streams, max_steps)
        events = int(jumps[:replicates].sum())
        leaps = 0
    else:
        initial = np.full((streams.padded, 1), n0, dtype=np.int64)
        outcome = run_network(chain_network(b, d, upper), initial, streams, method="tau-leap",
                              epsilon=epsilon, max_steps=max_steps)
        finished = outcome.stopped
        hit_zero = finished & (outcome.counts[:, 0] <= 0)
        events = outcome.events
        leaps = outcome.leaps
    hit_zero, finished = hit_zero[:replicates], finished[:replicates]
    done = int(finished.sum())
    hits = int(hit_zero.sum())
    unfinished = replicates - done
    if done == 0:
        raise InputError(
            f"`max_steps` ({max_steps}) was reached before any replicate hit 0 or `upper`; raise it"
        )
    lo, hi = wilson_interval(hits, done)
    message = "all replicates finished" if unfinished == 0 else (
        f"{unfinished} of {replicates} replicates were still running after {max_steps} steps"
    )
    return HittingEstimate(
        estimate=hits / done, interval=(float(lo), float(hi)), replicates=done, hits=hits,
        n0=n0, upper=upper, method=method, seed=_seed_label(seed),
        events=events, leaps=leaps, unfinished=unfinished, converged=unfinished == 0, message=message,
    )
