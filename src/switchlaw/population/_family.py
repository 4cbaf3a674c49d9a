"""A mean-field model seen as a family in one scalar parameter (for continuation).

``model_at(value)`` returns a changed copy of the (immutable) model; every member shares the
caller's :class:`LawCache`, and members that differ only in rates share one law there.
"""

from __future__ import annotations

import copy

import numpy as np

from .._errors import InputError
from .._validate import as_nonnegative
from ..decision._costs import beta_from_cost

#: Scalar parameters a model can be continued in.
PARAMETERS = ("beta", "cost_per_bit", "death_scale", "division_scale", "tau")


def changed(model, **fields):
    """A copy of an immutable model with some fields replaced (arrays frozen).

    Unlike ``dataclasses.replace`` this also copies subclasses whose constructor takes other
    arguments; the values are already validated by the caller.
    """
    variant = copy.copy(model)
    for name, value in fields.items():
        if isinstance(value, np.ndarray):
            value = value.copy()
            value.flags.writeable = False
        object.__setattr__(variant, name, value)
    return variant


class Family:
    """``model`` as a function of ``parameter`` (beta fixed at ``beta`` unless continued in it)."""

    def __init__(self, model, parameter: str, beta, cache):
        self.model = model
        self.parameter = parameter
        self.beta = beta
        self.cache = cache

    def check(self, value, name: str) -> float:
        number = as_nonnegative(value, name)
        if self.parameter in ("cost_per_bit", "tau") and number == 0:
            raise InputError(f"`{name}` must be > 0 for {self.parameter!r} (got {number!r})")
        return number

    def model_at(self, value):
        if self.parameter in ("beta", "cost_per_bit"):
            return self.model
        if self.parameter == "death_scale":
            return changed(self.model, death=self.model.death * value, crowding=self.model.crowding * value)
        if self.parameter == "division_scale":
            return changed(self.model, division=self.model.division * value)
        if self.model.tau is None:
            raise InputError("continuing in 'tau' needs a model with a finite `tau`")
        return changed(self.model, tau=float(value))

    def beta_at(self, value) -> float:
        if self.parameter == "beta":
            return float(value)
        if self.parameter == "cost_per_bit":
            return beta_from_cost(value)
        return self.beta

    def reduced(self, rho, value):
        if self.parameter == "cost_per_bit" and value <= 0:
            return np.nan
        return self.model_at(value).reduced(rho, self.beta_at(value), cache=self.cache)

    def low_density_growth(self, value):
        return self.model_at(value).low_density_growth(self.beta_at(value), cache=self.cache)

    def equilibria(self, value):
        return self.model_at(value).equilibria(self.beta_at(value), cache=self.cache)

    def equilibrium(self, rho, value):
        return self.model_at(value)._equilibrium(rho, self.beta_at(value), self.cache)

    def point(self, value: float, kind: str, density: float):
        from ._continuation import CriticalPoint

        return CriticalPoint(self.beta_at(value), kind, density, self.parameter, float(value))
