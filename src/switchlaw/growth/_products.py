"""Growth over one period: the log spectral radius of a product of non-negative matrices,
kept in range by renormalising as it is formed."""

from __future__ import annotations

from collections.abc import Iterable

import numpy as np


def log_spectral_radius(factors: Iterable[tuple[np.ndarray, float]]) -> float:
    """``log rho(exp(s_L) M_L ... exp(s_1) M_1)`` for factors ``(M_i, s_i)`` given in time order.

    Each ``M_i`` is non-negative, so the product is too and its spectral radius is its
    Perron root. The running product is divided by its largest entry after each factor and
    the logs of the divisors are added up, so nothing overflows. ``-inf`` if the product
    vanishes (the lineage dies out).
    """
    product = None
    log_scale = 0.0
    for matrix, shift in factors:
        product = matrix.copy() if product is None else matrix @ product
        top = product.max()
        if not top > 0:
            return -np.inf
        product /= top
        log_scale += shift + np.log(top)
    radius = np.abs(np.linalg.eigvals(product)).max()
    if not radius > 0:
        return -np.inf
    return float(log_scale + np.log(radius))


def principal_eigenvalue(matrix: np.ndarray) -> float:
    """Largest real part among the eigenvalues: the Perron root of a Metzler matrix."""
    return float(np.linalg.eigvals(matrix).real.max())
