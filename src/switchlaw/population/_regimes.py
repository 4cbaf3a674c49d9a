"""Regimes of a mean-field model over beta x a second parameter, from critical points."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._errors import InputError
from .._validate import as_array, choice
from ._family import PARAMETERS, Family

REGIMES = ("extinction", "monostable", "weak-allee", "strong-allee")


def regime_map(model, betas, parameter: str, values, *, points: int, on_row, cache) -> "RegimeMap":
    """See :meth:`MeanField.regime_map`; every row shares ``cache`` (one law for all rows)."""
    beta_grid = as_array(betas, "betas", ndim=1)
    value_grid = as_array(values, "values", ndim=1)
    if beta_grid.size < 2 or not (np.diff(beta_grid) > 0).all():
        raise InputError("`betas` must be strictly increasing, at least 2 of them")
    choice(parameter, "parameter", PARAMETERS[2:])
    family = Family(model, parameter, float(beta_grid[0]), cache)
    codes = np.empty((value_grid.size, beta_grid.size), dtype=int)
    curves = []
    for i, value in enumerate(value_grid):
        variant = family.model_at(value)
        found = variant.critical_betas(beta_grid[0], beta_grid[-1], cache=cache)
        curves.append(tuple(found))
        cuts = [beta_grid[0]] + [c.beta for c in found] + [beta_grid[-1]]

        def regime(beta):
            return variant.regime(beta, points=points, cache=cache)

        for a, b in zip(cuts[:-1], cuts[1:]):
            inside = np.flatnonzero((beta_grid >= a) & (beta_grid <= b))
            if not inside.size:
                continue
            # Weak Allee vs monostable turns on the slope of growth at zero density, which
            # is no bifurcation: if the interval's ends disagree, classify every point.
            ends = {regime(beta_grid[j]) for j in (inside[0], inside[-1])}
            ends.add(regime(0.5 * (a + b)))
            if len(ends) == 1:
                codes[i, inside] = REGIMES.index(ends.pop())
            else:
                for j in inside:
                    codes[i, j] = REGIMES.index(regime(beta_grid[j]))
        if on_row is not None:
            on_row(i + 1, value_grid.size)
    return RegimeMap(beta_grid, parameter, value_grid, codes, tuple(curves))


@dataclass(frozen=True, repr=False)
class RegimeMap:
    """Regimes over beta x a second parameter.

    Attributes
    ----------
    betas : ndarray, shape (k,)
    parameter : str
    values : ndarray, shape (v,)
    codes : ndarray of int, shape (v, k)
        Index into :data:`REGIMES`.
    critical : tuple of tuples of CriticalPoint
        The critical betas found for each value of the second parameter.
    """

    betas: np.ndarray
    parameter: str
    values: np.ndarray
    codes: np.ndarray
    critical: tuple

    @property
    def regimes(self) -> np.ndarray:
        """Regime names, shape (v, k)."""
        return np.asarray(REGIMES, dtype=object)[self.codes]

    def __repr__(self) -> str:
        seen = sorted({REGIMES[c] for c in np.unique(self.codes)})
        return (
            f"RegimeMap({self.values.size} {self.parameter} x {self.betas.size} beta, "
            f"regimes: {', '.join(seen)})"
        )
