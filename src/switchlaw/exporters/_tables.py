"""What every table format shares: the law's arrays, their JSON form, the labelled dataset.

A law table in any format holds the same content: the arrays of :data:`LAW_ARRAYS`, the
phenotype names and the provenance record. :func:`law_dataset` turns that content into the
``xarray.Dataset`` that :func:`switchlaw.read_table` returns for every format, so that the
formats can be compared with ``xarray.testing.assert_identical``.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from .._errors import InputError
from ._provenance import CAUTION, CF_UNITS, LAW_ARRAYS, UNITS, law_sha256

#: Value of the ``kind`` key of a law table and of a step table.
LAW_KIND = "switching-law"
STEP_KIND = "step-table"
#: Version of the table layout written by this module.
LAYOUT_VERSION = 1


def law_arrays(law) -> dict:
    """The arrays of :data:`LAW_ARRAYS` taken from a law (float64, states as stored)."""
    arrays = {name: np.asarray(getattr(law, attribute)) for name, attribute in LAW_ARRAYS}
    arrays["converged"] = arrays["converged"].astype(bool)
    return arrays


def number(value: float) -> str:
    """Shortest decimal text that reads back to the same float64 (never ``np.float64(...)``)."""
    return repr(float(value))


def state_text(value) -> str:
    return str(int(value)) if isinstance(value, (int, np.integer)) else number(value)


# ------------------------------------------------------------------------- JSON form
def _listed(array: np.ndarray):
    if array.dtype == bool:
        return array.tolist()
    if np.issubdtype(array.dtype, np.integer):
        return [int(v) for v in array.ravel()] if array.ndim == 1 else array.tolist()
    return np.asarray(array, dtype=float).tolist()


def to_json_values(name: str, array: np.ndarray):
    """An array as JSON lists; ``+inf`` betas (budget not binding) become ``null``."""
    if name == "beta":
        return [None if math.isinf(b) else float(b) for b in np.asarray(array, dtype=float)]
    return _listed(np.asarray(array))


def from_json_values(name: str, values) -> np.ndarray:
    if name == "beta":
        return np.array([math.inf if b is None else float(b) for b in values], dtype=float)
    if name == "converged":
        return np.array(values, dtype=bool)
    if name == "states":
        array = np.array(values)
        return array if np.issubdtype(array.dtype, np.integer) else array.astype(float)
    return np.array(values, dtype=float)


def header(kind: str, layout: str, metadata: dict, phenotypes, arrays: dict, names) -> dict:
    """The JSON document (or sidecar) for ``names`` among a law's arrays."""
    document = {
        "kind": kind,
        "layout": layout,
        "layout_version": LAYOUT_VERSION,
        "metadata": metadata,
        "units": dict(UNITS),
        "phenotypes": list(phenotypes),
    }
    for name in names:
        document[name] = to_json_values(name, arrays[name])
    return document


def dumps(document: dict) -> bytes:
    """JSON text with one top-level key per line (arrays stay on their line)."""
    lines = [f" {json.dumps(key)}: {json.dumps(value, allow_nan=False)}" for key, value in document.items()]
    return ("{\n" + ",\n".join(lines) + "\n}\n").encode()


