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
site, of which only those below the largest chance to act are generated, see
:class:`_SweepDraws`), and only the acting cells are visited, class by class, each class's
acting cells sorted into contiguous slices by event. Where a daughter or a mover goes,
and what a deciding cell senses, are read at the moment of its turn. Cells born or moved during
a sweep wait for the next one (the sites they occupy were empty when the sweep began, so they
hold no turn in it). As ``dt -> 0`` the sweeps converge to the continuous-time process
with an error of order ``R_x dt``; the ``exact`` engine has no such error.
"""

from __future__ import annotations

import math

import numpy as np

from ._lattice import Lattice
from ._rules import Rules, event_index
from ._streams import Streams


#: Sites (replicates x lattice sites) up to which the classes of a sweep are resolved at once
#: (:func:`_resolve_sweep`: a fixed number of numpy passes per sweep, which pays where the
#: passes of the class-by-class loop are short); larger problems go class by class, which
#: moves less memory. Measured at 64 x 64 (benchmarks/bench_stochastic.py): at once is faster
#: up to about 4 replicates, class by class from about 16.
_AT_ONCE_SITES = 16_384
#: Sweeps whose random numbers are drawn at once for a single lattice resolved at once (more
#: replicates gain nothing measurable from it), and the most uniform numbers such a batch may
#: hold (512 kB, so that it stays in cache).
_BATCH = 32
_BATCH_NUMBERS = 65_536

#: Processing order of events within a class: divide, move, die, decide (so that dividers and
#: movers, which both look for a free neighbour, form one slice). Indexed by event code.
_ORDER = np.array([0, 2, 1, 3, 3])


def _labels(lattice: Lattice) -> np.ndarray:
    """Class index of every site."""
    label = np.empty(lattice.sites, dtype=np.int64)
    for k, members in enumerate(lattice.classes):
        label[members] = k
    return label


class _SweepDraws:
    """One sweep's random numbers, replicate by replicate from its own stream.

    Each replicate needs ``C`` uniforms that order the classes and, for every site, a uniform
    ``u`` for its turn, of which only those below ``top`` (the largest chance to act) matter.
    Instead of ``S`` uniforms, draw the gaps between those candidate sites: in a row of
    independent trials of success probability ``top`` the gaps are geometric,
    ``G = 1 + floor(log(1 - V) / log(1 - top))`` for ``V`` uniform, and a candidate's ``u`` is
    ``top`` times a fresh uniform (Devroye 1986, ch. II.2 and X.2). The same joint law as
    ``S`` uniforms, with about ``2 S top`` numbers per sweep.

    References
    ----------
    L. Devroye, *Non-Uniform Random Variate Generation*, Springer (1986).
    """

    def __init__(self, streams: Streams, replicates: int, classes: int, sites: int, top: float, *, width=None):
        mean = sites * top
        # Gaps drawn at once: the mean number of candidates plus 5 standard deviations; a
        # replicate that needs more continues its run of gaps (:meth:`_extend`).
        if width is None:
            width = min(sites + 1, int(math.ceil(mean + 5.0 * math.sqrt(mean * (1.0 - top)) + 8)))
        self.width = int(width)
        self.streams, self.classes, self.sites, self.top = streams, classes, sites, top
        self.scale = 1.0 / math.log1p(-top) if top < 1.0 else 0.0
        self.store = np.empty((replicates, classes + 2 * self.width))
        self.rank = np.zeros((replicates, classes), dtype=np.int64)
        self.steps = np.arange(self.width)

    def sweep(self, active: np.ndarray):
        """Class ranks ``(replicates, C)`` and the candidates ``(replicate, site, u)`` of the
        replicates in blocks with an ``active`` row; other rows draw nothing."""
        streams, C, w, S = self.streams, self.classes, self.width, self.sites
        block = streams.block
        blocks = np.flatnonzero(active.reshape(-1, block).any(axis=1))
        for b in blocks.tolist():
            streams.generators[b].random(out=self.store[b * block:(b + 1) * block])
        rows = None if blocks.size == streams.blocks else streams.rows(blocks)
        part = self.store if rows is None else self.store[rows]
        # The turn of each class: the inverse of the permutation that sorts its uniforms.
        rank = np.argsort(np.argsort(part[:, :C], axis=1), axis=1)
        if rows is None:
            self.rank = rank
        else:
            self.rank[rows] = rank
        gap = np.log1p(-part[:, C:C + w])
        gap *= self.scale
        np.minimum(gap, S, out=gap)  # any gap past the lattice is as good as another
        position = gap.astype(np.int64)  # floor of a number >= 0
        np.cumsum(position, axis=1, out=position)
        position += self.steps  # the gaps are floor(...) + 1; sites count from 0
        at = np.flatnonzero(position < S)
        ss = position.reshape(-1).take(at)
        ri = at // w
        # ``u`` of candidate (ri, ci) sits at column C + w + ci of row ri of ``part``.
        u = part.reshape(-1).take(at + ri * (C + w) + (C + w))
        u *= self.top
        rr = ri if rows is None else rows[ri]
        short = np.flatnonzero(position[:, -1] < S - 1)
        if short.size:
            owners = (short if rows is None else rows[short]).tolist()
            extra = [self._extend(r, float(position[k, -1])) for r, k in zip(owners, short.tolist())]
            rr = np.concatenate([rr] + [np.full(e[0].size, r) for r, e in zip(owners, extra)])
            ss = np.concatenate([ss] + [e[0] for e in extra])
            u = np.concatenate([u] + [e[1] for e in extra])
        return self.rank, rr, ss, u

    def batch(self, active: np.ndarray, count: int) -> list:
        """The draws of ``count`` sweeps at once: exactly what ``count`` calls of :meth:`sweep`
        with these ``active`` rows return, as a list.

        Every block with an ``active`` row draws ``count`` sweeps' uniforms from its own stream
        in one call, in the order the single sweeps would, and the ranks, gaps and candidates
        of all of them are formed together. If a row's run of gaps stops short of the last
        site (rare: the width covers 5 standard deviations), its continuation would come from
        the stream in between two sweeps; then the streams are rewound and the sweeps drawn one
        by one. (Rows that die out within the batch keep their draws; the caller finds no cell
        there, as it would find none in later sweeps.)
        """
        streams, C, w, S = self.streams, self.classes, self.width, self.sites
        block, wide = streams.block, C + 2 * w
        blocks = np.flatnonzero(active.reshape(-1, block).any(axis=1))
        saved = [streams.generators[b].bit_generator.state for b in blocks.tolist()]
        rows = streams.rows(blocks)
        part = np.empty((rows.size, count, wide))
        for i, b in enumerate(blocks.tolist()):
            part[i * block:(i + 1) * block] = streams.generators[b].random((count, block, wide)).transpose(1, 0, 2)
        gap = np.log1p(-part[:, :, C:C + w])
        gap *= self.scale
        np.minimum(gap, S, out=gap)
        position = gap.astype(np.int64)
        np.cumsum(position, axis=2, out=position)
        position += self.steps
        if (position[:, :, -1] < S - 1).any():
            for b, state in zip(blocks.tolist(), saved):
                streams.generators[b].bit_generator.state = state
            return [tuple(x.copy() for x in self.sweep(active)) for _ in range(count)]
        ranks = np.zeros((self.rank.shape[0], count, C), dtype=np.int64)
        ranks[rows] = np.argsort(np.argsort(part[:, :, :C], axis=2), axis=2)
        at = np.flatnonzero(position < S)
        ss = position.reshape(-1).take(at)
        rk = at // w  # (row, sweep) pair, row-major
        u = part.reshape(-1).take(at + rk * (C + w) + (C + w))
        u *= self.top
        kk = rk % count
        rr = rows[rk // count]
        order = np.argsort(kk, kind="stable")
        rr, ss, u = rr.take(order), ss.take(order), u.take(order)
        bounds = [0] + np.cumsum(np.bincount(kk, minlength=count)).tolist()
        return [(ranks[:, k], rr[bounds[k]:bounds[k + 1]], ss[bounds[k]:bounds[k + 1]], u[bounds[k]:bounds[k + 1]])
                for k in range(count)]

    def _extend(self, row: int, last: float):
        """Candidates of ``row`` beyond site ``last``: more gaps from the row's own stream."""
        generator = self.streams.generators[row // self.streams.block]
        sites, us = [], []
        while last < self.sites - 1:
            more = generator.random((2, self.width))
            position = last + np.cumsum(np.floor(np.minimum(np.log1p(-more[0]) * self.scale, self.sites)) + 1.0)
            keep = position < self.sites
            sites.append(position[keep].astype(np.int64))
            us.append(more[1][keep] * self.top)
            last = float(position[-1])
        return np.concatenate(sites), np.concatenate(us)


def run_sweeps(rules: Rules, lattice: Lattice, codes: np.ndarray, streams: Streams, *,
               times: np.ndarray, snap: np.ndarray, dt_max: float, upper=None, by_class: bool = False):
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
        A replicate stops (frozen) once it holds this many cells (checked after every class,
        so the classes are taken one after another).
    by_class : bool
        Take the classes one after another even on a small problem (the same outcome as
        resolving all classes of a sweep at once with :func:`_resolve_sweep`, which is the
        default up to :data:`_AT_ONCE_SITES` sites without ``upper``).

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
    neighbour_flat = neighbours.reshape(-1)
    across = np.ascontiguousarray(neighbours.T)  # (directions, sites)
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
    by_count = rules.decision_columns(np.arange(S + 1) / S) if deciding else None

    def record(k):
        current = grid[:, :S]
        for x in range(X):
            recorded[:, k, x] = (current == x + 1).sum(axis=1)
        if snap[k]:
            snapshots.append(current.copy())

    # Per-site marks of the at-once resolution (:func:`_resolve_sweep`): when the site is vacated
    # and when it is filled, as a class turn; C means never. Reset after every sweep.
    at_once = upper is None and not by_class and R * S <= _AT_ONCE_SITES
    marks = np.full((2, R * W), C, dtype=np.int64) if at_once else None
    now = 0.0
    for k, t_out in enumerate(times):
        span = t_out - now
        sweeps = int(np.ceil(span / dt_max - 1e-9)) if span > 0 else 0
        dt = span / sweeps if sweeps else 0.0
        chance = np.concatenate([[0.0], -np.expm1(-total * dt)])  # indexed by code
        top_chance = float(chance.max())
        draws = _SweepDraws(streams, R, C, S, top_chance) if sweeps and top_chance > 0 else None
        pending = []
        for done in range(sweeps):
            if upper is not None and (frozen | (cells == 0)).all():
                break
            live = None if upper is None else ~frozen
            turns += int(cells.sum() if live is None else cells[live].sum())
            if draws is None:
                continue
            # Candidates: the turns whose uniform falls below the largest chance (few); then
            # each is held against its own cell's chance.
            if R > 1 or marks is None:  # one lattice: several sweeps' draws at once
                rank, rr, ss, u_now = draws.sweep(cells > 0 if live is None else live & (cells > 0))
            else:
                if not pending:  # the next few sweeps' draws at once (see _SweepDraws.batch)
                    count = max(1, min(_BATCH, sweeps - done, _BATCH_NUMBERS // (R * (C + 2 * draws.width))))
                    pending = draws.batch(cells > 0, count)[::-1]
                rank, rr, ss, u_now = pending.pop()
            codes_now = flat[rr * W + ss] if R > 1 else flat[ss]
            chosen = u_now < chance[codes_now]
            if live is not None and not live.all():
                chosen &= live[rr]
            acting = np.flatnonzero(chosen)
            if acting.size == 0:
                continue
            rr, ss, u_now = rr.take(acting), ss.take(acting), u_now.take(acting)
            xs = codes_now.take(acting).astype(np.int64) - 1
            event, inside = event_index(xs, u_now / chance[xs + 1], share, lower)
            event = _ORDER[np.minimum(event, last_event[xs])]
            if at_once:
                # No replicate can freeze inside the sweep: resolve every class at once.
                turn = rank[0].take(label.take(ss)) if R == 1 else rank[rr, label[ss]]
                _resolve_sweep(flat, cells, rr, ss, xs, event, inside, turn, C, W, N, S,
                               neighbour_flat=neighbour_flat, across=across, closed=closed,
                               rules=rules if deciding else None, by_count=by_count, marks=marks)
                continue
            # Sort the acting cells by (turn of their class, event): each piece is a slice.
            key = (rank[rr, label[ss]] * 4 + event).astype(np.int16 if 4 * C < 2**15 else np.int64)
            sequence = np.argsort(key, kind="stable")
            rr, ss, xs, inside = rr.take(sequence), ss.take(sequence), xs.take(sequence), inside.take(sequence)
            ff = rr * W + ss
            # Where each divider or mover would go does not depend on the others: pick it now.
            pick = np.minimum((inside * N).astype(np.int64), N - 1)
            target_site = neighbour_flat[ss * N + pick]
            target = rr * W + target_site
            bounds = [0] + np.cumsum(np.bincount(key, minlength=4 * C)).tolist()
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
                    # Occupied neighbours, one neighbour direction (a contiguous row) at a time.
                    seen = flat.take(across.take(ss[deciding_], axis=1) + r * W) != 0
                    around = seen.sum(axis=0)
                    new = rules.decide_columns(around, by_count, cells[r], inside[deciding_])
                    flat[ff[deciding_]] = (new + 1).astype(np.int8)
                if upper is not None:
                    frozen |= cells >= upper
        now = t_out
        record(k)
    return recorded, snapshots, turns, cells


def _resolve_sweep(flat, cells, rr, ss, xs, event, inside, turn, C, W, N, S, *, neighbour_flat, across,
                   closed, rules, by_count, marks):
    """Apply one sweep's acting cells, every class at once, with the outcome of taking the
    classes one after another in the order ``turn``.

    Only three things couple cells of different classes, and each is a function of earlier
    turns alone: a divider or mover succeeds if its target is free at its turn (the target was
    empty at the start or was vacated earlier, by a death or a successful move, and no earlier
    spreader claimed it since; within one class no two cells share a site or a neighbour); a
    decider counts its occupied neighbours at its turn; and it reads the number of cells after
    its own class's births and deaths (as the class-by-class loop does). Successes are found by
    fixed-point iteration: after ``k`` rounds every spreader of the first ``k`` turns is right
    (its success depends only on movers of earlier turns), so at most ``C`` rounds, usually two
    or three, reach the unique fixed point. Then the grid is written once.

    ``flat`` (the grid, ``replicates * W``) and ``cells`` are updated in place; ``marks`` is a
    ``(2, replicates * W)`` scratch of vacate / fill turns, ``C`` everywhere on entry and exit.
    """
    # Sort the acting cells by event once: dividers, movers, deaths, decisions are slices.
    order = np.argsort(event, kind="stable")
    rr, ss, xs, inside, turn = rr.take(order), ss.take(order), xs.take(order), inside.take(order), turn.take(order)
    bounds = np.cumsum(np.bincount(event, minlength=4)).tolist()
    divide_end, move_end, death_end = bounds[0], bounds[1], bounds[2]
    home = rr * W + ss if cells.size > 1 else ss
    vacated, filled = marks
    sp = slice(0, move_end)
    sp_home, sp_turn = home[sp], turn[sp]
    pick = np.minimum((inside[sp] * N).astype(np.int64), N - 1)
    pick += ss[sp] * N
    target_site = neighbour_flat.take(pick)
    target = rr[sp] * W + target_site if cells.size > 1 else target_site
    free_at_start = flat.take(target) == 0
    if closed:  # beyond a closed edge (column S, always 0) is never free
        possible = target_site != S
        free_at_start &= possible
    else:
        possible = True
    die_home, die_turn = home[move_end:death_end], turn[move_end:death_end]
    vacated[die_home] = die_turn
    mover_home, mover_turn = home[divide_end:move_end], turn[divide_end:move_end]
    # Does any spreader aim at a mover's home? If not, movers' successes matter to no one and
    # one round is exact; otherwise iterate to the fixed point.
    filled[mover_home] = -1
    rounds = C + 1 if mover_home.size and (filled.take(target) < 0).any() else 1
    filled[mover_home] = C
    ok = np.zeros(move_end, dtype=bool)
    for _ in range(rounds):
        if rounds > 1:
            vacated[mover_home] = np.where(ok[divide_end:], mover_turn, C)
        # Free at its turn: empty at the start, or vacated by an earlier turn.
        free = free_at_start | (possible & (vacated.take(target) < sp_turn))
        claim = target[free]
        np.minimum.at(filled, claim, sp_turn[free])
        new = free & (filled.take(target) == sp_turn)
        filled[claim] = C
        if rounds == 1 or np.array_equal(new, ok):
            ok = new
            break
        ok = new
    else:  # pragma: no cover - the iteration is exact after C rounds (see above)
        raise RuntimeError("sweep resolution did not settle")
    moved = ok[divide_end:]
    vacated[mover_home] = np.where(moved, mover_turn, C)
    target_ok = target[ok]
    filled[target_ok] = sp_turn[ok]
    # Cells after each class: births minus deaths, by replicate and turn, cumulated over turns.
    R = cells.size
    born = ok[:divide_end]
    change = (np.bincount(rr[:divide_end][born] * C + turn[:divide_end][born], minlength=R * C)
              - np.bincount(rr[move_end:death_end] * C + die_turn, minlength=R * C)).reshape(R, C)
    new_codes = None
    if death_end < turn.size and rules is not None:
        dec = slice(death_end, None)
        dr, dturn = rr[dec], turn[dec]
        after = cells.take(dr) + np.cumsum(change, axis=1)[dr, dturn]
        around_sites = across.take(ss[dec], axis=1)  # (directions, deciders)
        if R > 1:
            around_sites += dr * W
        occupied = ((flat.take(around_sites) != 0) & (vacated.take(around_sites) > dturn)) | (
            filled.take(around_sites) < dturn)
        new_codes = rules.decide_columns(occupied.sum(axis=0), by_count, after, inside[dec]) + 1
    cells += change.sum(axis=1)
    # Write the grid: first every site vacated, then every site filled, then every decision.
    flat[die_home] = 0
    flat[mover_home[moved]] = 0
    flat[target_ok] = (xs[sp][ok] + 1).astype(np.int8)
    if new_codes is not None:
        flat[home[death_end:]] = new_codes.astype(np.int8)
    vacated[die_home] = C
    vacated[mover_home] = C
    filled[target_ok] = C
