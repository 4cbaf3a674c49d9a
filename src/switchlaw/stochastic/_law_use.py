"""Reading a :class:`~switchlaw.SwitchingLaw` inside simulators, many cells at a time."""

from __future__ import annotations

import numpy as np

from .._errors import InputError
from ..laws._law import SwitchingLaw


def check_law(law) -> SwitchingLaw:
    """A switching law whose density grid covers [0, 1] (simulated densities can be anywhere there)."""
    if not isinstance(law, SwitchingLaw):
        raise InputError(f"`law` must be a SwitchingLaw from switchlaw.derive_law (got {type(law).__name__})")
    lo, hi = float(law.densities[0]), float(law.densities[-1])
    if lo > 0.0 or hi < 1.0:
        raise InputError(
            f"`law` must be derived on densities covering [0, 1] (its grid spans [{lo:g}, {hi:g}])"
        )
    return law


def fraction_table(law: SwitchingLaw, densities: np.ndarray) -> np.ndarray:
    """``law.fractions`` at each density, shape (densities, phenotypes)."""
    return np.stack([law.fractions(float(rho)) for rho in densities])


def probs_at(law: SwitchingLaw, density: np.ndarray, state: np.ndarray) -> np.ndarray:
    """``q(. | state_i, density_i)`` for each cell ``i``, shape (cells, phenotypes).

    The same linear interpolation in density as :meth:`SwitchingLaw.probs` (exact at grid
    points), vectorised over cells.
    """
    grid = law.densities
    table = law.table
    if grid.size == 1:
        return table[0, state]
    i = np.clip(np.searchsorted(grid, density, side="right") - 1, 0, grid.size - 2)
    w = np.clip((density - grid[i]) / (grid[i + 1] - grid[i]), 0.0, 1.0)[:, None]
    return (1.0 - w) * table[i, state] + w * table[i + 1, state]


def draw_phenotype(q: np.ndarray, u: np.ndarray) -> np.ndarray:
    """Inverse-CDF draw of one phenotype per row of ``q`` with uniform numbers ``u``."""
    cum = np.cumsum(q, axis=1)
    return (cum[:, :-1] <= (u * cum[:, -1])[:, None]).sum(axis=1)
