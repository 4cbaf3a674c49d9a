"""Frozen result objects of the spatial stage."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: What a front does over the late window of a run.
KINDS = ("pulled", "pushed", "stalled", "retreating")


def _fractions(names, values) -> str:
    return ", ".join(f"{n} {v:.3f}" for n, v in zip(names, values))


@dataclass(frozen=True, repr=False)
class SpreadingSpeed:
    """Linear spreading speed of a law-governed population (see :func:`spreading_speed`).

    Attributes
    ----------
    speed : float
        ``c* = min_l s(l) / l`` (length per unit time); ``nan`` when zero density is stable.
    decay_rate : float
        ``lambda*``, the minimiser (per unit length): the leading edge decays as ``exp(-lambda* x)``.
    edge_fractions : ndarray, shape (phenotypes,)
        Phenotype fractions at the leading edge (principal eigenvector at ``lambda*``).
    low_density_growth : float
        ``s(0)``, growth rate of a rare, well-mixed population (per unit time).
    diffusion : ndarray, shape (phenotypes,)
    phenotypes : tuple of str
    beta : float
    linear_determinacy : bool
        Whether the checked sufficient conditions for a pulled front hold (see ``note``).
    note : str
        Why linear determinacy is not guaranteed (empty when it is).
    status, message : str
        ``"ok"`` or ``"stable-zero"`` (no linear speed).
    """

    speed: float
    decay_rate: float
    edge_fractions: np.ndarray
    low_density_growth: float
    diffusion: np.ndarray
    phenotypes: tuple
    beta: float
    linear_determinacy: bool
    note: str
    status: str
    message: str

    def __repr__(self) -> str:
        head = (f"SpreadingSpeed(c*={self.speed:.6g}, lambda*={self.decay_rate:.6g}, edge: "
                f"{_fractions(self.phenotypes, self.edge_fractions)}")
        return head + (f"; {self.note})" if self.note else ")")


@dataclass(frozen=True, repr=False)
class FrontRun:
    """An invasion front computed by :func:`simulate_front`.

    Attributes
    ----------
    times : ndarray, shape (k,)
    x : ndarray, shape (cells,)
        Cell centres (distance from the seeded end or the centre, length units).
    profiles : ndarray, shape (k, cells, phenotypes)
        Density of each phenotype (fraction of carrying capacity 1).
    positions : ndarray, shape (k,)
        Where the total density crosses ``level`` x bulk (interpolated); ``nan`` where it does not.
    speed : float
        Asymptotic front speed from the late window (length per unit time): for a pulled front
        the fit of ``X(t) = c t - k log t + a`` with the Ebert–van Saarloos ``k``; otherwise
        the slope of a straight-line fit (``plain_speed``).
    plain_speed : float
        Slope of a straight line through the late positions.
    linear_speed, decay_rate : float
        ``c*`` and ``lambda*`` of :func:`spreading_speed` (``nan`` when zero is stable).
    grid_linear_speed : float
        ``c*`` of the discretised equation (the grid's own pulled speed).
    kind : str
        One of :data:`KINDS`.
    width : float
        Infiltration width: distance between the 0.1 and 0.5 x bulk crossings at the last
        usable time (length units).
    edge_fractions, bulk_fractions : ndarray, shape (phenotypes,)
        Phenotype fractions where the total density is ``edge_level`` x bulk, and behind the front.
    bulk_density : float
    phenotypes : tuple of str
    dimension : int
        1 (line), 2 (radially symmetric disc) or 3 (ball).
    window : tuple of float
        Times over which the speed was fitted.
    boundary_time : float
        First saved time at which the far boundary felt the front (``nan`` if never).
    status : str
        ``"ok"``, ``"boundary"`` (the far boundary was reached; speed from earlier times),
        ``"coarse"`` (the front core spans too few cells), ``"short"`` (too few positions to fit),
        ``"unsettled"`` (a pulled front whose fitted speed is still more than 2% from the grid's
        ``c*``: its transient has not decayed),
        ``"failed"`` (the integrator failed).
    message : str
    ok : bool
        ``status == "ok"``.
    note : str
        Linear-determinacy note of :func:`spreading_speed`.
    """

    times: np.ndarray
    x: np.ndarray
    profiles: np.ndarray
    positions: np.ndarray
    speed: float
    plain_speed: float
    linear_speed: float
    decay_rate: float
    grid_linear_speed: float
    kind: str
    width: float
    edge_fractions: np.ndarray
    bulk_fractions: np.ndarray
    bulk_density: float
    phenotypes: tuple
    dimension: int
    beta: float
    window: tuple
    boundary_time: float
    status: str
    message: str
    note: str = ""

    @property
    def ok(self) -> bool:
        return self.status == "ok"

    @property
    def density(self) -> np.ndarray:
        """Total density, shape (k, cells)."""
        return self.profiles.sum(axis=2)

    def to_xarray(self):
        """The profiles and positions as an ``xarray.Dataset`` (dims ``time``, ``x``, ``phenotype``)."""
        import xarray as xr

        coords = {"time": self.times, "x": self.x, "phenotype": list(self.phenotypes)}
        data = xr.Dataset(
            {
                "density": (("time", "x", "phenotype"), self.profiles,
                            {"long_name": "phenotype density", "units": "fraction of carrying capacity"}),
                "position": (("time",), self.positions, {"long_name": "front position", "units": "length"}),
            },
            coords=coords,
        )
        data.attrs.update(
            speed=self.speed, linear_speed=self.linear_speed, kind=self.kind, width=self.width,
            beta=self.beta, dimension=self.dimension, status=self.status, message=self.message,
        )
        return data

    def __repr__(self) -> str:
        return (
            f"FrontRun({self.kind}, speed {self.speed:.5g} vs c* {self.linear_speed:.5g}, width "
            f"{self.width:.4g}, edge: {_fractions(self.phenotypes, self.edge_fractions)}; "
            f"{'ok' if self.ok else self.status + ': ' + self.message})"
        )
