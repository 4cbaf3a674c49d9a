"""Time-stepped random-sequential sweeps of a lattice, vectorised over sites and replicates.

One sweep of duration ``dt`` gives every cell present at its start exactly one turn. The
turns are taken class by class (:attr:`Lattice.classes`), the classes in a fresh random order
for each replicate. No two sites of a class are neighbours or share a neighbour, and a turn
reads and writes only the cell's own site and its neighbours, so the turns of one class can be
taken at once: the outcome is exactly that of taking them one after another in any order.

In its turn a cell of phenotype ``x`` acts with probability ``1 - exp(-R_x dt)`` (``R_x`` its
total rate) and then does event ``e`` with probability ``r_xe / R_x``. Whether a cell acts,
and which event it picks, depend only on its own phenotype, which nothing but its own turn can
change; so both are drawn for all cells at the start of the sweep (one uniform number per
site), and only the acting cells are visited, class by class. Where a daughter or a mover goes,
and what a deciding cell senses, are read at the moment of its turn. Cells born or moved during
a sweep wait for the next one (the sites they occupy were empty when the sweep began, so they
hold no turn in it). As ``dt -> 0`` the sweeps converge to the continuous-time process
with an error of order ``R_x dt``; the ``exact`` engine has no such error.
"""

from __future__ import annotations

import numpy as np

from ._lattice import Lattice
from ._rules import Rules, event_index
from ._streams import Streams


#: Processing order of events within a class: divide, move, die, decide (so that dividers and
#: movers, which both look for a free neighbour, form one slice). Indexed by event code.
_ORDER = np.array([0, 2, 1, 3, 3])


def _labels(lattice: Lattice) -> np.ndarray:
    """Class index of every site."""
    label = np.empty(lattice.sites, dtype=np.int64)
    for k, members in enumerate(lattice.classes):
        label[members] = k
    return label


