"""Observed phenotype data in the forms the fit accepts, turned into count arrays.

Forms (see :func:`switchlaw.calibrate`):

- per-cell counts ``[state, phenotype]`` (one condition) or ``[density, state, phenotype]``;
- counts of phenotypes only, ``[density, phenotype]`` (needs ``densities``);
- labelled snapshots (:class:`Snapshot`): 0 empty, ``k`` the k-th phenotype, counted as
  (occupied neighbours, phenotype) with the lattice engine's neighbourhoods and edges;
- a tidy table (pandas DataFrame or CSV path) with columns ``phenotype``, optional ``count``,
  ``state`` or ``signal``, and/or ``density``.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

import numpy as np

from .._errors import InputError

#: Columns a tidy table may have.
COLUMNS = ("phenotype", "count", "state", "signal", "density")


@dataclass(frozen=True)
class Snapshot:
    """A labelled lattice snapshot: a segmented image or the layout of a lattice run.

    Parameters
    ----------
    labels : array_like of int, shape (rows, columns)
        0 for an empty site, ``k >= 1`` for a cell of the k-th phenotype (1-based, in the
        order of the payoff's phenotypes).
    neighbourhood : {"von-neumann", "moore", "hexagonal"}
        As in :class:`switchlaw.Lattice` (hexagonal in offset rows, odd rows half a site right).
    boundary : {"periodic", "closed"}
        As in :class:`switchlaw.Lattice`: closed edges have no sites beyond them, so a cell
        on the edge has fewer possible neighbours.

    Notes
    -----
    The fit counts, for every cell, its phenotype and its number of occupied neighbours; the
    snapshot's density is the fraction of occupied sites.
    """

    labels: np.ndarray
    neighbourhood: str = "von-neumann"
    boundary: str = "periodic"

    def counts(self, phenotypes: int) -> tuple[np.ndarray, float]:
        """``(counts[occupied neighbours, phenotype], density)`` of this snapshot."""
        from ..stochastic._lattice import Lattice

        raw = np.asarray(self.labels)
        if raw.ndim != 2:
            raise InputError(f"`labels` of a snapshot must be a 2-D array (got shape {raw.shape})")
        if not np.issubdtype(raw.dtype, np.number) or not np.isfinite(raw).all() or (raw != np.round(raw)).any():
            raise InputError("`labels` of a snapshot must be integers (0 empty, k the k-th phenotype)")
        labels = raw.astype(int)
        if (labels < 0).any() or (labels > phenotypes).any():
            bad = int(labels[(labels < 0) | (labels > phenotypes)][0])
            raise InputError(
                f"`labels` of a snapshot must lie in 0..{phenotypes} (the payoff has {phenotypes} "
                f"phenotypes) (got {bad})"
            )
        lattice = Lattice(labels.shape, self.neighbourhood, self.boundary)
        neighbours = lattice.occupied_neighbours(labels)
        cells = labels > 0
        counts = np.zeros((lattice.size + 1, phenotypes))
        np.add.at(counts, (neighbours[cells], labels[cells] - 1), 1.0)
        return counts, float(cells.mean())


@dataclass(frozen=True)
class Data:
    """Counts ready for the likelihood.

    ``kind`` is ``"states"`` (``counts[k, state, phenotype]``) or ``"fractions"``
    (``counts[k, phenotype]``); ``densities`` has one entry per condition or is ``None``.
    """

    kind: str
    counts: np.ndarray
    densities: np.ndarray | None


def _counts(value, name: str) -> np.ndarray:
    try:
        array = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(f"`{name}` must be an array of counts (got {type(value).__name__})") from None
    if array.size == 0:
        raise InputError(f"`{name}` must not be empty (got shape {array.shape})")
    if np.isnan(array).any():
        where = tuple(int(i) for i in np.argwhere(np.isnan(array))[0])
        raise InputError(f"`{name}` must not contain NaN (entry {where})")
    if not np.isfinite(array).all():
        raise InputError(f"`{name}` must be finite counts (got an infinite entry)")
    if (array < 0).any():
        where = tuple(int(i) for i in np.argwhere(array < 0)[0])
        raise InputError(f"`{name}` must be non-negative counts; entry {where} is {array[where]}")
    if (array != np.round(array)).any():
        where = tuple(int(i) for i in np.argwhere(array != np.round(array))[0])
        raise InputError(f"`{name}` must be whole-number counts; entry {where} is {array[where]}")
    if array.sum() == 0:
        raise InputError(f"`{name}` must contain at least one cell (all counts are zero)")
    return array


def _densities(value, k: int) -> np.ndarray:
    try:
        grid = np.atleast_1d(np.asarray(value, dtype=np.float64))
    except (TypeError, ValueError):
        raise InputError(f"`densities` must be numbers in [0, 1] (got {value!r})") from None
    if grid.ndim != 1 or grid.size != k:
        raise InputError(f"`densities` must give one density per condition ({k}) (got shape {grid.shape})")
    if not np.isfinite(grid).all() or (grid < 0).any() or (grid > 1).any():
        raise InputError(f"`densities` must be numbers in [0, 1] (got {grid.tolist()})")
    return grid


def from_arrays(observations, densities, *, states: int, phenotypes: int) -> Data:
    """Per-cell or phenotype-only count arrays (see the module notes)."""
    counts = _counts(observations, "observations")
    if counts.ndim == 2 and densities is None:
        data = Data("states", counts[None], None)
    elif counts.ndim == 2:
        data = Data("fractions", counts, _densities(densities, counts.shape[0]))
    elif counts.ndim == 3:
        if densities is None:
            raise InputError("`densities` must be given for [density, state, phenotype] counts")
        data = Data("states", counts, _densities(densities, counts.shape[0]))
    else:
        raise InputError(
            "`observations` must be counts [state, phenotype], [density, state, phenotype] or "
            f"[density, phenotype] (got shape {counts.shape})"
        )
    if data.counts.shape[-1] != phenotypes:
        raise InputError(
            f"`observations` must have one column per phenotype ({phenotypes}) "
            f"(got {data.counts.shape[-1]})"
        )
    if data.kind == "states" and data.counts.shape[1] != states:
        raise InputError(
            f"`observations` must have one row per environment state ({states}) "
            f"(got {data.counts.shape[1]})"
        )
    return data


def from_snapshots(snapshots, densities, *, states: int, phenotypes: int) -> Data:
    """Counts of (occupied neighbours, phenotype) from one or more :class:`Snapshot`."""
    snapshots = [snapshots] if isinstance(snapshots, Snapshot) else list(snapshots)
    tables, measured = zip(*(s.counts(phenotypes) for s in snapshots))
    counts = np.stack(tables)
    if counts.shape[1] != states:
        raise InputError(
            f"`environment` must have one state per occupied-neighbour count 0..{counts.shape[1] - 1} "
            f"of the snapshot's neighbourhood (got {states} states)"
        )
    grid = np.array(measured) if densities is None else _densities(densities, len(snapshots))
    if counts.sum() == 0:
        raise InputError("`observations` must contain at least one cell (every snapshot is empty)")
    return Data("states", counts, grid)


def is_table(observations) -> bool:
    """Whether ``observations`` is a tidy table (a DataFrame or a path to a CSV file)."""
    if isinstance(observations, (str, os.PathLike)):
        return True
    return type(observations).__module__.startswith("pandas") and hasattr(observations, "columns")


def from_table(table, *, environment_at, phenotype_names, densities) -> Data:
    """Counts from a tidy table; ``environment_at(rho)`` gives the environment at a density."""
    import pandas as pd

    if isinstance(table, (str, os.PathLike)):
        if not os.path.isfile(table):
            raise InputError(f"`observations` names no readable file (got {str(table)!r})")
        try:
            frame = pd.read_csv(table)
        except (ValueError, pd.errors.ParserError) as error:
            raise InputError(f"`observations` is not a readable CSV table: {str(error).splitlines()[0]}") from None
    else:
        frame = table
    columns = [str(c) for c in frame.columns]
    unknown = [c for c in columns if c not in COLUMNS]
    if unknown:
        raise InputError(f"column {unknown[0]!r} is not one of {list(COLUMNS)}")
    if "phenotype" not in columns:
        raise InputError("column 'phenotype' is missing from the table")
    if "state" in columns and "signal" in columns:
        raise InputError("columns 'state' and 'signal' exclude each other: give one")
    names = [str(v) for v in frame["phenotype"]]
    index = {name: i for i, name in enumerate(phenotype_names)}
    bad = [name for name in names if name not in index]
    if bad:
        raise InputError(f"column 'phenotype' names unknown phenotype {bad[0]!r} (known: {list(phenotype_names)})")
    x = np.array([index[name] for name in names], dtype=int)
    if "count" in columns:
        count = _counts(pd.to_numeric(frame["count"], errors="coerce").to_numpy(dtype=float), "count")
    else:
        count = np.ones(x.size)
    if "density" in columns:
        rho = pd.to_numeric(frame["density"], errors="coerce").to_numpy(dtype=float)
        if not np.isfinite(rho).all() or (rho < 0).any() or (rho > 1).any():
            raise InputError("column 'density' must hold numbers in [0, 1]")
        grid, condition = np.unique(rho, return_inverse=True)
    else:
        if densities is not None:
            raise InputError("`densities` must not be given with a table: put them in a 'density' column")
        grid, condition = None, np.zeros(x.size, dtype=int)
    k = 1 if grid is None else grid.size
    n = len(phenotype_names)
    if "state" not in columns and "signal" not in columns:
        if grid is None:
            raise InputError("the table needs a 'state', 'signal' or 'density' column")
        counts = np.zeros((k, n))
        np.add.at(counts, (condition, x), count)
        return Data("fractions", _counts(counts, "count"), grid)
    envs = [environment_at(None if grid is None else float(rho)) for rho in (grid if grid is not None else [None])]
    m = envs[0].hidden_probs.size
    counts = np.zeros((k, m, n))
    if "state" in columns:
        state = pd.to_numeric(frame["state"], errors="coerce").to_numpy(dtype=float)
        labels = np.asarray(envs[0].states, dtype=float)
        if envs[0].channel is not None:
            labels = np.arange(m, dtype=float)
        lookup = {float(v): i for i, v in enumerate(labels)}
        missing = [s for s in state if float(s) not in lookup]
        if missing:
            raise InputError(f"column 'state' holds {float(missing[0])!r}, not a state of the environment {labels.tolist()}")
        y = np.array([lookup[float(s)] for s in state], dtype=int)
    else:
        signal = pd.to_numeric(frame["signal"], errors="coerce").to_numpy(dtype=float)
        if not np.isfinite(signal).all():
            raise InputError("column 'signal' must hold finite numbers")
        edges = envs[0].edges
        if edges is None:
            raise InputError("column 'signal' needs an environment with bins (continuous_signal or empirical)")
        outside = (signal < edges[0]) | (signal > edges[-1])
        if outside.any():
            raise InputError(
                f"column 'signal' holds {float(signal[outside][0])!r}, outside every bin "
                f"[{edges[0]:g}, {edges[-1]:g}] of the environment"
            )
        y = np.clip(np.searchsorted(edges, signal, side="right") - 1, 0, edges.size - 2)
    np.add.at(counts, (condition, y, x), count)
    return Data("states", _counts(counts, "count"), grid)
