"""Format ``netcdf``: the law as a netCDF-4 file (HDF5, via xarray's h5netcdf engine) with
CF-style attributes (``Conventions``, ``units``, ``long_name``, ``flag_values``)."""

from __future__ import annotations

from pathlib import Path

from ._provenance import law_metadata, sha256_of_law
from ._registry import Format, register
from ._tables import law_arrays, law_dataset

ENGINE = "h5netcdf"


def write(law, path: Path, *, study) -> tuple:
    digest = sha256_of_law(law)
    dataset = law_dataset(law_arrays(law), law.phenotypes, law_metadata(law, study, digest))
    return {path: bytes(dataset.to_netcdf(engine=ENGINE))}, digest


def read(path: Path):
    """The dataset stored in a netCDF file, loaded into memory and the file closed."""
    import xarray as xr

    with xr.open_dataset(path, engine=ENGINE) as stored:
        return stored.load()


FORMAT = register(Format(
    name="netcdf",
    suffixes=(".nc",),
    accepts=("SwitchingLaw",),
    options={"study": None},
    write=write,
    description="netCDF-4 file with CF-style attributes (xarray, h5netcdf engine)",
))
