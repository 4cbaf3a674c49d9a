"""A reaction–diffusion system built from a :class:`~switchlaw.MeanField` model.

The law's phenotype fractions ``f_x(rho)`` are derived once per beta on a grid of densities and
interpolated by shape-preserving cubic Hermite polynomials (PCHIP, Fritsch & Carlson 1980), so
the method of lines evaluates the law at thousands of cells per step without re-solving the
decision problem; the interpolant's derivative gives the exact Jacobian of the interpolated
model.

Finite ``tau`` (one field per phenotype, per-phenotype diffusion ``D_x``)::

    u_x,t = D_x Lap u_x + a_x(rho) u_x + (rho f_x(rho) - u_x) / tau,   rho = sum_x u_x

Fast switching (``tau=None``; one field, flux the gradient of ``D(rho) rho``)::

    rho_t = Lap(D(rho) rho) + rho g(rho),   D(rho) = sum_x f_x(rho) D_x,   g = sum_x f_x a_x
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from .._errors import InputError
from .._validate import as_array
from ..laws._law import decision_problem
from ._core import System

#: Densities at which the law is derived for a spatial run (common practice, no source: the
#: interpolation error of PCHIP on a 257-point grid is far below the integrator tolerance for
#: laws that are smooth between kinks).
TABLE_POINTS = 257


def check_model(model) -> None:
    """``model`` must be a :class:`~switchlaw.MeanField`."""
    from ..population._mean_field import MeanField

    if not isinstance(model, MeanField):
        raise InputError(f"`model` must be a MeanField (got {type(model).__name__})")


def phenotype_names(model) -> list[str]:
    """The model's phenotype names (from its payoff at zero density)."""
    if model.phenotypes is not None:
        return [str(p) for p in model.phenotypes]
    _, _, names = decision_problem(model.payoff, model.environment, 0.0, None)
    return [str(n) for n in names]


def as_diffusion(value, names: list[str]) -> np.ndarray:
    """Diffusion coefficients in phenotype order from a sequence or a name -> value mapping."""
    if isinstance(value, Mapping):
        unknown = sorted(set(map(str, value)) - set(names))
        if unknown:
            raise InputError(f"`diffusion` names unknown phenotype(s) {unknown}; phenotypes are {names}")
        missing = [n for n in names if n not in map(str, value)]
        if missing:
            raise InputError(f"`diffusion` must give a coefficient for every phenotype; missing {missing}")
        lookup = {str(k): v for k, v in value.items()}
        value = [lookup[n] for n in names]
    coefficients = as_array(value, "diffusion", ndim=1)
    if coefficients.size != len(names):
        raise InputError(
            f"`diffusion` must have one coefficient per phenotype ({len(names)}: {names}) (got {coefficients.size})"
        )
    if (coefficients < 0).any():
        i = int(np.argmax(coefficients < 0))
        raise InputError(f"`diffusion` coefficients must be >= 0; {names[i]!r} has {float(coefficients[i])!r}")
    if not (coefficients > 0).any():
        raise InputError("`diffusion` must be positive for at least one phenotype (nothing moves otherwise)")
    return coefficients


@dataclass(frozen=True)
class LawTable:
    """``f_x(rho)`` of one model at one beta on ``[0, 1]``, with its derivative."""

    densities: np.ndarray
    fractions: np.ndarray  # (points, phenotypes)

    @classmethod
    def of(cls, model, beta: float, points: int = TABLE_POINTS) -> "LawTable":
        grid = np.linspace(0.0, 1.0, points)
        return cls(grid, np.asarray(model.fractions(grid, beta), dtype=float))  # one vector call

    def __post_init__(self):
        # The interpolant is a pure function of the two arrays above, fixed at construction.
        from scipy.interpolate import PchipInterpolator

        spline = PchipInterpolator(self.densities, self.fractions, axis=0, extrapolate=False)
        object.__setattr__(self, "_spline", (spline, spline.derivative()))

    def __call__(self, rho: np.ndarray, slopes: bool = True) -> tuple[np.ndarray, np.ndarray | None]:
        """Fractions and (unless ``slopes=False``) their slopes at densities ``rho`` (clipped to [0, 1])."""
        spline = self._spline
        inside = np.clip(rho, 0.0, 1.0)
        if not slopes:
            return spline[0](inside), None
        slope = spline[1](inside)
        slope[(rho <= 0.0) | (rho >= 1.0)] = 0.0
        return spline[0](inside), slope


def mean_field_system(model, table: LawTable, diffusion: np.ndarray) -> System:
    """The reaction–diffusion :class:`System` of ``model`` with the law ``table``."""
    b, d, c = model.division, model.death, model.crowding
    rate_slope = -(b + c)

    def net(rho):
        return b * (1.0 - rho[:, None]) - d - c * rho[:, None]

    if model.tau is None:
        def reaction(u):
            rho = u[:, 0]
            f, _ = table(rho, slopes=False)
            return (rho * np.einsum("ix,ix->i", f, net(rho)))[:, None]

        def jacobian(u):
            rho = u[:, 0]
            f, slope = table(rho)
            g = np.einsum("ix,ix->i", f, net(rho))
            g_slope = np.einsum("ix,ix->i", slope, net(rho)) + f @ rate_slope
            return (g + rho * g_slope)[:, None, None]

        def potential(rho):
            f, _ = table(rho, slopes=False)
            return rho * (f @ diffusion)

        def potential_slope(rho):
            f, slope = table(rho)
            return f @ diffusion + rho * (slope @ diffusion)

        return System(reaction, jacobian, np.array([1.0]), potential, potential_slope)

    rate = 1.0 / model.tau
    m = b.size
    eye = np.eye(m)

    def reaction(u):
        rho = u.sum(axis=1)
        f, _ = table(rho, slopes=False)
        return net(rho) * u + (rho[:, None] * f - u) * rate

    def jacobian(u):
        rho = u.sum(axis=1)
        f, slope = table(rho)
        jac = (net(rho) - rate)[:, :, None] * eye
        column = u * rate_slope + (f + rho[:, None] * slope) * rate  # d/d rho, same for every y
        return jac + column[:, :, None]

    return System(reaction, jacobian, np.asarray(diffusion, float))
