"""What a ready-made point function scans: a mean-field model and its named parameters.

A model family is a :class:`~switchlaw.MeanField`, or a function that builds one from keyword
parameters (``build(neighbours=6, move_cost=0.1) -> MeanField``). Its parameters are then
``beta`` and ``cost_per_bit`` (the law), the builder's keywords, and the scale factors
``death_scale`` and ``division_scale`` and the decision timescale ``tau`` applied to the
built model. Every point gets a freshly built model, so no cached law carries over from one
point to the next and results do not depend on the order points are run in.
"""

from __future__ import annotations

import inspect
from typing import Mapping

from .._errors import InputError
from ..decision._costs import beta_from_cost
from ..population._mean_field import MeanField

LAW_PARAMETERS = ("beta", "cost_per_bit")
MODEL_PARAMETERS = ("death_scale", "division_scale", "tau")


def fresh(model: MeanField, *, scales: Mapping | None = None) -> MeanField:
    """A new model with the same settings (and an empty cache), scale factors applied."""
    scales = scales or {}
    death = model.death * scales.get("death_scale", 1.0)
    crowding = model.crowding * scales.get("death_scale", 1.0)
    division = model.division * scales.get("division_scale", 1.0)
    return MeanField(
        model.payoff, model.environment, division=division, death=death,
        tau=scales.get("tau", model.tau), crowding=crowding, objective=model.objective,
        phenotypes=model.phenotypes,
    )


class ModelFamily:
    """A model or model builder, with the parameter values fixed for every point."""

    def __init__(self, model, fixed=None):
        if isinstance(model, MeanField):
            self.model, self.builder, self.builder_names, self.open = fresh(model), None, (), False
        elif callable(model):
            try:
                signature = inspect.signature(model)
            except (TypeError, ValueError):
                raise InputError("`model` must be a MeanField or a function with keyword parameters") from None
            kinds = (inspect.Parameter.POSITIONAL_OR_KEYWORD, inspect.Parameter.KEYWORD_ONLY)
            self.model, self.builder = None, model
            self.builder_names = tuple(n for n, p in signature.parameters.items() if p.kind in kinds)
            self.open = any(p.kind == inspect.Parameter.VAR_KEYWORD for p in signature.parameters.values())
        else:
            raise InputError(
                "`model` must be a MeanField or a function building one from keyword parameters "
                f"(got {type(model).__name__})"
            )
        if fixed is not None and not isinstance(fixed, Mapping):
            raise InputError(f"`fixed` must map parameter names to values (got {type(fixed).__name__})")
        self.fixed = dict(fixed or {})
        self._check_known(self.fixed, "`fixed`")

    @property
    def names(self) -> tuple:
        """Every parameter the model family has."""
        seen = LAW_PARAMETERS + self.builder_names + MODEL_PARAMETERS
        return tuple(dict.fromkeys(seen))

    def _check_known(self, names, where: str) -> None:
        if self.open:
            return
        unknown = [n for n in names if n not in self.names]
        if unknown:
            raise InputError(
                f"{where} names {', '.join(map(repr, unknown))}, which the model family does not have "
                f"(its parameters: {', '.join(self.names)})"
            )

    def check(self, grid_names, *, law: bool = True, exclude=()) -> None:
        """Grid names must be parameters of the model family, not also fixed, and give the law once."""
        self._check_known(grid_names, "`grid`")
        both = [n for n in grid_names if n in self.fixed]
        if both:
            raise InputError(f"`grid` and `fixed` both give {', '.join(map(repr, both))}")
        given = set(grid_names) | set(self.fixed)
        barred = [n for n in exclude if n in given]
        if barred:
            raise InputError(f"this point function sets {', '.join(map(repr, barred))} itself; "
                             "remove it from `grid` and `fixed`")
        routes = [n for n in LAW_PARAMETERS if n in given]
        if law and len(routes) != 1:
            raise InputError(
                "give exactly one of 'beta', 'cost_per_bit' in `grid` or `fixed` "
                f"(got {', '.join(map(repr, routes)) or 'none'})"
            )

    def values(self, point: Mapping) -> dict:
        return {**self.fixed, **point}

    def build(self, values: Mapping) -> MeanField:
        """A fresh model for one point's parameter values."""
        if self.builder is None:
            base = self.model
        else:
            if self.open:
                keywords = {k: v for k, v in values.items() if k not in LAW_PARAMETERS}
            else:
                keywords = {k: values[k] for k in self.builder_names if k in values}
            base = self.builder(**keywords)
            if not isinstance(base, MeanField):
                raise InputError(f"`model` must return a MeanField (got {type(base).__name__})")
        return fresh(base, scales={k: values[k] for k in MODEL_PARAMETERS if k in values})

    @staticmethod
    def beta(values: Mapping) -> float:
        """The point's beta, from ``beta`` or from ``cost_per_bit`` (``beta = ln 2 / cost``)."""
        if "beta" in values:
            return float(values["beta"])
        return beta_from_cost(values["cost_per_bit"])

    def default_model(self) -> MeanField | None:
        """The model at the fixed values and the builder's defaults (None if it needs more)."""
        try:
            return self.build(self.fixed)
        except Exception:
            return None
