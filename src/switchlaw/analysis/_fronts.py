"""Point function for :func:`scan`: invasion-front speed, width and kind at each point."""

from __future__ import annotations

import math

import numpy as np

from ..spatial import KINDS, simulate_front
from ..spatial._model import as_diffusion, phenotype_names
from ._points import _PointFunction, _phenotypes
from ._quantity import Quantity
from ._family import ModelFamily


class FrontSummary(_PointFunction):
    """Front speed, linear speed, kind, infiltration width and edge composition at each point.

    Parameters
    ----------
    model : MeanField or callable
        The model, or a builder (see :func:`scan`).
    diffusion : sequence of float or mapping str -> float
        Per-phenotype diffusion coefficients (length^2 per unit time).
    length, dx, t_end : float
        Domain, grid spacing and duration of each run (see :func:`switchlaw.simulate_front`).
    dimension : {1, 2, 3}
    fixed : mapping, optional

    Outputs: ``front_speed`` and ``linear_speed`` (length per unit time), ``front_kind`` (one
    of ``pulled``, ``pushed``, ``stalled``, ``retreating``), ``infiltration_width`` (length),
    ``edge_fraction`` (along ``phenotype``), ``front_status`` (``ok`` or why not).
    """

    def __init__(self, model, *, diffusion, length, dx, t_end, dimension: int = 1, fixed=None):
        self.family = ModelFamily(model, fixed)
        self.diffusion = diffusion
        self.options = dict(length=length, dx=dx, t_end=t_end, dimension=dimension)
        names = _phenotypes(self.family, 0.0)
        default = self.family.default_model()
        if default is not None:
            as_diffusion(diffusion, phenotype_names(default))  # fail early on bad coefficients
        self.scan_labels = {
            "front_speed": Quantity("fitted front speed", "length per unit time"),
            "linear_speed": Quantity("linear spreading speed c*", "length per unit time"),
            "front_kind": Quantity(f"front kind ({', '.join(KINDS)})"),
            "infiltration_width": Quantity("distance between 0.1 and 0.5 of the bulk density", "length"),
            "edge_fraction": Quantity("phenotype fraction at the leading edge", "1", ("phenotype",),
                                      {"phenotype": names} if names else {}),
            "front_status": Quantity("front run status"),
            "phenotype": Quantity("phenotype"),
        }

    def __call__(self, point, rng):
        values = self.family.values(point)
        model = self.family.build(values)
        run = simulate_front(model, self.family.beta(values), diffusion=self.diffusion, **self.options)
        return {
            "front_speed": run.speed,
            "linear_speed": run.linear_speed,
            "front_kind": run.kind,
            "infiltration_width": run.width if math.isfinite(run.width) else math.nan,
            "edge_fraction": np.asarray(run.edge_fractions, float),
            "front_status": run.status,
        }
