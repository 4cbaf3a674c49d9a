"""Exact stochastic simulation and tau-leaping of a reaction network, replicates side by side.

A *network* is a list of reactions (births, deaths, switches) with a stoichiometry matrix and
state-dependent propensities. :func:`run_network` advances every replicate of a batch at
once: one exact event, or one tau-leap, per replicate per iteration.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from ._streams import Streams

#: Tau-leaping is used only when at least this many events are expected in the leap ...
LEAP_MIN_EVENTS = 10.0
#: ... and the population holds at least this many individuals; otherwise exact steps.
LEAP_MIN_SIZE = 10


@dataclass(frozen=True)
class Network:
    """Reactions on ``species`` counts.

    Attributes
    ----------
    stoichiometry : ndarray of int, shape (reactions, species)
    propensities : callable
        ``counts (rows, species) -> (rows, reactions)`` rates per unit time, >= 0.
    order : callable
        ``counts -> (rows, species)``: the factor ``g_i`` of the leap condition (Cao, Gillespie
        & Petzold 2006): how many times faster than ``x_i`` itself the propensities change in
        relative terms when ``x_i`` changes.
    stop : callable
        ``counts -> (rows,) bool``: the run of a replicate ends here (extinction, a ceiling).
    invalid : callable
        ``counts -> (rows,) bool``: a tau-leap may not end here (negative counts, beyond a
        capacity); such a leap is rejected and retried with half the step.
    room : callable
        ``counts -> (rows,)``: how far (in individuals) the total population is from the
        nearest boundary where a run stops. A leap is kept short enough that its mean change
        plus three standard deviations stays within it, so boundaries are approached by exact
        steps rather than jumped over.
    """

    stoichiometry: np.ndarray
    propensities: Callable
    order: Callable
    stop: Callable
    invalid: Callable
    room: Callable


@dataclass(frozen=True)
class Outcome:
    counts: np.ndarray
    time: np.ndarray
    stopped: np.ndarray
    stop_time: np.ndarray
    finished: np.ndarray
    recorded: np.ndarray | None
    events: int
    leaps: int


def leap_size(a: np.ndarray, x: np.ndarray, V: np.ndarray, g: np.ndarray, epsilon: float) -> np.ndarray:
    """Largest leap meeting the leap condition, per row (Cao, Gillespie & Petzold 2006, eq. 33).

    ``leap_length = min_i min( max(eps x_i / g_i, 1) / |mu_i|, max(eps x_i / g_i, 1)^2 / sigma_i^2 )``
    with ``mu_i = sum_j v_ji a_j`` and ``sigma_i^2 = sum_j v_ji^2 a_j``: the expected relative
    change of every propensity over the leap is bounded by ``epsilon``.
    """
    mu = a @ V
    sigma2 = a @ (V * V)
    bound = np.maximum(epsilon * x / g, 1.0)
    with np.errstate(divide="ignore"):
        by_mean = np.where(mu != 0, bound / np.abs(mu), np.inf)
        by_spread = np.where(sigma2 > 0, bound * bound / sigma2, np.inf)
    return np.minimum(by_mean, by_spread).min(axis=1)


def boundary_leap(a: np.ndarray, V: np.ndarray, room: np.ndarray) -> np.ndarray:
    """Largest leap length ``h`` with ``|mu| h + 3 sqrt(sigma^2 h) <= room`` for the total population."""
    change = V.sum(axis=1)
    mu = np.abs(a @ change)
    sigma = np.sqrt(a @ (change * change))
    room = np.maximum(room, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        root = (-3.0 * sigma + np.sqrt(9.0 * sigma**2 + 4.0 * mu * room)) / (2.0 * mu)
        only_spread = (room / (3.0 * sigma)) ** 2
    leap_length = np.where(mu > 0, root**2, np.where(sigma > 0, only_spread, np.inf))
    return np.where(np.isnan(leap_length), np.inf, leap_length)


def run_network(
    network: Network,
    initial: np.ndarray,
    streams: Streams,
    *,
    method: str,
    t_end: float | None = None,
    times: np.ndarray | None = None,
    epsilon: float = 0.03,
    max_steps: int = 10_000_000,
) -> Outcome:
    """Simulate every replicate until it stops, reaches ``t_end``, or ``max_steps`` iterations.

    ``method="exact"`` is Gillespie's direct method (Gillespie 1977): an exponential waiting
    time with the total propensity ``a0`` and one reaction chosen with probability
    ``a_j / a0``, two uniform numbers per event. ``method="tau-leap"`` fires Poisson numbers
    ``K_j ~ Poisson(a_j h)`` of every reaction (Gillespie 2001) with the leap length ``h`` from
    :func:`leap_size` (and :func:`boundary_leap` near a stopping boundary); a replicate takes an exact step instead when fewer than
    :data:`LEAP_MIN_EVENTS` events are expected or it holds fewer than :data:`LEAP_MIN_SIZE`
    individuals, and a leap that would end in an invalid state is rejected and retried with
    half the step (Cao, Gillespie & Petzold 2006). Leaps are shortened to land exactly on
    output times and on ``t_end``.
    """
    V = network.stoichiometry
    padded, species = initial.shape
    horizon = np.inf if t_end is None else float(t_end)
    out_times = np.empty(0) if times is None else times
    k_out = out_times.size
    recorded = np.zeros((padded, k_out, species), dtype=np.int64) if times is not None else None

    counts = initial.astype(np.int64).copy()
    time = np.zeros(padded)
    stopped = network.stop(counts)
    stop_time = np.where(stopped, 0.0, np.nan)
    finished = stopped.copy()
    if recorded is not None:
        recorded[stopped] = counts[stopped][:, None, :]
    events = 0
    leaps = 0
    block = streams.block
    blocks = np.flatnonzero(~finished.reshape(-1, block).all(axis=1))
    rows = streams.rows(blocks)
    x, t, done = counts[rows], time[rows], finished[rows]
    nxt = np.zeros(rows.size, dtype=np.int64)
    cap = np.full(rows.size, np.inf)
    buffer = streams.uniforms(2)
    leaping = method == "tau-leap"

    def record(select, values, upto, inclusive):
        if recorded is None:
            return
        while True:
            pending = select & (nxt < k_out)
            t_next = out_times[np.minimum(nxt, k_out - 1)]
            pending &= (t_next <= upto) if inclusive else (t_next < upto)
            if not pending.any():
                return
            recorded[rows[pending], nxt[pending]] = values[pending]
            nxt[pending] += 1

    def settle(select):
        """Rows in ``select`` are finished: later outputs keep their final state."""
        record(select, x, np.full(rows.size, horizon), True)

    for _ in range(max_steps):
        if rows.size == 0:
            break
        record(~done, x, t, True)
        a = network.propensities(x)
        a0 = a.sum(axis=1)
        still = ~done & (a0 == 0)  # nothing can happen any more
        live = ~done & ~still
        u = buffer.draw(blocks)
        leap = np.zeros(rows.size, dtype=bool)
        if leaping:
            leap_length = np.minimum(leap_size(a, x, V, network.order(x), epsilon), cap)
            leap_length = np.minimum(leap_length, boundary_leap(a, V, network.room(x)))
            expected = np.where(live, leap_length, 0.0) * a0
            leap = live & (expected >= LEAP_MIN_EVENTS) & (x.sum(axis=1) >= LEAP_MIN_SIZE)
            t_next = np.full(rows.size, np.inf)
            pending = nxt < k_out
            t_next[pending] = out_times[nxt[pending]]
            target = np.minimum(t_next, horizon)
            landing = leap_length >= target - t
            leap_length = np.where(landing, target - t, leap_length)
        exact = live & ~leap
        # Exact steps: exponential waiting time, then one reaction (unless past the horizon).
        with np.errstate(divide="ignore"):
            wait = -np.log1p(-u[:, 0]) / np.where(exact, a0, 1.0)
        t_new = t + wait
        record(exact, x, t_new, False)
        fire = exact & (t_new <= horizon)
        if fire.any():
            a_fire = a[fire]
            cum = np.cumsum(a_fire, axis=1)
            target_a = u[fire, 1] * a0[fire]
            j = (cum <= target_a[:, None]).sum(axis=1)
            # Guard against rounding: never pick a reaction with zero propensity.
            last = a.shape[1] - 1 - np.argmax((a_fire > 0)[:, ::-1], axis=1)
            j = np.minimum(j, last)
            x[fire] += V[j]
            t[fire] = t_new[fire]
            events += int(fire.sum())
        past = exact & (t_new > horizon)
        t[past] = horizon
        # Tau-leaps.
        if leap.any():
            lam = a * np.where(leap, leap_length, 0.0)[:, None]
            fired = streams.poisson(blocks, lam)
            where = np.flatnonzero(leap)
            proposal = x[where] + fired[where] @ V
            bad = network.invalid(proposal)
            good, rejected = where[~bad], where[bad]
            x[good] = proposal[~bad]
            t[good] = np.where(landing[good], target[good], t[good] + leap_length[good])
            cap[good] = np.inf
            cap[rejected] = leap_length[rejected] / 2.0
            leaps += good.size
            events += int(fired[good].sum())
        # Who is finished now.
        newly_stopped = live & network.stop(x)
        ended = still | (live & (newly_stopped | past | (t >= horizon)))
        if newly_stopped.any():
            stop_time[rows[newly_stopped]] = t[newly_stopped]
            stopped[rows[newly_stopped]] = True
        if ended.any():
            settle(ended)
            if np.isfinite(horizon):
                t[still] = horizon
            done |= ended
            full = done.reshape(-1, block).all(axis=1)
            if full.any():
                counts[rows], time[rows], finished[rows] = x, t, done
                keep = ~np.repeat(full, block)
                blocks = blocks[~full]
                rows, x, t, done, nxt, cap = rows[keep], x[keep], t[keep], done[keep], nxt[keep], cap[keep]
    counts[rows], time[rows], finished[rows] = x, t, done
    return Outcome(counts, time, stopped, stop_time, finished, recorded, events, leaps)
