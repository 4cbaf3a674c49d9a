"""Finished batches to a labelled ``xarray.Dataset``, in item order whatever the batching."""

from __future__ import annotations

import numpy as np

from .._errors import InputError
from ._batch import check_alike
from ._grid import Plan
from ._quantity import Quantity, label_for

SEED_LABEL = Quantity(
    "seed of the item's random generator: numpy.random.default_rng(seed)", "1"
)


def _gather(batches, items: int):
    """Concatenate batches and sort them by item (the first copy of a repeated item wins)."""
    keys = batches[0].keys
    for batch in batches:
        check_alike(batches[0], batch, "read from the checkpoint")
    found, order = np.unique(np.concatenate([b.items for b in batches]), return_index=True)
    if not np.array_equal(found, np.arange(items)):
        raise RuntimeError("scan results are incomplete; rerun it with its checkpoint")
    seeds = np.concatenate([b.seeds for b in batches])[order]
    values = []
    for j, key in enumerate(keys):
        parts = [b.values[j] for b in batches]
        values.append(np.concatenate(parts)[order])
    return keys, seeds, values


def assemble(plan: Plan, batches, labels: dict, attrs: dict):
    """The scan's Dataset: grid coordinates, one variable per output, and the seeds."""
    import xarray as xr

    keys, seeds, values = _gather(batches, plan.items)
    lead_dims = plan.dims + (("replicate",) if plan.replicates else ())
    lead_shape = plan.shape + ((plan.replicates,) if plan.replicates else ())
    coords = {}
    if plan.kind == "grid":
        for name, axis in zip(plan.names, plan.axes):
            coords[name] = (name, axis, label_for(name, labels).attrs())
    else:
        coords["point"] = ("point", np.arange(plan.points), {"long_name": "design point"})
        for name, axis in zip(plan.names, plan.axes):
            coords[name] = ("point", axis, label_for(name, labels).attrs())
    if plan.replicates:
        coords["replicate"] = ("replicate", np.arange(plan.replicates), {"long_name": "replicate"})
    data = {}
    for key, value in zip(keys, values):
        if key in coords or key == "seed":
            raise InputError(f"`function` output {key!r} clashes with a scan coordinate or 'seed'")
        label = label_for(key, labels)
        extra = value.ndim - 1
        dims = tuple(label.dims) if label.dims else tuple(f"{key}_dim_{k}" for k in range(extra))
        if len(dims) != extra:
            raise InputError(
                f"`labels[{key!r}]` gives {len(dims)} dims {dims} for an output with {extra}"
            )
        data[key] = (lead_dims + dims, value.reshape(lead_shape + value.shape[1:]), label.attrs())
        for dim, labels_of_dim in (label.coords or {}).items():
            if dim not in coords:
                coords[dim] = (dim, np.asarray(labels_of_dim), label_for(dim, labels).attrs())
    data["seed"] = (lead_dims, seeds.reshape(lead_shape), SEED_LABEL.attrs())
    return xr.Dataset(data, coords=coords, attrs=attrs)
