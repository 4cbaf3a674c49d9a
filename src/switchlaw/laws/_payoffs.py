"""Payoffs of each phenotype over environment states: tables, parametric shapes, callables."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

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


def payoff_table(payoff, environment: Environment, phenotypes=None, *, where: str = "") -> tuple[np.ndarray, tuple]:
    """The ``[true state, phenotype]`` payoff table for one environment, and phenotype names.

    ``payoff`` is a table, a callable ``environment -> table``, or a mapping from phenotype
    name to a function of the signal value (e.g. :class:`Linear`, :class:`Hill`,
    :class:`Threshold`, or any ``v -> payoff`` callable).
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
            column = np.asarray(payoff[name](values), dtype=float)
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
