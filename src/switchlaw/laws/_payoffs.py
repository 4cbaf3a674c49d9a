"""Payoffs of each phenotype over environment states: tables, parametric shapes, callables."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Mapping

import numpy as np

from .._errors import InputError
from .._validate import as_array, phenotype_names
from ._environments import Environment


@dataclass(frozen=True)
class Linear:
    """``intercept + slope * v`` of the signal value ``v``."""

    slope: float
    intercept: float = 0.0

    def __call__(self, v):
        return self.intercept + self.slope * np.asarray(v, dtype=float)


@dataclass(frozen=True)
class Hill:
    """Saturating ``baseline + top * v^n / (half^n + v^n)`` for ``v >= 0``."""

    top: float
    half: float
    n: float = 1.0
    baseline: float = 0.0

    def __call__(self, v):
        v = np.clip(np.asarray(v, dtype=float), 0.0, None)
        return self.baseline + self.top * v**self.n / (self.half**self.n + v**self.n)


@dataclass(frozen=True)
class Threshold:
    """``above`` where ``v >= level``, ``below`` elsewhere."""

    level: float
    above: float
    below: float = 0.0

    def __call__(self, v):
        return np.where(np.asarray(v, dtype=float) >= self.level, self.above, self.below)


@dataclass(frozen=True)
class DensityDependent:
    """A payoff of the signal value ``v`` and the population density ``rho``: ``function(v, rho)``.

    Use it as a phenotype's entry in a payoff mapping. Wherever the law is derived (every
    density of ``derive_law``'s grid, every density ``MeanField`` asks for) it is evaluated at
    that density; the existing forms can be evaluated at the density inside it.

    Parameters
    ----------
    function : callable ``(v, rho) -> payoff``
        ``v`` the array of signal values of the true states, ``rho`` the density (a float in
        [0, 1], occupied fraction of sites); returns payoff units, one per state or a scalar.

    Examples
    --------
    Dividing pays in proportion to free space and to the number of occupied neighbours
    (invented scenario); at density 0.5 and ``y = 2`` of 4 neighbours the payoff is
    ``(1 - 0.5) * 2 / 4 = 0.25``:

    >>> import switchlaw as sl
    >>> payoff = {"divide": sl.DensityDependent(lambda v, rho: (1 - rho) * v / 4),
    ...           "move": sl.Linear(slope=0.0)}
    >>> law = sl.derive_law(payoff, lambda rho: sl.occupancy(4, rho), densities=[0.0, 0.5, 1.0],
    ...                     beta=2.0, objective="max-entropy")
    >>> round(float(law.probs(0.5)[2, 0]), 6)  # 1 / (1 + exp(-2 * 0.25))
    0.622459
    """

    function: Callable

    def __post_init__(self):
        if not callable(self.function):
            raise InputError(f"`function` must be callable as function(v, rho) (got {type(self.function).__name__})")

    def at(self, density: float) -> Callable:
        """The payoff at ``density`` as a function of the signal value alone."""
        return lambda v: self.function(v, density)


def payoff_table(payoff, environment: Environment, phenotypes=None, *, where: str = "") -> tuple[np.ndarray, tuple]:
    """The ``[true state, phenotype]`` payoff table for one environment, and phenotype names.

    ``payoff`` is a table, a callable ``environment -> table`` (it may read
    ``environment.density``), or a mapping from phenotype name to a function of the signal
    value (e.g. :class:`Linear`, :class:`Hill`, :class:`Threshold`, or any ``v -> payoff``
    callable) or of the value and the density (:class:`DensityDependent`).
    """
    rows = environment.hidden_probs.size
    if phenotypes is not None:
        phenotypes = phenotype_names(phenotypes)
    if isinstance(payoff, Mapping):
        names = phenotype_names(payoff, "payoff")
        if phenotypes is not None:
            unknown = [name for name in names if name not in phenotypes]
            if unknown:
                raise InputError(
                    f"`payoff` names unknown phenotypes {unknown} (known: {list(phenotypes)})"
                )
            missing = [name for name in phenotypes if name not in names]
            if missing:
                raise InputError(f"`payoff` gives no payoff for phenotypes {missing}")
            names = tuple(phenotypes)
        values = environment.values
        if values.ndim == 2 and values.shape[1] == 1:
            values = values[:, 0]
        columns = []
        for name in names:
            entry = payoff[name]
            if isinstance(entry, DensityDependent):
                if environment.density is None:
                    raise InputError(
                        f"`payoff[{name!r}]` depends on density but the environment has none; derive the "
                        "law over `densities` or give the Environment a `density`"
                    )
                entry = entry.at(float(environment.density))
            column = np.asarray(entry(values), dtype=float)
            columns.append(column if column.shape == (rows,) else np.broadcast_to(column, (rows,)))
        table = np.column_stack(columns)
    elif callable(payoff):
        table = np.asarray(payoff(environment), dtype=float)
        names = None
    else:
        table = np.asarray(payoff, dtype=float)
        names = None
    if table.ndim != 2 or table.shape[0] != rows:
        raise InputError(
            f"`payoff` must give a [state, phenotype] table with {rows} rows{where} "
            f"(got shape {table.shape})"
        )
    bad = ~np.isfinite(table)
    if bad.any():
        y, x = (int(i) for i in np.argwhere(bad)[0])
        raise InputError(
            f"`payoff` must be finite{where}; state {y}, phenotype {x} is {table[y, x]}"
        )
    if names is None:
        names = tuple(phenotypes) if phenotypes is not None else tuple(f"phenotype {i}" for i in range(table.shape[1]))
        if len(names) != table.shape[1]:
            raise InputError(
                f"`phenotypes` must name each of the {table.shape[1]} payoff columns (got {len(names)} names)"
            )
    return as_array(table, "payoff", ndim=2), names
