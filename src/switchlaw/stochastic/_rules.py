"""What a lattice cell does: its event rates and how it decides its phenotype."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from .._errors import InputError
from ..laws._law import SwitchingLaw
from ._law_use import draw_phenotype, probs_at

#: Order of events in the tables below; index 4 is "nothing happens".
EVENTS = ("divide", "die", "move", "switch")


@dataclass(frozen=True)
class Rules:
    """Per-phenotype rates (per cell per unit time) and the decision rule.

    ``switch_rate`` is ``1 / tau`` (0 without a law). A cell deciding senses ``y``, its number
    of occupied neighbour sites (or ``sense(y)``), and adopts ``x`` with probability
    ``q(x | y, rho)`` at the current global density ``rho``.
    """

    division: np.ndarray
    death: np.ndarray
    motility: np.ndarray
    switch_rate: float
    law: SwitchingLaw | None
    sense: Callable | None

    @property
    def phenotypes(self) -> int:
        return self.division.size

    def rates(self) -> np.ndarray:
        """``[phenotype, event]`` rates in the order of :data:`EVENTS`."""
        switching = np.full(self.phenotypes, self.switch_rate)
        return np.column_stack([self.division, self.death, self.motility, switching])

    def thresholds(self, top: float) -> tuple[np.ndarray, np.ndarray]:
        """Event probabilities per clock tick and their cumulative lower edges, each (phenotypes, 5).

        Uniformisation at the largest total rate ``top``: event ``e`` with probability
        ``r_xe / top``; the last column is "nothing happens".
        """
        rates = self.rates()
        probs = rates / top if top > 0 else np.zeros_like(rates)
        probs = np.column_stack([probs, np.clip(1.0 - probs.sum(axis=1), 0.0, None)])
        lower = np.column_stack([np.zeros(self.phenotypes), np.cumsum(probs, axis=1)[:, :-1]])
        return probs, lower

    def states(self, counts: np.ndarray) -> np.ndarray:
        """The law's state index for each occupied-neighbour count."""
        if self.sense is None:
            return counts
        states = np.asarray(self.sense(counts.copy()))
        m = self.law.states.size
        if states.shape != counts.shape or not np.issubdtype(states.dtype, np.integer):
            raise InputError(
                f"`sense` must return one integer state per cell (got {states.dtype} of shape {states.shape})"
            )
        if states.size and (states.min() < 0 or states.max() >= m):
            bad = int(states[(states < 0) | (states >= m)][0])
            raise InputError(f"`sense` must return states in 0..{m - 1} (got {bad})")
        return states

    def decide(self, counts: np.ndarray, density: np.ndarray, u: np.ndarray) -> np.ndarray:
        """New phenotype of each deciding cell, from uniform numbers ``u``."""
        q = probs_at(self.law, density, self.states(counts))
        return draw_phenotype(q, u)

    def cumulative_at(self, density: np.ndarray) -> np.ndarray:
        """Cumulative law ``sum_{x' <= x} q(x' | y, rho)`` at each density, shape (densities, states, phenotypes).

        The same interpolation in density as :meth:`SwitchingLaw.probs`.
        """
        law = self.law
        grid, table = law.densities, law.table
        if grid.size == 1:
            return np.broadcast_to(np.cumsum(table[0], axis=1), (density.size, *table.shape[1:]))
        i = np.clip(np.searchsorted(grid, density, side="right") - 1, 0, grid.size - 2)
        w = np.clip((density - grid[i]) / (grid[i + 1] - grid[i]), 0.0, 1.0)[:, None, None]
        return np.cumsum((1.0 - w) * table[i] + w * table[i + 1], axis=2)

    def decision_columns(self, density: np.ndarray) -> np.ndarray:
        """:meth:`cumulative_at` laid out for look-ups: shape (phenotypes, densities * states), entry
        ``[x, i * states + y]`` the cumulative law of ``x`` at density ``i`` and state ``y``."""
        cumulative = self.cumulative_at(density)
        return np.ascontiguousarray(np.moveaxis(cumulative, 2, 0).reshape(cumulative.shape[2], -1))

    def decide_columns(self, counts: np.ndarray, columns: np.ndarray, rows: np.ndarray, u: np.ndarray) -> np.ndarray:
        """:meth:`decide_rows` with the table from :meth:`decision_columns` (the same numbers)."""
        at = rows * self.law.states.size + self.states(counts)
        threshold = u * columns[-1].take(at)
        new = np.zeros(u.shape, dtype=np.int64)
        for column in columns[:-1]:
            new += column.take(at) <= threshold
        return new

    def decide_rows(self, counts: np.ndarray, cumulative: np.ndarray, rows: np.ndarray, u: np.ndarray) -> np.ndarray:
        """Like :meth:`decide`, with the cumulative law precomputed: ``cumulative[rows[i]]`` is
        the table for cell ``i`` (see :meth:`cumulative_at`)."""
        cum = cumulative[rows, self.states(counts)]
        threshold = u * cum[:, -1]
        new = np.zeros(u.shape, dtype=np.int64)
        for column in cum[:, :-1].T:  # count the cumulative values <= u * total, column by column
            new += column <= threshold
        return new


def event_index(x: np.ndarray, u: np.ndarray, probs: np.ndarray, lower: np.ndarray):
    """Event of each acting cell and where ``u`` falls inside that event's interval (in [0, 1)).

    The second value is a fresh uniform number given the event (used to pick a neighbour or a
    phenotype), so one draw serves both.
    """
    # The number of interval edges at or below u, all edges of a cell's row at once.
    event = (lower[:, 1:].take(x, axis=0) <= u[:, None]).sum(axis=1)
    at = 5 * x + event
    width = probs.reshape(-1).take(at)
    inside = np.divide(u - lower.reshape(-1).take(at), width, out=np.zeros_like(u), where=width > 0)
    np.maximum(inside, 0.0, out=inside)
    return event, np.minimum(inside, np.nextafter(1.0, 0.0), out=inside)
