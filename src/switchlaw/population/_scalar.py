"""Equilibria of one-dimensional population equations ``rho' = rho * g(rho)``.

Every equilibrium in ``[0, 1]`` is found by bracketing sign changes of ``g`` on a grid and
polishing with Brent's method; grid cells where ``|g|`` has a local minimum without a sign
change are searched for touching roots (double roots at folds). Stability comes from the
derivative of ``rho * g(rho)``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import brentq, minimize_scalar


@dataclass(frozen=True, repr=False)
class Equilibrium:
    """A steady state of the population model.

    Attributes
    ----------
    density : float
        Total density at equilibrium.
    stable : bool
        True when every eigenvalue of the Jacobian has a negative real part.
    eigenvalues : ndarray
        Eigenvalues of the Jacobian (per unit time).
    compartments : ndarray
        Density of each phenotype (equal to ``density * fractions`` in the fast-switching
        limit).
    """

    density: float
    stable: bool
    eigenvalues: np.ndarray
    compartments: np.ndarray = field(default_factory=lambda: np.zeros(0))

    def __repr__(self) -> str:
        kind = "stable" if self.stable else "unstable"
        lead = np.max(self.eigenvalues.real) if self.eigenvalues.size else float("nan")
        return f"Equilibrium(density={self.density:.6g}, {kind}, leading eigenvalue {lead:.4g})"


def derivative(function, x: float, step: float = 1e-4, lower: float = 0.0, upper: float = 1.0,
               *, vectorised: bool = False):
    """Fourth-order finite difference: central inside ``[lower, upper]``, one-sided at its ends.

    With ``vectorised=True`` ``function`` is called once with the vector of stencil points
    (its values stacked along the first axis).
    """
    if x - 2 * step >= lower and x + 2 * step <= upper:
        offsets, weights, sign = np.array([2.0, 1.0, -1.0, -2.0]), np.array([-1.0, 8.0, -8.0, 1.0]), 1.0
    else:
        sign = 1.0 if x - 2 * step < lower else -1.0
        offsets, weights = sign * np.arange(5.0), np.array([-25.0, 48.0, -36.0, 16.0, -3.0])
    points = x + offsets * step
    if vectorised:
        values = np.asarray(function(points), dtype=float)
    else:
        values = np.array([function(p) for p in points], dtype=float)
    return sign * np.tensordot(weights, values, axes=1) / (12 * step)


def roots_on_unit_interval(function, *, points: int = 201, xtol: float = 1e-13, many=None) -> list[float]:
    """Every root of ``function`` in ``(0, 1]``: sign changes on a grid, polished by Brent's method.

    Touching roots (no sign change) are found by minimising ``|function|`` in grid cells where
    it has a local minimum, and accepted when the minimum is zero to 1e-12. ``many``, if given,
    evaluates the function on the whole grid in one call.
    """
    grid = np.linspace(0.0, 1.0, points)
    values = np.asarray(many(grid), dtype=float) if many is not None else np.array([function(x) for x in grid])
    roots = []
    nudge = 1e-9  # an exact zero on the grid may hide a second root right next to it
    for i in range(1, points):
        a, b = grid[i - 1], grid[i]
        fa, fb = values[i - 1], values[i]
        if fb == 0.0:
            roots.append(float(b))
            b = b - nudge
            fb = function(b)
        if fa == 0.0:
            a = a + nudge
            fa = function(a)
        if fa * fb < 0:
            roots.append(float(brentq(function, a, b, xtol=xtol, rtol=4 * np.finfo(float).eps)))
    # Cells where |g| dips without a sign change may hide a pair of close roots (or a double
    # root at a fold): look at the signed extremum there.
    magnitude = np.abs(values)
    # "Zero" relative to the function's own scale on the grid (its units are the user's).
    floor = 1e-12 * max(float(np.max(magnitude[np.isfinite(magnitude)], initial=0.0)), 1e-300)
    for i in range(1, points - 1):
        if not (magnitude[i] < magnitude[i - 1] and magnitude[i] <= magnitude[i + 1]):
            continue
        if values[i - 1] * values[i] <= 0 or values[i] * values[i + 1] <= 0:
            continue
        sign = np.sign(values[i])
        a, b = grid[i - 1], grid[i + 1]
        found = minimize_scalar(lambda x: sign * function(x), bounds=(a, b), method="bounded",
                                options={"xatol": 1e-12})
        low = sign * found.fun
        if abs(low) <= floor:
            candidates = [float(found.x)]
        elif np.sign(low) != sign:
            candidates = [
                float(brentq(function, a, found.x, xtol=xtol, rtol=4 * np.finfo(float).eps)),
                float(brentq(function, found.x, b, xtol=xtol, rtol=4 * np.finfo(float).eps)),
            ]
        else:
            candidates = []
        roots.extend(c for c in candidates if all(abs(c - r) > 1e-9 for r in roots))
    return sorted(r for r in roots if r > 0.0)


def equilibria_of(per_capita_growth, *, points: int = 201) -> list[Equilibrium]:
    """Equilibria in ``[0, 1]`` of ``rho' = rho * g(rho)`` for a user's per-capita growth ``g``.

    Zero first, then every positive root of ``g`` by increasing density; eigenvalues are
    ``d/drho [rho g(rho)]`` by a fourth-order central difference.

    Examples
    --------
    The strong-Allee equation ``r N (N/A - 1)(1 - N/K)`` with ``A = 0.2``, ``K = 0.9``:

    >>> found = equilibria_of(lambda n: 1.0 * (n / 0.2 - 1) * (1 - n / 0.9))
    >>> [round(e.density, 10) for e in found], [e.stable for e in found]
    ([0.0, 0.2, 0.9], [True, False, True])
    """
    if not callable(per_capita_growth):
        from .._errors import InputError

        raise InputError(
            f"`per_capita_growth` must be a callable density -> rate (got {type(per_capita_growth).__name__})"
        )

    def flow(rho):
        return rho * per_capita_growth(rho)

    found = []
    for rho in [0.0] + roots_on_unit_interval(per_capita_growth, points=points):
        eigen = derivative(flow, rho, step=1e-4)
        found.append(Equilibrium(float(rho), bool(eigen < 0), np.array([eigen]), np.array([rho])))
    return found
