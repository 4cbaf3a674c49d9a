"""Stage 5 of the pipeline: scans over beta and every other parameter, and sensitivities.

:func:`scan` evaluates any point function over a full factorial grid or a space-filling
design — serially, in local processes, or on a Dask cluster — with one seed per point,
checkpoints to resume, and a labelled ``xarray.Dataset`` as the result
(:func:`save_scan` / :func:`load_scan` keep it as netCDF). Point functions for the common
cases (:class:`LawSummary`, :class:`RegimeSummary`, :class:`CriticalBetas`,
:class:`ExtinctionRisk`) come ready. Local derivatives of equilibria and critical betas use
the implicit function theorem; global Sobol' indices use a Saltelli design.
"""

from ._checkpoint import CheckpointWarning
from ._designs import Design, latin_hypercube, saltelli_design, sobol_points
from ._local import (
    CriticalSensitivity,
    EquilibriumSensitivity,
    critical_sensitivity,
    equilibrium_sensitivity,
)
from ._netcdf import load_scan, save_scan
from ._points import CriticalBetas, ExtinctionRisk, LawSummary, RegimeSummary
from ._quantity import Quantity
from ._scan import scan
from ._sobol import SobolIndices, sobol_indices

__all__ = [
    "CheckpointWarning",
    "CriticalBetas",
    "CriticalSensitivity",
    "Design",
    "EquilibriumSensitivity",
    "ExtinctionRisk",
    "LawSummary",
    "Quantity",
    "RegimeSummary",
    "SobolIndices",
    "critical_sensitivity",
    "equilibrium_sensitivity",
    "latin_hypercube",
    "load_scan",
    "saltelli_design",
    "save_scan",
    "scan",
    "sobol_indices",
    "sobol_points",
]
