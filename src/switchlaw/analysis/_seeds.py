"""One seed per scan point and replicate, spawned from a root seed by index.

Item ``k`` of a scan (point ``i``, replicate ``r``) gets the seed sequence
``SeedSequence(root, spawn_key=(i,))`` — or ``(i, r)`` with replicates — exactly the child
that ``SeedSequence(root).spawn`` would give at that position, so the numbers a point sees do
not depend on which worker runs it, in which batch, or in what order. The 63-bit integer
drawn from that sequence is the point's seed: ``numpy.random.default_rng(seed)`` rebuilds the
generator the point used, and it fits a signed 64-bit netCDF variable.
"""

from __future__ import annotations

import numpy as np

from .._errors import InputError

#: Seeds are below this bound so that they fit an int64.
SEED_LIMIT = 2**63


def root_seed(seed) -> int:
    """A root seed: an integer in ``[0, 2**63)``."""
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)):
        raise InputError(f"`seed` must be an integer in [0, 2**63) (got {seed!r})")
    if not 0 <= int(seed) < SEED_LIMIT:
        raise InputError(f"`seed` must be an integer in [0, 2**63) (got {int(seed)})")
    return int(seed)


def item_seeds(root: int, items, replicates: int | None) -> np.ndarray:
    """The seed (int64) of each scan item; item ``k`` is point ``k // R``, replicate ``k % R``.

    Examples
    --------
    >>> import numpy as np
    >>> seeds = item_seeds(7, [0, 1, 2], None)
    >>> child = np.random.SeedSequence(7).spawn(3)[2]
    >>> int(seeds[2]) == int(child.generate_state(1, np.uint64)[0] >> np.uint64(1))
    True
    """
    out = np.empty(len(items), dtype=np.int64)
    for j, k in enumerate(items):
        k = int(k)
        key = (k,) if replicates is None else (k // replicates, k % replicates)
        state = np.random.SeedSequence(root, spawn_key=key).generate_state(1, np.uint64)[0]
        out[j] = int(state >> np.uint64(1))
    return out