def load_document(path: Path, kind: str | None = None) -> dict:
    try:
        document = json.loads(Path(path).read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError(f"`path` {str(path)!r} does not exist") from None
    except json.JSONDecodeError as error:
        raise InputError(f"`path` {str(path)!r} is not valid JSON ({error})") from None
    if not isinstance(document, dict) or document.get("kind") not in (LAW_KIND, STEP_KIND):
        raise InputError(
            f"`path` {str(path)!r} is not a switchlaw table (its 'kind' must be "
            f"{LAW_KIND!r} or {STEP_KIND!r})"
        )
    if kind is not None and document["kind"] != kind:
        raise InputError(f"`path` {str(path)!r} holds a {document['kind']!r}, not a {kind!r}")
    return document


# -------------------------------------------------------------------------- dataset
def cf(name: str, long_name: str, **more) -> dict:
    """Variable attributes: ``units`` where UDUNITS parses it (:data:`CF_UNITS`), otherwise
    the unit of :data:`UNITS` stated in the long name."""
    if name in CF_UNITS:
        unit = UNITS[name]
        described = long_name if unit == CF_UNITS[name] else f"{long_name}; unit: {unit}"
        return {"units": CF_UNITS[name], "long_name": described, **more}
    return {"long_name": f"{long_name}; unit: {UNITS[name]}", **more}


def attributes(metadata: dict, title: str) -> dict:
    """CF-style global attributes plus the provenance record (netCDF-safe types)."""
    attrs = {
        "Conventions": "CF-1.10",
        "title": title,
        "source": f"switchlaw {metadata['switchlaw_version']}",
        "comment": CAUTION,
    }
    for key, value in metadata.items():
        if key == "study":
            attrs[key] = json.dumps(value, sort_keys=True)
        elif isinstance(value, bool):
            attrs[key] = int(value)
        else:
            attrs[key] = value
    return attrs


def metadata_of(attrs: dict) -> dict:
    """Inverse of :func:`attributes` for the provenance keys."""
    keys = ("switchlaw_version", "inputs_sha256", "objective", "route", "setting", "converged",
            "study", "note")
    metadata = {}
    for key in keys:
        value = attrs[key]
        if key == "study":
            value = json.loads(value)
        elif key == "converged":
            value = bool(value)
        elif key == "setting":
            value = float(value)
        else:
            value = str(value)
        metadata[key] = value
    return metadata


def axes(arrays: dict, phenotypes) -> dict:
    """Coordinates shared by law and step tables."""
    coords = {
        "density": ("density", np.asarray(arrays["densities"], dtype=float),
                    cf("density", "population density")),
        "state": ("state", np.asarray(arrays["states"]), {"long_name": "sensed environment state"}),
        "phenotype": ("phenotype", np.array(phenotypes, dtype=str), {"long_name": "phenotype"}),
    }
    values = np.asarray(arrays["state_values"], dtype=float)
    if values.ndim == 1:
        coords["state_value"] = ("state", values, cf("state_value", "signal value of the state"))
    return coords


def law_dataset(arrays: dict, phenotypes, metadata: dict):
    """The labelled dataset of a law table (the same for CSV, JSON and netCDF)."""
    import xarray as xr

    table = np.asarray(arrays["probability"], dtype=float)
    state_probs = np.asarray(arrays["state_probability"], dtype=float)
    data = {
        "probability": (("density", "state", "phenotype"), table,
                        cf("probability", "probability q(x | y, density) of adopting a phenotype")),
        "state_probability": (("density", "state"), state_probs,
                              cf("state_probability", "probability p(y | density) of the sensed state")),
        "fraction": (("density", "phenotype"), np.einsum("ky,kyx->kx", state_probs, table),
                     cf("fraction", "mean-field phenotype fraction f(x | density) = sum_y p(y) q(x | y)")),
        "beta": ("density", np.asarray(arrays["beta"], dtype=float), cf(
            "beta", "sensitivity beta (Lagrange multiplier; inf where a budget does not bind)")),
        "information_bits": ("density", np.asarray(arrays["information_bits"], dtype=float),
                             cf("information_bits", "mutual information I(X;Y)")),
        "expected_payoff": ("density", np.asarray(arrays["expected_payoff"], dtype=float),
                            cf("expected_payoff", "expected payoff E[u]")),
        "converged": ("density", np.asarray(arrays["converged"]).astype(np.int8), {
            "long_name": "solver converged at this density",
            "flag_values": np.array([0, 1], dtype=np.int8),
            "flag_meanings": "not_converged converged"}),
    }
    values = np.asarray(arrays["state_values"], dtype=float)
    if values.ndim == 2:
        data["state_value"] = (("state", "signal"), values, cf("state_value", "signal values of the state"))
    return xr.Dataset(data, coords=axes(arrays, phenotypes),
                      attrs=attributes(metadata, "switching law q(x | y, density)"))


def dataset_arrays(dataset) -> dict:
    """The arrays of :data:`LAW_ARRAYS` read from a law dataset."""
    values = dataset["state_value"].values
    return {
        "densities": dataset["density"].values,
        "states": dataset["state"].values,
        "state_values": values,
        "probability": dataset["probability"].values,
        "state_probability": dataset["state_probability"].values,
        "beta": dataset["beta"].values,
        "information_bits": dataset["information_bits"].values,
        "expected_payoff": dataset["expected_payoff"].values,
        "converged": dataset["converged"].values.astype(bool),
    }


def verified(dataset, path: Path):
    """The dataset, after checking its ``inputs_sha256`` against its own arrays."""
    metadata = metadata_of(dataset.attrs)
    arrays = dataset_arrays(dataset)
    phenotypes = [str(p) for p in dataset["phenotype"].values]
    digest = law_sha256(arrays, phenotypes, metadata["objective"], metadata["route"], metadata["setting"])
    if digest != metadata["inputs_sha256"]:
        raise InputError(
            f"`path` {str(path)!r} does not match its inputs_sha256 "
            f"({metadata['inputs_sha256'][:12]}... recorded, {digest[:12]}... computed): "
            "it was changed after export"
        )
    return dataset


def check_shape(name: str, array: np.ndarray, shape: tuple, path: Path) -> np.ndarray:
    if array.shape != shape:
        raise InputError(f"`path` {str(path)!r}: {name!r} must have shape {shape} (got {array.shape})")
    return array
