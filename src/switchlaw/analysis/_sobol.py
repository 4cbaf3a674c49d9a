"""Global sensitivity: Sobol' first- and total-order indices from a Saltelli design.

With ``f_A``, ``f_B`` and ``f_ABi`` the model outputs on the blocks of
:func:`saltelli_design` (``N`` points each):

- first order (Saltelli et al. 2010, Table 2 (b)): ``V_i = mean(f_B (f_ABi - f_A))``;
- total order (Jansen 1999; Saltelli et al. 2010, Table 2 (f)):
  ``VT_i = mean((f_A - f_ABi)^2) / 2``;
- ``S_i = V_i / V``, ``ST_i = VT_i / V``, with ``V`` the variance of ``f_A`` and ``f_B``
  together.

Standard errors come from a bootstrap over the ``N`` rows (the rows of every block are
resampled together); for quasi-random points they are conservative.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._errors import InputError
from ._designs import Design
from ._seeds import root_seed


@dataclass(frozen=True, repr=False)
class SobolIndices:
    """First- and total-order Sobol' indices of one scalar output.

    Attributes
    ----------
    names : tuple of str
        Input parameters.
    first_order, total_order : ndarray, shape (parameters,)
        ``S_i`` and ``ST_i`` (dimensionless).
    first_order_error, total_order_error : ndarray, shape (parameters,)
        Bootstrap standard errors.
    variance : float
        Variance of the output (output units squared).
    base_samples : int
    """

    names: tuple
    first_order: np.ndarray
    total_order: np.ndarray
    first_order_error: np.ndarray
    total_order_error: np.ndarray
    variance: float
    base_samples: int

    def to_xarray(self):
        """The indices as an ``xarray.Dataset`` along ``parameter``."""
        import xarray as xr

        dims = ("parameter",)
        return xr.Dataset(
            {
                "first_order": (dims, self.first_order, {"long_name": "first-order Sobol' index", "units": "1"}),
                "total_order": (dims, self.total_order, {"long_name": "total-order Sobol' index", "units": "1"}),
                "first_order_error": (dims, self.first_order_error, {"long_name": "bootstrap standard error of the first-order index", "units": "1"}),
                "total_order_error": (dims, self.total_order_error, {"long_name": "bootstrap standard error of the total-order index", "units": "1"}),
            },
            coords={"parameter": ("parameter", np.array(self.names, dtype=str))},
            attrs={"variance": self.variance, "base_samples": self.base_samples},
        )

    def __repr__(self) -> str:
        cells = ", ".join(f"{n}: S={s:.3f} ST={t:.3f}" for n, s, t in
                          zip(self.names, self.first_order, self.total_order))
        return f"SobolIndices(N={self.base_samples}; {cells})"


def _estimate(f_a, f_b, f_ab):
    """``(S, ST, V)``; NaN indices when the output does not vary (``V = 0``)."""
    variance = float(np.var(np.concatenate([f_a, f_b])))
    if variance == 0:
        return np.full(f_ab.shape[0], np.nan), np.full(f_ab.shape[0], np.nan), variance
    first = np.mean(f_b[None, :] * (f_ab - f_a[None, :]), axis=1) / variance
    total = 0.5 * np.mean((f_a[None, :] - f_ab) ** 2, axis=1) / variance
    return first, total, variance


def sobol_indices(values, design, *, resamples: int = 200, seed=0) -> SobolIndices:
    """Sobol' indices of a scalar output scanned over a :func:`saltelli_design`.

    Parameters
    ----------
    values : array_like or xarray.DataArray, shape (points,)
        The output at each design point, in design order (e.g. ``dataset["information"]``
        from ``scan(function, design)``).
    design : Design
        The Saltelli design the values were computed on.
    resamples : int
        Bootstrap resamples for the standard errors (0 for none).
    seed : int
        Seed of the bootstrap.

    Returns
    -------
    SobolIndices

    References
    ----------
    Sobol' (2001), *Math. Comput. Simul.* 55:271; Saltelli, Annoni, Azzini, Campolongo, Ratto
    & Tarantola (2010), *Comput. Phys. Commun.* 181:259; Jansen (1999), *Comput. Phys.
    Commun.* 117:35.
    """
    if not isinstance(design, Design) or design.kind != "saltelli":
        raise InputError("`design` must be the Design from saltelli_design that `values` were computed on")
    array = np.asarray(getattr(values, "values", values), dtype=float)
    if array.ndim != 1 or array.size != len(design):
        raise InputError(
            f"`values` must hold one scalar per design point ({len(design)}) (got shape {array.shape})"
        )
    if not np.isfinite(array).all():
        raise InputError(f"`values` must be finite; point {int(np.argmax(~np.isfinite(array)))} is not")
    if isinstance(resamples, bool) or not isinstance(resamples, (int, np.integer)) or resamples < 0:
        raise InputError(f"`resamples` must be a non-negative integer (got {resamples!r})")
    n, k = design.base_samples, len(design.names)
    blocks = array.reshape(k + 2, n)
    f_a, f_b, f_ab = blocks[0], blocks[1], blocks[2:]
    first, total, variance = _estimate(f_a, f_b, f_ab)
    if variance == 0:
        raise InputError("`values` do not vary over the design: the indices are undefined")
    errors_first = np.full(k, np.nan)
    errors_total = np.full(k, np.nan)
    if resamples:
        rng = np.random.default_rng(root_seed(seed))
        draws = [_estimate(f_a[j], f_b[j], f_ab[:, j])[:2]
                 for j in (rng.integers(0, n, n) for _ in range(resamples))]
        errors_first = np.nanstd([d[0] for d in draws], axis=0, ddof=1)
        errors_total = np.nanstd([d[1] for d in draws], axis=0, ddof=1)
    return SobolIndices(design.names, first, total, errors_first, errors_total, float(variance), n)
