"""Format ``step-table``: per-step switching probabilities for a discrete-time simulator.

Long-format CSV with one row per density x state x (from, to) phenotype pair, plus a JSON
sidecar. With step ``dt`` and decision timescale ``tau`` a cell re-decides within a step with
probability ``1 - exp(-dt / tau)`` and then takes ``j`` with probability ``q(j | y, rho)``
(rates q(j|y)/tau, common practice, no source), so ``P[y, i, j] = (1 - exp(-dt/tau)) q(j | y)`` for ``i != j`` and
``P[y, i, i] = exp(-dt/tau) + (1 - exp(-dt/tau)) q(i | y)``: the closed form of
``expm(K dt)`` for the rank-one generator ``K``, a sum of non-negative terms at any
``dt / tau`` (see :meth:`SwitchingLaw.step_probabilities`).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from .._errors import InputError
from .._validate import as_positive, choice
from ._csv import fill, indexed_rows, long_table, sidecar_path
from ._provenance import TIME_UNITS, law_metadata, sha256_of_law
from ._registry import REQUIRED, Format, register
from ._tables import STEP_KIND, attributes, axes, cf, dumps, from_json_values, header, law_arrays, number

#: Largest allowed deviation of a row of per-step probabilities from summing to one.
ROW_TOLERANCE = 1e-12
AXES = ("densities", "states", "state_values")


def step_probabilities(law, dt: float, tau: float) -> np.ndarray:
    """``P[k, y, i, j]`` at every density of the law's grid."""
    return np.stack([law.step_probabilities(dt, tau, rho) for rho in law.densities])


def write(law, path: Path, *, dt, tau, time_unit, study) -> tuple:
    dt, tau = as_positive(dt, "dt"), as_positive(tau, "tau")
    choice(time_unit, "time_unit", tuple(TIME_UNITS))
    steps = step_probabilities(law, dt, tau)
    sums = steps.sum(axis=3)
    if np.abs(sums - 1.0).max() > ROW_TOLERANCE or (steps < 0).any():
        raise InputError(f"per-step probabilities must be non-negative rows summing to 1 (dt={dt!r}, tau={tau!r})")
    digest = sha256_of_law(law)
    columns, text = long_table(
        law, ["from_phenotype", "to_phenotype", "probability"],
        lambda k, y: ([source, target, number(steps[k, y, i, j])]
                      for i, source in enumerate(law.phenotypes)
                      for j, target in enumerate(law.phenotypes)),
    )
    sidecar = header(STEP_KIND, "csv", law_metadata(law, study, digest), law.phenotypes, law_arrays(law), AXES)
    sidecar["step"] = {"dt": dt, "tau": tau, "time_unit": time_unit,
                       "decision_probability": -math.expm1(-dt / tau)}
    sidecar["csv"] = {"file": path.name, "columns": columns,
                      "rows": "one per density x state x from_phenotype x to_phenotype"}
    return {path: text.encode(), sidecar_path(path): dumps(sidecar)}, digest


def step_dataset(arrays: dict, phenotypes, steps: np.ndarray, metadata: dict, step: dict):
    """The labelled dataset of a step table."""
    import xarray as xr

    coords = axes(arrays, phenotypes)
    del coords["phenotype"]
    names = np.array(phenotypes, dtype=str)
    coords["from_phenotype"] = ("from_phenotype", names, {"long_name": "phenotype at the start of the step"})
    coords["to_phenotype"] = ("to_phenotype", names, {"long_name": "phenotype at the end of the step"})
    data = {"step_probability": (("density", "state", "from_phenotype", "to_phenotype"), steps, cf(
        "step_probability", "probability of being in to_phenotype after one step of length dt"))}
    values = np.asarray(arrays["state_values"], dtype=float)
    if values.ndim == 2:
        data["state_value"] = (("state", "signal"), values, cf("state_value", "signal values of the state"))
    attrs = attributes(metadata, "per-step phenotype switching probabilities")
    attrs.update(step)
    return xr.Dataset(data, coords=coords, attrs=attrs)


def read(path: Path, sidecar: dict):
    arrays = {name: from_json_values(name, sidecar[name]) for name in AXES}
    phenotypes = sidecar["phenotypes"]
    found, (k, m, n) = indexed_rows(path, sidecar, arrays, phenotype_columns=2, numbers=1)
    cells = [((i, y, a, b), values[0]) for i, y, (a, b), values in found]
    steps = fill(path, cells, (k, m, n, n), "step_probability")
    return step_dataset(arrays, phenotypes, steps, sidecar["metadata"], sidecar["step"])


FORMAT = register(Format(
    name="step-table",
    suffixes=(),
    accepts=("SwitchingLaw",),
    options={"dt": REQUIRED, "tau": REQUIRED, "time_unit": "second", "study": None},
    write=write,
    description="per-step switching probabilities P[y, i, j] for step dt and timescale tau (CSV + sidecar)",
))
