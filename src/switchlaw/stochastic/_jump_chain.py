"""Exact hitting simulation of a one-type birth–death chain through its embedded jump chain."""

from __future__ import annotations

import numpy as np

from ._streams import Streams


def jump_chain(p_up: np.ndarray, start: int, upper: int, streams: Streams, max_steps: int):
    """Run the jump chain of every replicate until it hits 0 or ``upper``.

    From state ``n`` the chain steps up with probability ``p_up[n] = birth(n) / (birth(n) +
    death(n))`` and down otherwise; this is exactly the sequence of states an SSA run visits
    (Gillespie 1977), and the waiting times between jumps do not affect which end is hit first.
    All replicates step together; one uniform number per replicate per step.

    Returns
    -------
    hit_zero : ndarray of bool, shape (padded replicates,)
    finished : ndarray of bool
    jumps : ndarray of int
        Jumps made by each replicate.
    """
    padded = streams.padded
    state = np.full(padded, start, dtype=np.int64)
    jumps = np.zeros(padded, dtype=np.int64)
    finished = (state == 0) | (state == upper)
    if finished.all():
        return state == 0, finished, jumps
    block = streams.block
    buffer = streams.uniforms(1)
    blocks = np.flatnonzero(~finished.reshape(-1, block).all(axis=1))
    rows = streams.rows(blocks)
    n = state[rows]
    done = finished[rows]
    made = np.zeros(rows.size, dtype=np.int64)
    for _ in range(max_steps):
        u = buffer.draw(blocks)[:, 0]
        step = np.where(u < p_up[n], 1, -1)
        step[done] = 0
        n += step
        made += ~done
        done = (n == 0) | (n == upper)
        full = done.reshape(-1, block).all(axis=1)
        if full.any():
            state[rows], jumps[rows], finished[rows] = n, made, done
            keep = ~np.repeat(full, block)
            blocks, rows, n, done, made = blocks[~full], rows[keep], n[keep], done[keep], made[keep]
            if blocks.size == 0:
                break
    state[rows], jumps[rows], finished[rows] = n, made, done
    return (state == 0) & finished, finished, jumps
