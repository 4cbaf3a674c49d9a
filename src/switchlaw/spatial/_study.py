"""One call for a study's front section: runs at a few betas and a speed scan over beta.

The keyword names are the keys a ``[front]`` study-file section would carry, so a parsed
section can be passed as ``front_study(model, **section)``.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from .._errors import InputError
from .._validate import as_array
from ._front import simulate_front
from ._results import KINDS, FrontRun


@dataclass(frozen=True, repr=False)
class FrontScan:
    """Front speed against beta (scalars only, no profiles).

    Attributes
    ----------
    betas, speeds, linear_speeds, widths : ndarray, shape (k,)
        Beta (nats per payoff unit), fitted and linear speeds (length per unit time),
        infiltration widths (length).
    kinds, statuses : tuple of str
    """

    betas: np.ndarray
    speeds: np.ndarray
    linear_speeds: np.ndarray
    widths: np.ndarray
    kinds: tuple
    statuses: tuple

    def to_xarray(self):
        import xarray as xr

        return xr.Dataset(
            {
                "front_speed": ("beta", self.speeds, {"units": "length per unit time"}),
                "linear_speed": ("beta", self.linear_speeds, {"units": "length per unit time"}),
                "infiltration_width": ("beta", self.widths, {"units": "length"}),
                "front_kind": ("beta", np.array(self.kinds, dtype=object)),
                "front_status": ("beta", np.array(self.statuses, dtype=object)),
            },
            coords={"beta": self.betas},
        )

    def __repr__(self) -> str:
        counts = ", ".join(f"{k} {self.kinds.count(k)}" for k in KINDS if k in self.kinds)
        return f"FrontScan({self.betas.size} betas {self.betas[0]:g}..{self.betas[-1]:g}: {counts})"


@dataclass(frozen=True, repr=False)
class FrontStudy:
    """Front runs at chosen betas and, optionally, a speed scan (see :func:`front_study`)."""

    runs: tuple
    scan: FrontScan | None

    def summary(self) -> dict:
        """Plain numbers and names for a JSON summary (one entry per run, and the scan)."""
        def number(value):
            return None if not np.isfinite(value) else float(value)

        out = {"runs": [
            {
                "beta": r.beta, "speed": number(r.speed), "linear_speed": number(r.linear_speed),
                "decay_rate": number(r.decay_rate), "kind": r.kind, "width": number(r.width),
                "edge_fractions": dict(zip(r.phenotypes, map(number, r.edge_fractions))),
                "bulk_fractions": dict(zip(r.phenotypes, map(number, r.bulk_fractions))),
                "bulk_density": number(r.bulk_density), "status": r.status, "message": r.message,
                "note": r.note,
            }
            for r in self.runs
        ]}
        if self.scan is not None:
            out["scan"] = {
                "beta": self.scan.betas.tolist(), "speed": [number(v) for v in self.scan.speeds],
                "linear_speed": [number(v) for v in self.scan.linear_speeds],
                "width": [number(v) for v in self.scan.widths],
                "kind": list(self.scan.kinds), "status": list(self.scan.statuses),
            }
        return out

    def __repr__(self) -> str:
        return f"FrontStudy({len(self.runs)} runs; {self.scan!r})"


def _scan_betas(scan) -> np.ndarray:
    if isinstance(scan, Mapping):
        unknown = sorted(set(scan) - {"start", "stop", "points"})
        if unknown or not {"start", "stop", "points"} <= set(scan):
            raise InputError(f"`front.scan` must have keys start, stop, points (got {sorted(scan)})")
        points = scan["points"]
        if isinstance(points, bool) or not isinstance(points, (int, np.integer)) or points < 2:
            raise InputError(f"`front.scan.points` must be an integer >= 2 (got {points!r})")
        return np.linspace(float(scan["start"]), float(scan["stop"]), int(points))
    return as_array(scan, "front.scan", ndim=1)


def front_study(model, *, diffusion, length, dx, t_end, betas, scan=None, dimension: int = 1,
                frames: int = 201) -> FrontStudy:
    """Front runs of ``model`` at each of ``betas`` and, if ``scan`` is given, speed against beta.

    Parameters
    ----------
    model : MeanField
    diffusion, length, dx, t_end, dimension, frames :
        As in :func:`switchlaw.simulate_front`.
    betas : sequence of float
        Betas whose full runs (profiles, positions) are kept.
    scan : mapping with ``start``, ``stop``, ``points``, or a sequence of betas, optional
        Betas of a speed scan (only speeds, widths and kinds are kept).

    Returns
    -------
    FrontStudy
    """
    chosen = as_array(betas, "front.betas", ndim=1)
    if chosen.size == 0:
        raise InputError("`front.betas` must list at least one beta")
    options = dict(diffusion=diffusion, length=length, dx=dx, t_end=t_end, dimension=dimension, frames=frames)
    runs = tuple(simulate_front(model, b, **options) for b in chosen)
    found = None
    if scan is not None:
        grid = _scan_betas(scan)
        points: list[FrontRun] = [simulate_front(model, b, **options) for b in grid]
        found = FrontScan(
            betas=grid, speeds=np.array([p.speed for p in points]),
            linear_speeds=np.array([p.linear_speed for p in points]),
            widths=np.array([p.width for p in points]), kinds=tuple(p.kind for p in points),
            statuses=tuple(p.status for p in points),
        )
    return FrontStudy(runs, found)
