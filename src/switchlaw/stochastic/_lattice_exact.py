"""Continuous-time lattice simulation, exact, one event per replicate per iteration.

Every cell carries a Poisson clock at the largest total rate ``R`` of any phenotype
(uniformisation): the next event of a replicate with ``n`` cells comes after an exponential
time of rate ``n R``, at a cell chosen uniformly; that cell does event ``e`` with probability
``r_xe / R`` and nothing otherwise. This is the continuous-time Markov process itself, with no
time-step error (Gillespie 1977). Replicates are simulated side by side, each with its own
stream; the cost per event does not grow with the lattice, so it suits small colonies and many
replicates (extinction curves).
"""

from __future__ import annotations

import numpy as np

from ._lattice import Lattice
from ._rules import Rules, event_index
from ._streams import Streams


def _layout(occupant: np.ndarray, phen: np.ndarray, rows: np.ndarray, S: int) -> np.ndarray:
    """Codes (0 empty, x + 1) of the given replicates."""
    slot = occupant[rows, :S]
    return np.where(slot >= 0, np.take_along_axis(phen[rows], np.maximum(slot, 0), axis=1) + 1, 0).astype(np.int8)


def run_exact(rules: Rules, lattice: Lattice, codes: np.ndarray, streams: Streams, *,
              times: np.ndarray | None, snap: np.ndarray | None, t_end: float | None, upper=None):
    """Simulate every replicate until ``t_end``, extinction, or ``upper`` cells.

    Returns
    -------
    recorded : ndarray of int, shape (replicates, k, phenotypes), or None without ``times``
    snapshots : list of ndarray of int8, each (replicates, sites)
    events : int
        Events that changed something or were attempted (divisions, deaths, moves, decisions).
    cells : ndarray of int
        Cells of each replicate at the end.
    """
    R, S = codes.shape
    W = S + 1
    X = rules.phenotypes
    neighbours = lattice.neighbours
    N = lattice.size
    total = rules.rates().sum(axis=1)
    top = float(total.max())
    probs, lower = rules.thresholds(top)
    by_count = rules.cumulative_at(np.arange(S + 1) / S) if rules.law is not None else None
    horizon = np.inf if t_end is None else float(t_end)
    capacity = S if upper is None else int(max(upper, (codes > 0).sum(axis=1).max()))

    occupant = np.full((R, W), -1, dtype=np.int32)   # slot of the cell on each site, -1 empty
    position = np.zeros((R, capacity), dtype=np.int32)
    phen = np.zeros((R, capacity), dtype=np.int8)
    rr, ss = np.nonzero(codes > 0)
    cells = np.bincount(rr, minlength=R).astype(np.int64)
    slot = np.arange(rr.size) - np.repeat(np.cumsum(cells) - cells, cells)
    occupant[rr, ss] = slot
    position[rr, slot] = ss
    phen[rr, slot] = codes[rr, ss].astype(np.int64) - 1
    per_type = np.zeros((R, X), dtype=np.int64)
    np.add.at(per_type, (rr, phen[rr, slot]), 1)
    occ_flat, pos_flat, phen_flat = occupant.reshape(-1), position.reshape(-1), phen.reshape(-1)

    k_out = 0 if times is None else times.size
    recorded = None if times is None else np.zeros((R, k_out, X), dtype=np.int64)
    snapshots = [] if times is None else [np.zeros((R, S), dtype=np.int8) for _ in range(int(snap.sum()))]
    snap_index = None if times is None else np.cumsum(snap) - 1
    nxt = np.zeros(R, dtype=np.int64)
    clock = np.zeros(R)
    events = 0

    def record(rows, upto, inclusive):
        if recorded is None:
            return
        while rows.size:
            pending = nxt[rows] < k_out
            t_next = times[np.minimum(nxt[rows], k_out - 1)]
            pending &= (t_next <= upto) if inclusive else (t_next < upto)
            rows, upto = rows[pending], upto[pending] if np.ndim(upto) else upto
            if not rows.size:
                return
            k = nxt[rows]
            recorded[rows, k] = per_type[rows]
            shot = snap[k]
            if shot.any():
                layouts = _layout(occupant, phen, rows[shot], S)
                for row, index, layout in zip(rows[shot], snap_index[k[shot]], layouts):
                    snapshots[index][row] = layout
            nxt[rows] += 1

    stopped = (cells == 0) | ((cells >= upper) if upper is not None else False)
    if top == 0:
        stopped[:] = True
    record(np.flatnonzero(stopped), horizon, True)
    active = np.flatnonzero(~stopped)
    buffer = streams.uniforms(3)
    while active.size:
        u = buffer.draw(active)
        n = cells[active]
        t_new = clock[active] - np.log1p(-u[:, 0]) / (n * top)
        record(active, t_new, False)
        fire = t_new <= horizon
        finished = active[~fire]
        clock[finished] = horizon
        rows = active[fire]
        if rows.size:
            n = n[fire]
            clock[rows] = t_new[fire]
            index = np.minimum((u[fire, 1] * n).astype(np.int64), n - 1)
            slot_at = rows * capacity + index
            site = pos_flat[slot_at]
            x = phen_flat[slot_at].astype(np.int64)
            event, inside = event_index(x, u[fire, 2], probs, lower)
            events += int((event < 4).sum())
            spread = (event == 0) | (event == 2)
            if spread.any():
                rs, xs, slots = rows[spread], x[spread], index[spread]
                j = np.minimum((inside[spread] * N).astype(np.int64), N - 1)
                target_site = neighbours[site[spread], j]
                ok = (target_site != S) & (occ_flat[rs * W + target_site] < 0)
                move = ok & (event[spread] == 2)
                if move.any():
                    r_m, t_m = rs[move], target_site[move]
                    occ_flat[r_m * W + site[spread][move]] = -1
                    occ_flat[r_m * W + t_m] = slots[move]
                    pos_flat[r_m * capacity + slots[move]] = t_m
                born = ok & (event[spread] == 0)
                if born.any():
                    r_b, t_b, x_b = rs[born], target_site[born], xs[born]
                    new_slot = cells[r_b]
                    occ_flat[r_b * W + t_b] = new_slot
                    pos_flat[r_b * capacity + new_slot] = t_b
                    phen_flat[r_b * capacity + new_slot] = x_b
                    cells[r_b] += 1
                    per_type[r_b, x_b] += 1
            dies = event == 1
            if dies.any():
                r_d, s_d, i_d, x_d = rows[dies], site[dies], index[dies], x[dies]
                last = cells[r_d] - 1
                occ_flat[r_d * W + s_d] = -1
                moved_site = pos_flat[r_d * capacity + last]
                pos_flat[r_d * capacity + i_d] = moved_site
                phen_flat[r_d * capacity + i_d] = phen_flat[r_d * capacity + last]
                relabel = i_d != last
                occ_flat[r_d[relabel] * W + moved_site[relabel]] = i_d[relabel]
                cells[r_d] -= 1
                per_type[r_d, x_d] -= 1
            switch = event == 3
            if switch.any():
                r_s, s_s, x_s = rows[switch], site[switch], x[switch]
                around = (occ_flat[r_s[:, None] * W + neighbours[s_s]] >= 0).sum(axis=1)
                new = rules.decide_rows(around, by_count, cells[r_s], inside[switch])
                phen_flat[r_s * capacity + index[switch]] = new
                per_type[r_s, x_s] -= 1
                per_type[r_s, new] += 1
        ended = (cells[active] == 0) | (clock[active] >= horizon)
        if upper is not None:
            ended |= cells[active] >= upper
        if ended.any():
            record(active[ended], horizon, True)
            active = active[~ended]
    return recorded, snapshots, events, cells
