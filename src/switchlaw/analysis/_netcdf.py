"""Scan results to and from netCDF-4 files (HDF5 through h5netcdf), round trip identical.

netCDF has no boolean type: boolean variables are written as int8 with the attribute
``switchlaw_dtype = "bool"`` and read back as booleans. Text is stored as variable-length
strings and seeds as int64. Files are written to a temporary name and moved into place.
"""

from __future__ import annotations

import os
import tempfile

import numpy as np

from .._errors import InputError

_FLAG = "switchlaw_dtype"


def _encode(dataset):
    encoded = dataset.copy()
    for name, variable in dataset.variables.items():
        if variable.dtype == bool:
            flagged = variable.copy(data=variable.values.astype(np.int8))
            flagged.attrs = dict(variable.attrs, **{_FLAG: "bool"})
            encoded[name] = flagged
    return encoded


def _decode(dataset):
    for name, variable in list(dataset.variables.items()):
        if variable.attrs.get(_FLAG) == "bool":
            attrs = {k: v for k, v in variable.attrs.items() if k != _FLAG}
            decoded = variable.copy(data=variable.values.astype(bool))
            decoded.attrs = attrs
            dataset[name] = decoded
    return dataset


def save_scan(dataset, path, *, overwrite: bool = False) -> None:
    """Write a scan's Dataset to a netCDF-4 file (engine h5netcdf), atomically.

    Parameters
    ----------
    dataset : xarray.Dataset
    path : str or path-like
        The file; an existing one is replaced only with ``overwrite=True``.
    overwrite : bool
    """
    import xarray as xr

    if not isinstance(dataset, xr.Dataset):
        raise InputError(f"`dataset` must be an xarray.Dataset (got {type(dataset).__name__})")
    path = os.fspath(path)
    if os.path.exists(path) and not overwrite:
        raise InputError(f"`path` {path!r} exists; pass overwrite=True to replace it")
    directory = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(directory):
        raise InputError(f"`path`: directory {directory!r} does not exist")
    handle, temporary = tempfile.mkstemp(dir=directory, prefix=".tmp-", suffix=".nc")
    os.close(handle)
    try:
        _encode(dataset).to_netcdf(temporary, engine="h5netcdf")
        os.replace(temporary, path)
    finally:
        if os.path.exists(temporary):
            os.remove(temporary)


def load_scan(path):
    """Read a Dataset written by :func:`save_scan` (booleans restored), fully into memory."""
    import xarray as xr

    path = os.fspath(path)
    if not os.path.isfile(path):
        raise InputError(f"`path` {path!r} is not a file")
    return _decode(xr.load_dataset(path, engine="h5netcdf"))
