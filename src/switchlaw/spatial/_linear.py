"""Linear spreading speed ``c* = min_{l > 0} s(l) / l`` and the pushed/pulled diagnostics.

For a front ``u ~ v exp(-l (x - c t))`` ahead of the bulk, the linearisation at zero density
``J0`` gives ``s(l)``, the principal eigenvalue of ``J0 + l^2 diag(D)``, and ``c(l) = s(l)/l``.
Its minimum is the linear spreading speed, the minimiser ``lambda*`` the decay rate of the
leading edge and the principal eigenvector (positive for a cooperative ``J0``) its phenotype
composition (Weinberger, Lewis & Li 2002). On a grid of spacing ``dx`` the second difference
of ``exp(-l x)`` is ``(2 cosh(l dx) - 2) / dx^2`` instead of ``l^2``: the same minimisation with
that symbol gives the speed the discretised equation runs at, and so the grid error.
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import minimize_scalar

from .._validate import as_nonnegative
from ._model import LawTable, as_diffusion, check_model, phenotype_names
from ._results import SpreadingSpeed

#: Relative tolerance of the minimisation over ``l`` (on ``log l``).
_XTOL = 1e-10


def _symbol(l, dx):
    if dx is None:
        return l * l
    return (2.0 * np.cosh(l * dx) - 2.0) / (dx * dx)


def principal(matrix: np.ndarray) -> tuple[float, np.ndarray]:
    """The eigenvalue of largest real part and its eigenvector scaled to sum one."""
    values, vectors = np.linalg.eig(matrix)
    k = int(np.argmax(values.real))
    vector = vectors[:, k].real
    vector = vector / vector.sum() if vector.sum() != 0 else vector
    return float(values[k].real), vector


def linear_speed(j0, diffusion, *, dx=None) -> tuple[float, float, np.ndarray]:
    """``(c*, lambda*, edge composition)`` of the linearisation ``j0`` (nan when ``s(0) <= 0``).

    Parameters
    ----------
    j0 : array_like, shape (m, m)
        Jacobian of the reaction at zero density (per unit time).
    diffusion : array_like, shape (m,)
        Diffusion coefficients (length^2 per unit time), at least one positive.
    dx : float, optional
        Grid spacing: the speed of the second-difference equation instead of the PDE.
    """
    j0 = np.atleast_2d(np.asarray(j0, dtype=float))
    D = np.diag(np.atleast_1d(np.asarray(diffusion, dtype=float)))
    s0, v0 = principal(j0)
    if s0 <= 0.0:
        return float("nan"), float("nan"), v0
    if D.diagonal().max() == 0.0:
        # Nothing moves at low density: s(l)/l = s0/l falls to 0 as l grows (no spread).
        return 0.0, float("inf"), v0

    def speed(log_l):
        l = np.exp(log_l)
        return principal(j0 + _symbol(l, dx) * D)[0] / l

    # c(l) -> inf at both ends; bracket its minimum on a log grid around the scalar scale
    # sqrt(s0 / Dmax), then refine (bounded Brent).
    centre = 0.5 * np.log(s0 / D.diagonal().max())
    grid = centre + np.linspace(-12.0, 12.0, 241)
    if dx is not None:
        grid = grid[np.exp(grid) * dx < 30.0]
    values = np.array([speed(g) for g in grid])
    k = int(np.argmin(values))
    lo, hi = grid[max(k - 1, 0)], grid[min(k + 1, grid.size - 1)]
    best = minimize_scalar(speed, bounds=(lo, hi), method="bounded", options={"xatol": _XTOL})
    l_star = float(np.exp(best.x))
    _, vector = principal(j0 + _symbol(l_star, dx) * D)
    return float(best.fun), l_star, vector


def zero_jacobian(model, f0: np.ndarray) -> np.ndarray:
    """Jacobian of the reaction at zero density (finite ``tau``: one row per phenotype)."""
    if model.tau is None:
        return np.array([[float(f0 @ (model.division - model.death))]])
    rate = 1.0 / model.tau
    return np.diag(model.division - model.death - rate) + rate * np.outer(f0, np.ones(f0.size))


def diagnostics(model, table: LawTable, names) -> tuple[bool, str]:
    """Whether linear determinacy is guaranteed, and a note saying why not.

    Checks on the law's density grid (common practice, no source, for the two hypotheses of
    Weinberger, Lewis & Li 2002): switching is cooperative when the inflow ``rho f_x(rho)``
    into every phenotype does not fall as density rises; growth is bounded by its
    linearisation when the per-capita growth ``g(rho)`` never exceeds ``g(0)``.
    """
    rho = table.densities
    f, slope = table(rho)
    inflow_slope = f + rho[:, None] * slope
    notes = []
    falling = inflow_slope < -1e-9
    if model.tau is not None and falling.any():
        i, x = np.argwhere(falling)[0]
        notes.append(
            f"switching is not cooperative (switching into {names[x]!r} falls as density rises, "
            f"first at density {rho[i]:.3g}): linear determinacy is not guaranteed"
        )
    net = model.division * (1.0 - rho[:, None]) - model.death - model.crowding * rho[:, None]
    g = np.einsum("ix,ix->i", f, net)
    above = g > g[0] + 1e-9 * max(1.0, abs(g[0]))
    if above.any():
        notes.append(
            f"per-capita growth rises above its zero-density value (at density {rho[np.argmax(above)]:.3g}): "
            "the front may be pushed, faster than the linear speed"
        )
    return not notes, "; ".join(notes)


def spreading_speed(model, beta, *, diffusion, table: LawTable | None = None) -> SpreadingSpeed:
    """Linear spreading speed of a population governed by a derived law.

    Parameters
    ----------
    model : MeanField
        The population model (finite ``tau`` or the fast-switching limit).
    beta : float
        Sensitivity of the law (nats per payoff unit).
    diffusion : sequence of float or mapping str -> float
        Diffusion coefficient of each phenotype (length^2 per unit time), in phenotype order or
        by name; at least one positive.

    Returns
    -------
    SpreadingSpeed
        ``speed`` (``c*``, length per unit time; ``nan`` when zero density is stable),
        ``decay_rate`` (``lambda*``, per unit length), ``edge_fractions``.

    Notes
    -----
    ``c* = min_{l > 0} s(l) / l`` with ``s(l)`` the principal eigenvalue of
    ``J0 + l^2 diag(D)``. With finite ``tau``, ``J0 = diag(b - d) - I / tau + f(0) 1^T / tau``;
    in the fast-switching limit ``J0 = g(0)`` and ``D = sum_x f_x(0) D_x``, so
    ``c* = 2 sqrt(g(0) D)`` (Fisher 1937; Kolmogorov, Petrovsky & Piskunov 1937). Fronts of
    cooperative systems whose growth is bounded by its linearisation run at ``c*`` (pulled);
    otherwise they may run faster (pushed) and ``c*`` is a lower bound only for cooperative
    systems. With a strong Allee effect zero is stable and there is no linear speed.

    References
    ----------
    Weinberger, H. F., Lewis, M. A. & Li, B. (2002). Analysis of linear determinacy for spread
    in cooperative models. *J. Math. Biol.* 45:183–218.
    van Saarloos, W. (2003). Front propagation into unstable states. *Phys. Rep.* 386:29–222.
    """
    check_model(model)
    beta = as_nonnegative(beta, "beta")
    names = phenotype_names(model)
    D = as_diffusion(diffusion, names)
    if table is None:
        table = LawTable.of(model, beta)
    f0 = table.fractions[0]
    j0 = zero_jacobian(model, f0)
    d_lin = np.array([f0 @ D]) if model.tau is None else D
    c, l_star, vector = linear_speed(j0, d_lin)
    edge = f0.copy() if model.tau is None else vector
    s0 = principal(j0)[0]
    guaranteed, note = diagnostics(model, table, names)
    if np.isnan(c):
        status, message = "stable-zero", (
            f"zero density is stable (growth rate at low density {s0:.4g} <= 0): no linear spreading speed")
    else:
        status, message = "ok", f"c* = {c:.6g} at lambda* = {l_star:.6g}"
    return SpreadingSpeed(
        speed=c, decay_rate=l_star, edge_fractions=np.clip(edge, 0.0, None) / max(np.clip(edge, 0.0, None).sum(), 1e-300),
        low_density_growth=s0, diffusion=D, phenotypes=tuple(names), beta=beta,
        linear_determinacy=guaranteed, note=note, status=status, message=message,
    )
