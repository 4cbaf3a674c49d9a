"""A 2-D lattice of sites: neighbourhoods, boundaries, and conflict-free classes of sites."""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from .._errors import InputError
from .._validate import as_nonnegative, choice
from ._checks import as_count, as_replicates, as_seed
from ._streams import Streams

NEIGHBOURHOODS = ("von-neumann", "moore", "hexagonal")
BOUNDARIES = ("periodic", "closed")

_SQUARE = {
    "von-neumann": [(-1, 0), (1, 0), (0, -1), (0, 1)],
    "moore": [(-1, -1), (-1, 0), (-1, 1), (0, -1), (0, 1), (1, -1), (1, 0), (1, 1)],
}
# Hexagonal lattice stored in offset rows: odd rows sit half a site to the right.
_HEX_EVEN = [(0, -1), (0, 1), (-1, -1), (-1, 0), (1, -1), (1, 0)]
_HEX_ODD = [(0, -1), (0, 1), (-1, 0), (-1, 1), (1, 0), (1, 1)]


@dataclass(frozen=True, repr=False)
class Lattice:
    """Sites on a ``rows x columns`` grid, with a neighbourhood and a boundary.

    Parameters
    ----------
    shape : (int, int)
        Rows and columns, each >= 3.
    neighbourhood : {"von-neumann", "moore", "hexagonal"}
        4, 8 or 6 neighbours. The hexagonal lattice is stored in offset rows: odd rows sit half
        a site to the right, so site ``(r, c)`` lies at ``x = c + (r mod 2) / 2``,
        ``y = r sqrt(3) / 2``; with a periodic boundary the number of rows must be even.
    boundary : {"periodic", "closed"}
        Periodic wraps around (a torus). Closed: sites beyond the edge do not exist; they are
        never occupied, and a cell trying to move or divide across the edge stays put.

    Attributes
    ----------
    sites : int
    size : int
        Neighbours per site (4, 8 or 6).
    neighbours : ndarray of int, shape (sites, size)
        Index of each neighbour; ``sites`` (one past the last site) marks a missing neighbour
        at a closed edge.
    coordinates : ndarray, shape (sites, 2)
        Cartesian ``(x, y)`` of each site, unit spacing between neighbours (diagonal Moore
        neighbours are ``sqrt(2)`` apart).
    classes : tuple of ndarray
        A partition of the sites into classes in which no two sites share a neighbour or are
        neighbours (graph distance >= 3), so the sites of a class can be updated at once.
    """

    shape: tuple
    neighbourhood: str = "von-neumann"
    boundary: str = "periodic"

    def __post_init__(self):
        try:
            rows, columns = self.shape
        except (TypeError, ValueError):
            raise InputError(f"`shape` must be (rows, columns) (got {self.shape!r})") from None
        rows = as_count(rows, "shape[0]", minimum=3)
        columns = as_count(columns, "shape[1]", minimum=3)
        choice(self.neighbourhood, "neighbourhood", NEIGHBOURHOODS)
        choice(self.boundary, "boundary", BOUNDARIES)
        if self.neighbourhood == "hexagonal" and self.boundary == "periodic" and rows % 2:
            raise InputError(f"`shape` must have an even number of rows for a periodic hexagonal lattice (got {rows})")
        object.__setattr__(self, "shape", (rows, columns))

    @property
    def sites(self) -> int:
        return self.shape[0] * self.shape[1]

    @property
    def size(self) -> int:
        return {"von-neumann": 4, "moore": 8, "hexagonal": 6}[self.neighbourhood]

    @cached_property
    def neighbours(self) -> np.ndarray:
        rows, columns = self.shape
        r, c = np.divmod(np.arange(self.sites), columns)
        if self.neighbourhood == "hexagonal":
            offsets = np.where((r % 2 == 0)[:, None, None], np.array(_HEX_EVEN)[None], np.array(_HEX_ODD)[None])
        else:
            offsets = np.broadcast_to(np.array(_SQUARE[self.neighbourhood])[None], (self.sites, self.size, 2))
        nr = r[:, None] + offsets[..., 0]
        nc = c[:, None] + offsets[..., 1]
        if self.boundary == "periodic":
            return (nr % rows) * columns + (nc % columns)
        inside = (nr >= 0) & (nr < rows) & (nc >= 0) & (nc < columns)
        return np.where(inside, nr * columns + nc, self.sites)

    @cached_property
    def coordinates(self) -> np.ndarray:
        r, c = np.divmod(np.arange(self.sites), self.shape[1])
        if self.neighbourhood == "hexagonal":
            return np.column_stack([c + 0.5 * (r % 2), r * math.sqrt(3.0) / 2.0])
        return np.column_stack([c, r]).astype(float)

    @property
    def period(self) -> tuple | None:
        """Cartesian periods ``(x, y)`` of a periodic lattice (``None`` when closed)."""
        if self.boundary != "periodic":
            return None
        rows, columns = self.shape
        dy = math.sqrt(3.0) / 2.0 if self.neighbourhood == "hexagonal" else 1.0
        return (float(columns), rows * dy)

    def _within_two(self) -> np.ndarray:
        """For each site, the sites at graph distance 1 or 2 (``sites`` pads missing ones)."""
        table = np.vstack([self.neighbours, np.full((1, self.size), self.sites)])
        second = table[self.neighbours].reshape(self.sites, -1)
        ring = np.hstack([self.neighbours, second])
        return np.where(ring == np.arange(self.sites)[:, None], self.sites, ring)

    @cached_property
    def classes(self) -> tuple:
        ring = self._within_two()
        best = None
        for colour in self._patterns():
            colour = _repair(colour, ring, self.sites)
            if best is None or colour.max() < best.max():
                best = colour
        return tuple(np.flatnonzero(best == k) for k in np.unique(best))

    def _patterns(self) -> list:
        """Periodic colourings in which sites of one colour are >= 3 apart in the bulk.

        ``3 (r mod 3) + (c mod 3)`` (9 colours) works for every neighbourhood. Von Neumann also
        has the 5-colouring ``(r + 2c) mod 5`` and the hexagonal lattice the 7-colouring
        ``(q + 3r) mod 7`` in axial coordinates ``q = c - floor(r / 2)``: their closed
        neighbourhoods tile the plane (perfect codes), so fewer, larger classes.
        """
        r, c = np.divmod(np.arange(self.sites), self.shape[1])
        patterns = [3 * (r % 3) + (c % 3)]
        if self.neighbourhood == "von-neumann":
            patterns.append((r + 2 * c) % 5)
        elif self.neighbourhood == "hexagonal":
            patterns.append((c - r // 2 + 3 * r) % 7)
        return patterns

    # ------------------------------------------------------------ layouts
    def colony(self, size) -> np.ndarray:
        """A compact colony of ``size`` cells around the centre, as a boolean ``(rows, columns)`` layout.

        Sites are taken in order of Cartesian distance from the centre of the lattice (ties in
        index order), so colonies of increasing size are nested.
        """
        size = as_count(size, "size", minimum=1)
        if size > self.sites:
            raise InputError(
                f"`size` must be at most the number of sites ({self.sites} on a "
                f"{self.shape[0]} x {self.shape[1]} lattice) (got {size}): the lattice is too small for the colony"
            )
        xy = self.coordinates
        centre = (xy.min(axis=0) + xy.max(axis=0)) / 2.0
        distance = np.round(((xy - centre) ** 2).sum(axis=1), 9)
        chosen = np.argsort(distance, kind="stable")[:size]
        layout = np.zeros(self.sites, dtype=bool)
        layout[chosen] = True
        return layout.reshape(self.shape)

    def scatter(self, density, *, seed, replicates=1) -> np.ndarray:
        """``round(density * sites)`` cells placed uniformly at random, shape (replicates, rows, columns).

        Every set of that many sites is equally likely (so the number of occupied neighbours of
        a cell is hypergeometric). Each replicate has its own stream.
        """
        rho = as_nonnegative(density, "density")
        if rho > 1:
            raise InputError(f"`density` must be in [0, 1] (got {rho!r})")
        cells = int(round(rho * self.sites))
        replicates = as_replicates(replicates)
        streams = Streams(as_seed(seed), replicates)
        layout = np.zeros((replicates, self.sites), dtype=bool)
        for k, generator in enumerate(streams.generators):
            layout[k, generator.permutation(self.sites)[:cells]] = True
        return layout.reshape(replicates, *self.shape)

    def occupied_neighbours(self, layout) -> np.ndarray:
        """Occupied neighbour sites of every site of ``layout`` (``(rows, columns)`` or a stack)."""
        occupied = np.asarray(layout) != 0
        flat = occupied.reshape(-1, self.sites)
        padded = np.hstack([flat, np.zeros((flat.shape[0], 1), dtype=bool)])
        counts = padded[:, self.neighbours].sum(axis=2)
        return counts.reshape(occupied.shape)

    def displacement(self, start: np.ndarray, end: np.ndarray) -> np.ndarray:
        """Cartesian displacement between sites (nearest periodic image on a periodic lattice)."""
        delta = self.coordinates[np.asarray(end)] - self.coordinates[np.asarray(start)]
        if self.period is not None:
            period = np.array(self.period)
            delta = delta - period * np.round(delta / period)
        return delta

    def __repr__(self) -> str:
        return f"Lattice({self.shape[0]} x {self.shape[1]}, {self.neighbourhood}, {self.boundary})"


def _repair(colour: np.ndarray, ring: np.ndarray, sites: int) -> np.ndarray:
    """Recolour, greedily, every site that shares a colour with a site within distance 2.

    Clashes arise only at the seams of a periodic lattice whose sides are not multiples of the
    pattern's period. A recoloured site takes the smallest colour absent from its distance-2
    ring, so no clash remains.
    """
    colour = colour.copy()
    padded = np.append(colour, -1)
    clash = (padded[ring] == colour[:, None]).any(axis=1)
    for s in np.flatnonzero(clash):
        near = set(padded[ring[s]].tolist())
        if colour[s] in near:
            colour[s] = next(k for k in range(len(near) + 1) if k not in near)
            padded[s] = colour[s]
    if (padded[ring] == colour[:, None]).any():  # cannot happen: each recoloured site avoids its ring
        raise RuntimeError("conflict-free colouring of the lattice failed")
    return colour
