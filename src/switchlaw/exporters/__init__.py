"""Stage 7 of the pipeline: writing laws and models for other simulators.

One module per format behind a small registry; :func:`export` is the single entry point and
:func:`read_table` reads the tables back. Formats, in registration order:

- ``csv``: long-format table (density x state x phenotype) with a JSON sidecar;
- ``json``: the whole law in one JSON document (schema ``law.schema.json``);
- ``netcdf``: netCDF-4 with CF-style attributes;
- ``step-table``: per-step switching probabilities for discrete-time simulators (CSV + sidecar);
- ``sbml``: the mean-field model as SBML Level 3 Version 2;
- ``python``, ``c``, ``latex``: a closed-form fit as code, with its error against the law.

See ``docs/file-formats.md`` for every schema.
"""

from . import _csv, _json, _netcdf, _step_table, _sbml, _python, _c, _latex  # noqa: F401  (registration order)
from ._read import read_table
from ._registry import Exported, export, formats

#: Names accepted by ``export(..., format=...)``.
EXPORT_FORMATS = formats()

__all__ = ["EXPORT_FORMATS", "Exported", "export", "read_table"]
