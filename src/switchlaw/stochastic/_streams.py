"""Reproducible random streams for replicates that are simulated side by side.

Replicates are grouped in blocks of ``block`` consecutive replicates; each block has its own
``numpy.random.Generator`` spawned from the seed (``SeedSequence.spawn``), and every draw for a
block depends only on that block's own history. So replicate ``i`` gives the same numbers
whether it runs alone or with many others (blocks are padded to full size; the padding is
simulated and discarded).
"""

from __future__ import annotations

import math

import numpy as np

#: Iterations of uniform numbers drawn at once per block.
CHUNK = 128


class Streams:
    """One generator per block of replicates.

    Parameters
    ----------
    seed : numpy.random.SeedSequence
    replicates : int
    block : int
        Replicates per block (the last block is padded).
    key : tuple of int
        Extra spawn key, e.g. the initial size of one point of an extinction curve, so that
        each point's numbers do not depend on which other points were asked for.
    """

    def __init__(self, seed: np.random.SeedSequence, replicates: int, *, block: int = 1, key=()):
        root = np.random.SeedSequence(seed.entropy, spawn_key=tuple(seed.spawn_key) + tuple(key))
        self.block = int(block)
        self.replicates = int(replicates)
        self.blocks = math.ceil(replicates / self.block)
        self.padded = self.blocks * self.block
        self.generators = [np.random.Generator(np.random.PCG64(s)) for s in root.spawn(self.blocks)]

    def rows(self, blocks: np.ndarray) -> np.ndarray:
        """Replicate indices of the given blocks, block after block."""
        return (np.asarray(blocks)[:, None] * self.block + np.arange(self.block)[None, :]).ravel()

    def random(self, blocks, tail=()) -> np.ndarray:
        """Uniform numbers in [0, 1), shape ``(len(blocks) * block, *tail)``."""
        parts = [self.generators[b].random((self.block, *tail)) for b in blocks]
        return np.concatenate(parts) if parts else np.empty((0, *tail))

    def random_counts(self, counts: np.ndarray, blocks=None) -> np.ndarray:
        """``counts[i]`` uniform numbers from block ``blocks[i]``'s stream (default ``i``), concatenated."""
        blocks = range(len(counts)) if blocks is None else blocks
        parts = [self.generators[b].random(int(c)) for b, c in zip(blocks, counts) if c]
        return np.concatenate(parts) if parts else np.empty(0)

    def fill(self, out: np.ndarray) -> np.ndarray:
        """Fill ``out`` (rows = all padded replicates) with uniform numbers, block by block."""
        for b, generator in enumerate(self.generators):
            generator.random(out=out[b * self.block:(b + 1) * self.block])
        return out

    def poisson(self, blocks, lam: np.ndarray) -> np.ndarray:
        """Poisson numbers with means ``lam`` (rows grouped by block, as :meth:`rows`)."""
        out = np.zeros(lam.shape, dtype=np.int64)
        for k, b in enumerate(blocks):
            part = lam[k * self.block:(k + 1) * self.block]
            if part.any():
                out[k * self.block:(k + 1) * self.block] = self.generators[b].poisson(part)
        return out

    def uniforms(self, width: int) -> "UniformBuffer":
        """A buffer handing out ``width`` uniforms per replicate per iteration."""
        return UniformBuffer(self, width)


class UniformBuffer:
    """Uniform numbers drawn :data:`CHUNK` iterations at a time per block.

    Every active block consumes the same number of draws per iteration, so pre-drawing keeps
    each block's numbers a function of its own history.
    """

    def __init__(self, streams: Streams, width: int):
        self.streams = streams
        self.width = width
        self.store = np.empty((streams.blocks, CHUNK, streams.block, width))
        self.position = CHUNK

    def draw(self, blocks: np.ndarray) -> np.ndarray:
        if self.position == CHUNK:
            for b in blocks:
                self.store[b] = self.streams.generators[b].random((CHUNK, self.streams.block, self.width))
            self.position = 0
        out = self.store[blocks, self.position].reshape(-1, self.width)
        self.position += 1
        return out
