"""Scan results to and from netCDF-4 files (HDF5 through h5netcdf), round trip identical.

netCDF has no boolean type: boolean variables are written as int8 with the attribute
``switchlaw_dtype = "bool"`` and read back as booleans. Text is stored as variable-length
strings and seeds as int64. Files are written to a temporary name and moved into place.

Files follow the CF conventions (``Conventions = "CF-1.10"``): a ``units`` attribute is kept
only where UDUNITS-2 parses it; information in bits or nats becomes ``units = "1"`` and any
other unit (payoff units, "per unit time" without a declared time unit) moves into the
``long_name``. The attributes as they were in memory are kept in ``switchlaw_attrs`` (JSON)
and restored by :func:`load_scan`.
"""

from __future__ import annotations

import json
import os
import tempfile

import numpy as np

from .._errors import InputError
from .._units import TIME_SYMBOLS, TIME_UNITS

_FLAG = "switchlaw_dtype"
_ORIGINAL = "switchlaw_attrs"
CONVENTIONS = "CF-1.10"
#: Units that are UDUNITS-2 strings as written.
_CF_UNITS = {"1", *TIME_SYMBOLS.values(), *(f"{symbol}-1" for symbol in TIME_SYMBOLS.values())}
#: Information units: CF numbers (``"1"``), the unit named in the long name.
_INFORMATION = ("bit", "nat")


def cf_units(units: str, time_unit: str | None = None) -> str | None:
    """The UDUNITS-2 form of a switchlaw unit, or ``None`` when it has none.

    ``"time unit"`` and ``"per unit time"`` become ``"h"`` and ``"h-1"`` (and so on) when the
    time unit is known; information in bits or nats is the number ``"1"``.
    """
    if units in _CF_UNITS:
        return units
    if units in _INFORMATION:
        return "1"
    if time_unit is not None:
        symbol = TIME_SYMBOLS[time_unit]
        if units == "time unit":
            return symbol
        if units == "per unit time":
            return f"{symbol}-1"
    return None


def cf_attributes(attrs: dict, time_unit: str | None = None) -> dict:
    """CF form of one variable's attributes; the unit text moves into ``long_name`` when
    UDUNITS-2 cannot parse it (or when it is an information unit)."""
    units = attrs.get("units")
    if units is None:
        return dict(attrs)
    units = str(units)
    converted = cf_units(units, time_unit)
    out = {key: value for key, value in attrs.items() if key != "units"}
    if converted != units:
        name = str(attrs.get("long_name", ""))
        said = units if converted is None or units in _INFORMATION else f"{units} ({time_unit})"
        out["long_name"] = f"{name}; unit: {said}" if name else f"unit: {said}"
    if converted is not None:
        out["units"] = converted
    return out


def _encode(dataset, time_unit=None):
    encoded = dataset.copy()
    for name, variable in dataset.variables.items():
        attrs = cf_attributes(variable.attrs, time_unit)
        if attrs != variable.attrs:
            kept = {key: str(variable.attrs[key]) for key in ("units", "long_name") if key in variable.attrs}
            attrs[_ORIGINAL] = json.dumps(kept, sort_keys=True)
        if variable.dtype == bool:
            attrs[_FLAG] = "bool"
            flagged = variable.copy(data=variable.values.astype(np.int8))
        else:
            flagged = variable.copy()
        flagged.attrs = attrs
        encoded[name] = flagged
    attrs, added = dict(dataset.attrs), []
    if not str(attrs.get("Conventions", "")).startswith("CF-"):
        if "Conventions" in attrs:
            attrs[f"{_ORIGINAL}_Conventions"] = attrs["Conventions"]
        else:
            added.append("Conventions")
        attrs["Conventions"] = CONVENTIONS
    if time_unit is not None and "time_unit" not in attrs:
        attrs["time_unit"] = time_unit
        added.append("time_unit")
    if added:
        attrs[f"{_ORIGINAL}_added"] = " ".join(added)
    encoded.attrs = attrs
    return encoded


def _decode(dataset):
    for name, variable in list(dataset.variables.items()):
        attrs = dict(variable.attrs)
        original = attrs.pop(_ORIGINAL, None)
        if original is not None:
            attrs = {key: value for key, value in attrs.items() if key not in ("units", "long_name")}
            attrs.update(json.loads(original))
        if attrs.get(_FLAG) == "bool":
            del attrs[_FLAG]
            decoded = variable.copy(data=variable.values.astype(bool))
        else:
            decoded = variable.copy()
        decoded.attrs = attrs
        dataset[name] = decoded
    attrs = dict(dataset.attrs)
    for key in str(attrs.pop(f"{_ORIGINAL}_added", "")).split():
        attrs.pop(key, None)
    if f"{_ORIGINAL}_Conventions" in attrs:
        attrs["Conventions"] = attrs.pop(f"{_ORIGINAL}_Conventions")
    dataset.attrs = attrs
    return dataset


def save_scan(dataset, path, *, overwrite: bool = False, time_unit: str | None = None) -> None:
    """Write a scan's Dataset to a netCDF-4 file (engine h5netcdf), atomically.

    Parameters
    ----------
    dataset : xarray.Dataset
    path : str or path-like
        The file; an existing one is replaced only with ``overwrite=True``.
    overwrite : bool
    time_unit : {"second", "minute", "hour", "day"}, optional
        The time unit of the scan's rates and times: ``"per unit time"`` is then written as
        UDUNITS ``"h-1"`` (for hours) and the unit is stored as the ``time_unit`` attribute.
        Without it such quantities have no ``units`` and say "per unit time" in ``long_name``.

    Notes
    -----
    The file carries ``Conventions = "CF-1.10"`` and ``units`` only where UDUNITS-2 parses
    them (see the module notes); :func:`load_scan` gives back the dataset as it was.
    """
    import xarray as xr

    from .._validate import choice

    if time_unit is not None:
        choice(time_unit, "time_unit", tuple(TIME_UNITS))

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
        _encode(dataset, time_unit).to_netcdf(temporary, engine="h5netcdf")
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