def run_sweeps(rules: Rules, lattice: Lattice, codes: np.ndarray, streams: Streams, *,
               times: np.ndarray, snap: np.ndarray, dt_max: float, upper=None):
    """Simulate every replicate, recording phenotype counts at ``times``.

    Parameters
    ----------
    codes : ndarray of int8, shape (replicates, sites)
        0 empty, ``x + 1`` a cell of phenotype ``x``.
    times : ndarray
        Output times (the last one is the end).
    snap : ndarray of bool
        At which output times to keep the layout.
    dt_max : float
        Longest sweep; each interval between output times is cut into equal sweeps no longer.
    upper : int, optional
        A replicate stops (frozen) once it holds this many cells.

    Returns
    -------
    recorded : ndarray of int, shape (replicates, k, phenotypes)
    snapshots : list of ndarray of int8, each (replicates, sites)
    turns : int
        Turns taken by cells (one per cell per sweep).
    cells : ndarray of int, cells of each replicate at the end
    """
    R, S = codes.shape
    W = S + 1
    N = lattice.size
    X = rules.phenotypes
    neighbours = lattice.neighbours
    C = len(lattice.classes)
    label = _labels(lattice)
    grid = np.zeros((R, W), dtype=np.int8)  # column S: the missing neighbour beyond a closed edge
    grid[:, :S] = codes
    flat = grid.reshape(-1)
    cells = (codes > 0).sum(axis=1).astype(np.int64)
    frozen = np.zeros(R, dtype=bool) if upper is None else cells >= upper
    recorded = np.zeros((R, times.size, X), dtype=np.int64)
    snapshots = []
    turns = 0
    draws = np.empty((R, C + S))
    drawn = draws.reshape(-1)
    neighbour_flat = neighbours.reshape(-1)
    rates = rules.rates()
    total = rates.sum(axis=1)
    share = np.divide(rates, total[:, None], out=np.zeros_like(rates), where=total[:, None] > 0)
    share = np.column_stack([share, np.zeros(X)])  # "nothing" is never picked by an acting cell
    lower = np.column_stack([np.zeros(X), np.cumsum(share, axis=1)[:, :-1]])
    last_event = np.array([int(np.flatnonzero(row > 0).max()) if (row > 0).any() else 0 for row in share])
    deciding = rules.law is not None
    closed = lattice.boundary == "closed"
    # The law read at every possible density n / S, cumulated over phenotypes (same
    # interpolation as SwitchingLaw.probs), so a decision is one table look-up.
    by_count = rules.cumulative_at(np.arange(S + 1) / S) if deciding else None

    def record(k):
        current = grid[:, :S]
        for x in range(X):
            recorded[:, k, x] = (current == x + 1).sum(axis=1)
        if snap[k]:
            snapshots.append(current.copy())

    now = 0.0
    for k, t_out in enumerate(times):
        span = t_out - now
        sweeps = int(np.ceil(span / dt_max - 1e-9)) if span > 0 else 0
        dt = span / sweeps if sweeps else 0.0
        chance = np.concatenate([[0.0], -np.expm1(-total * dt)])  # indexed by code
        top_chance = chance.max()
        for _ in range(sweeps):
            if upper is not None and (frozen | (cells == 0)).all():
                break
            streams.fill(draws)  # per replicate: C numbers for the class order, S for the turns
            order = np.argsort(draws[:, :C], axis=1)
            rank = np.empty_like(order)
            np.put_along_axis(rank, order, np.arange(C)[None, :], axis=1)
            u = draws[:, C:]
            live = ~frozen
            turns += int(cells[live].sum())
            # Candidates below the largest chance first (few), then each against its own.
            where = np.flatnonzero(u < top_chance)
            if R == 1:
                rr, ss = np.zeros(where.size, dtype=np.int64), where
            else:
                rr, ss = np.divmod(where, S)
            codes_now = flat[rr * W + ss] if R > 1 else flat[ss]
            u_now = drawn[rr * (C + S) + C + ss] if R > 1 else drawn[C + ss]
            chosen = u_now < chance[codes_now]
            if not live.all():
                chosen &= live[rr]
            rr, ss, u_now = rr[chosen], ss[chosen], u_now[chosen]
            if rr.size == 0:
                continue
            xs = codes_now[chosen].astype(np.int64) - 1
            event, inside = event_index(xs, u_now / chance[xs + 1], share, lower)
            event = _ORDER[np.minimum(event, last_event[xs])]
            # Sort the acting cells by (turn of their class, event): each piece is a slice.
            key = (rank[rr, label[ss]] * 4 + event).astype(np.int16 if 4 * C < 2**15 else np.int64)
            sequence = np.argsort(key, kind="stable")
            rr, ss, xs, inside = rr[sequence], ss[sequence], xs[sequence], inside[sequence]
            ff = rr * W + ss
            # Where each divider or mover would go does not depend on the others: pick it now.
            pick = np.minimum((inside * N).astype(np.int64), N - 1)
            target_site = neighbour_flat[ss * N + pick]
            target = rr * W + target_site
            bounds = np.concatenate([[0], np.cumsum(np.bincount(key, minlength=4 * C))])
            for slot in range(C):
                base = 4 * slot
                start_, divide_end, move_end, death_end, end_ = bounds[base:base + 5]
                if start_ == end_:
                    continue
                if upper is not None and frozen.any():
                    thawed = ~frozen[rr[start_:end_]]
                    groups = [(np.flatnonzero(thawed[a - start_:b - start_]) + a) for a, b in
                              ((start_, move_end), (move_end, death_end), (death_end, end_))]
                    spread, dying, deciding_ = groups
                    moving = spread >= divide_end
                else:
                    spread = slice(start_, move_end)
                    moving = slice(divide_end - start_, move_end - start_)
                    dying = slice(move_end, death_end)
                    deciding_ = slice(death_end, end_)
                t = target[spread]
                ok = flat[t] == 0
                if closed:
                    ok &= target_site[spread] != S
                if ok.size:
                    flat[t[ok]] = (xs[spread][ok] + 1).astype(np.int8)
                    leaving = np.zeros(ok.size, dtype=bool)
                    leaving[moving] = True
                    flat[ff[spread][ok & leaving]] = 0
                    born = ok & ~leaving
                    if born.any():
                        cells += np.bincount(rr[spread][born], minlength=R)
                r = rr[dying]
                if r.size:
                    flat[ff[dying]] = 0
                    cells -= np.bincount(r, minlength=R)
                r = rr[deciding_]
                if r.size and deciding:
                    around = (flat[r[:, None] * W + neighbours[ss[deciding_]]] != 0).sum(axis=1)
                    new = rules.decide_rows(around, by_count, cells[r], inside[deciding_])
                    flat[ff[deciding_]] = (new + 1).astype(np.int8)
                if upper is not None:
                    frozen |= cells >= upper
        now = t_out
        record(k)
    return recorded, snapshots, turns, cells
