"""Reading exported tables back, for round trips and for users' own scripts."""

from __future__ import annotations

from pathlib import Path

from .._errors import InputError
from . import _csv, _json, _netcdf, _step_table
from ._tables import LAW_KIND, load_document, verified


def read_table(path):
    """Read a table written by :func:`switchlaw.export` back as an ``xarray.Dataset``.

    Parameters
    ----------
    path : str or Path
        A ``.csv`` table (its sidecar ``<path>.json`` is read too), a ``.json`` law document
        or a ``.nc`` netCDF file.

    Returns
    -------
    xarray.Dataset
        A law table gives ``probability[density, state, phenotype]``,
        ``state_probability[density, state]``, ``fraction[density, phenotype]``, ``beta``,
        ``information_bits``, ``expected_payoff`` and ``converged`` per density, with units
        and the provenance record as attributes; the same dataset whichever format it came
        from. A step table gives ``step_probability[density, state, from_phenotype,
        to_phenotype]`` with ``dt``, ``tau`` and ``time_unit`` as attributes.

    Raises
    ------
    InputError
        A missing or malformed file, or a law table whose arrays no longer match the
        ``inputs_sha256`` recorded when it was written.
    """
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix == ".nc":
        if not path.exists():
            raise InputError(f"`path` {str(path)!r} does not exist")
        return verified(_netcdf.read(path), path)
    if suffix == ".json":
        document = load_document(path)
        if document.get("layout") == "csv":
            return read_table(path.with_name(document["csv"]["file"]))
        return verified(_json.read(document, path), path)
    if suffix == ".csv":
        sidecar = load_document(_csv.sidecar_path(path))
        if sidecar["kind"] == LAW_KIND:
            return verified(_csv.read(path, sidecar), path)
        return _step_table.read(path, sidecar)
    raise InputError(f"`path` must end in '.csv', '.json' or '.nc' (got {path.name!r})")
