"""What a scan runs over: a full factorial grid or a design, flattened into numbered items.

Item ``k`` is point ``k // R`` and replicate ``k % R`` (``R = 1`` without replicates); points of
a factorial grid are numbered in C order over the grid's dimensions, in the grid's key order.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from .._errors import InputError
from ._designs import Design, check_name


def _axis(values, name: str) -> np.ndarray:
    """One grid axis: a non-empty 1-D array of numbers, booleans or text, without repeats."""
    try:
        axis = np.asarray(values)
    except (TypeError, ValueError):
        raise InputError(f"`grid[{name!r}]` must be a 1-D array (got {values!r:.60})") from None
    if axis.ndim != 1:
        raise InputError(f"`grid[{name!r}]` must be a 1-D array (got shape {axis.shape})")
    if axis.size == 0:
        raise InputError(f"`grid[{name!r}]` must not be empty (got no values)")
    if axis.dtype.kind not in "biufU":
        raise InputError(
            f"`grid[{name!r}]` must hold numbers, booleans or text (got dtype {axis.dtype})"
        )
    if axis.dtype.kind == "f":
        axis = axis.astype(np.float64)
        if not np.isfinite(axis).all():
            raise InputError(f"`grid[{name!r}]` must be finite (got {axis[~np.isfinite(axis)][0]!r})")
    elif axis.dtype.kind in "iu":
        axis = axis.astype(np.int64)
    if np.unique(axis).size != axis.size:
        raise InputError(f"`grid[{name!r}]` must not repeat a value (got {axis.tolist()!r:.80})")
    return axis


def _digest(array: np.ndarray) -> str:
    data = json.dumps(array.tolist()).encode() if array.dtype.kind == "U" else np.ascontiguousarray(array).tobytes()
    return hashlib.sha256(array.dtype.str.encode() + b"|" + data).hexdigest()[:16]


@dataclass(frozen=True, eq=False)
class Plan:
    """The flattened scan: names, shape, coordinates and how to find item ``k``'s point."""

    names: tuple
    dims: tuple
    shape: tuple
    axes: tuple          # per name: 1-D grid axis, or the design's column
    kind: str            # "grid" or the design's kind
    base_samples: int
    replicates: int | None

    @property
    def points(self) -> int:
        return int(np.prod(self.shape))

    @property
    def items(self) -> int:
        return self.points * (self.replicates or 1)

    def point(self, item: int) -> dict:
        """``{name: value}`` (plain Python scalars) of the point item ``item`` belongs to."""
        i = item // (self.replicates or 1)
        if self.kind == "grid":
            where = np.unravel_index(i, self.shape)
            return {n: a[j].item() for n, a, j in zip(self.names, self.axes, where)}
        return {n: a[i].item() for n, a in zip(self.names, self.axes)}

    def fingerprint(self) -> dict:
        """What identifies the work (for checkpoints): names, values, design, replicates."""
        return {
            "design": self.kind,
            "base_samples": self.base_samples,
            "replicates": self.replicates,
            "parameters": [
                {"name": n, "size": int(a.size), "dtype": a.dtype.str, "first": a[0].item(),
                 "last": a[-1].item(), "sha256": _digest(a)}
                for n, a in zip(self.names, self.axes)
            ],
        }


def make_plan(grid, replicates=None) -> Plan:
    """Validate a grid (``name -> 1-D array``) or a :class:`Design` into a :class:`Plan`."""
    if replicates is not None:
        if isinstance(replicates, bool) or not isinstance(replicates, (int, np.integer)) or replicates < 1:
            raise InputError(f"`replicates` must be a positive integer or None (got {replicates!r})")
        replicates = int(replicates)
    if isinstance(grid, Design):
        axes = tuple(grid.values[:, j] for j in range(len(grid.names)))
        return Plan(grid.names, ("point",), (len(grid),), axes, grid.kind, grid.base_samples, replicates)
    if not isinstance(grid, Mapping):
        raise InputError(
            "`grid` must map parameter names to 1-D arrays, or be a Design "
            f"(got {type(grid).__name__})"
        )
    if not grid:
        raise InputError("`grid` must name at least one parameter (got an empty mapping)")
    names = tuple(check_name(name, "`grid` parameter") for name in grid)
    axes = tuple(_axis(values, name) for name, values in grid.items())
    return Plan(names, names, tuple(a.size for a in axes), axes, "grid", 0, replicates)
