"""Pseudo-arclength continuation of equilibrium branches in beta, with folds and
transcritical points located.

Branches are curves ``H(rho, beta) = 0`` of the model's reduced equation (see
:meth:`MeanField.reduced`). Steps are taken in ``(rho, s)`` with ``s`` beta rescaled to the
requested range, so that both coordinates have unit scale (Keller 1977; Allgower & Georg 1990,
*Numerical Continuation Methods*).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq, minimize_scalar

_STEP = 1e-6


@dataclass(frozen=True, repr=False)
class CriticalPoint:
    """A parameter value where the equilibria change qualitatively.

    Attributes
    ----------
    beta : float
        Sensitivity at the point (the located value when continuing in beta).
    kind : str
        ``"transcritical"`` (the zero state changes stability as a positive branch crosses it)
        or ``"fold"`` (two positive equilibria meet and vanish).
    density : float
        Density of the equilibrium at the critical point (0 for transcritical points).
    parameter : str
        The continued parameter (``"beta"``, ``"cost_per_bit"``, ``"death_scale"``,
        ``"division_scale"`` or ``"tau"``).
    value : float
        The located value of that parameter.
    """

    beta: float
    kind: str
    density: float
    parameter: str = "beta"
    value: float = float("nan")

    def __repr__(self) -> str:
        where = f"beta={self.beta:.10g}" if self.parameter == "beta" else (
            f"{self.parameter}={self.value:.10g} (beta={self.beta:.6g})"
        )
        return f"CriticalPoint({self.kind} at {where}, density={self.density:.6g})"


@dataclass(frozen=True, repr=False)
class Branch:
    """Points along one branch of positive equilibria, in continuation order.

    ``values`` holds the continued parameter (beta unless the diagram says otherwise).
    """

    densities: np.ndarray
    values: np.ndarray
    stable: np.ndarray
    ended: str = ""

    @property
    def failed(self) -> bool:
        """True when continuation stopped because the corrector failed."""
        return self.ended.startswith("FAILED")

    @property
    def betas(self) -> np.ndarray:
        """Alias of ``values`` for continuation in beta."""
        return self.values

    def __repr__(self) -> str:
        return (
            f"Branch({self.densities.size} points, parameter {self.values.min():.4g}–"
            f"{self.values.max():.4g}, density {self.densities.min():.4g}–{self.densities.max():.4g}; "
            f"{self.ended or 'ended'})"
        )


@dataclass(frozen=True, repr=False)
class BifurcationDiagram:
    """Equilibrium branches over a parameter range and the critical points on them.

    Attributes
    ----------
    parameter : str
    value_range : tuple of float
    branches : tuple of Branch
        Positive equilibria (the zero state is always an equilibrium).
    zero_values, zero_stable : ndarray
        Samples of the parameter and whether the zero state is stable there.
    critical_points : tuple of CriticalPoint, by increasing parameter value

    ``complete`` is False when some branch's continuation failed (see ``Branch.ended``).
    """

    parameter: str
    value_range: tuple
    branches: tuple
    zero_values: np.ndarray
    zero_stable: np.ndarray
    critical_points: tuple

    @property
    def complete(self) -> bool:
        return not any(branch.failed for branch in self.branches)

    def __repr__(self) -> str:
        crit = ", ".join(f"{c.kind} {c.value:.6g}" for c in self.critical_points) or "none"
        return (
            f"BifurcationDiagram(in {self.parameter}, {len(self.branches)} branches, "
            f"critical points: {crit})"
        )


def _gradient(H, rho, beta):
    lo, hi = max(rho - _STEP, 0.0), min(rho + _STEP, 1.0)
    # Both densities in one vector call of the reduced equation (H may also give one value,
    # NaN, outside its parameter's domain).
    h_lo, h_hi = np.broadcast_to(H(np.array([lo, hi]), beta), (2,))
    h_rho = (h_hi - h_lo) / (hi - lo)
    b_lo = max(beta - _STEP * max(1.0, beta), 0.0)
    b_hi = beta + _STEP * max(1.0, beta)
    h_beta = (H(rho, b_hi) - H(rho, b_lo)) / (b_hi - b_lo)
    return np.array([h_rho, h_beta])


def trace_branch(H, rho, beta, *, direction, beta_min, beta_max, ds=0.01, max_points=4000):
    """Follow ``H = 0`` from ``(rho, beta)``; ``direction`` orients the first step.

    ``direction`` is ``(d_rho, d_beta)``: the first tangent has a positive dot product with it.
    Stops when the branch leaves ``beta_min <= beta <= beta_max`` or ``0 < rho <= 1``.
    Returns arrays of densities, betas, ``dH/drho`` at each point, and how the branch ended.
    """
    width = beta_max - beta_min
    scale = np.array([1.0, width])
    z = np.array([rho, (beta - beta_min) / width])

    def h_scaled(zz):
        beta_here = beta_min + zz[1] * width
        if not (0.0 <= zz[0] <= 1.0) or beta_here < 0:
            return np.nan  # outside the feasible region: the step is shortened
        return H(zz[0], beta_here)

    def grad_scaled(zz):
        return _gradient(H, zz[0], beta_min + zz[1] * width) * scale

    g = grad_scaled(z)
    tangent = np.array([-g[1], g[0]]) / np.hypot(*g)
    if tangent @ (np.asarray(direction, dtype=float) * np.array([1.0, 1.0 / width])) < 0:
        tangent = -tangent
    points = [z.copy()]
    slopes = [g[0] / scale[0]]
    step = ds
    while len(points) < max_points and step > 1e-9:
        guess = z + step * tangent
        trial = guess.copy()
        ok = False
        # Chord Newton: the gradient at the last accepted point serves every iteration.
        system = np.array([g, tangent])
        for _ in range(10):
            value = h_scaled(trial)
            if not np.isfinite(value):
                break
            rhs = -np.array([value, tangent @ (trial - guess)])
            try:
                delta = np.linalg.solve(system, rhs)
            except np.linalg.LinAlgError:
                break
            trial = trial + delta
            if np.abs(delta).max() < 1e-12:
                ok = abs(h_scaled(trial)) < 1e-10
                break
        if not ok:
            step *= 0.5
            continue
        g = grad_scaled(trial)
        new_tangent = np.array([-g[1], g[0]]) / np.hypot(*g)
        if new_tangent @ tangent < 0:
            new_tangent = -new_tangent
        z, tangent = trial, new_tangent
        points.append(z.copy())
        slopes.append(g[0] / scale[0])
        step = min(step * 1.3, 2 * ds)
        if not (0.0 < z[0] <= 1.0) or not (0.0 <= z[1] <= 1.0):
            break
    arr = np.array(points)
    last_rho, last_beta = arr[-1, 0], beta_min + arr[-1, 1] * width
    if not (0.0 <= arr[-1, 1] <= 1.0):
        ended = "left the parameter range"
    elif arr[-1, 0] <= 1e-6:
        ended = "reached zero density"  # the branch meets the zero state (transcritical)
    elif arr[-1, 0] > 1.0:
        ended = "reached full density"
    elif len(points) >= max_points:
        ended = f"stopped at the point limit ({max_points}) at density {last_rho:.6g}, value {last_beta:.6g}"
    else:
        ended = (
            f"FAILED: the corrector did not converge at density {last_rho:.6g}, value "
            f"{last_beta:.6g} (step size below 1e-9)"
        )
    return arr[:, 0], beta_min + arr[:, 1] * width, np.array(slopes), ended


def locate_fold(H, rho_a, rho_b, beta_guess, *, maximum: bool) -> tuple[float, float]:
    """Fold between branch densities ``rho_a`` and ``rho_b``: the extremum of ``beta(rho)``.

    At a fold ``d beta / d rho = 0``; each density near it has one beta on the branch (found by
    Brent's method around ``beta_guess``), so the fold is an extremum of ``beta(rho)``, located
    by bounded minimisation. Because beta is stationary there, its error is quadratic in the
    density error. Returns ``(density, beta)``.
    """
    width = 1e-3 * max(1.0, abs(beta_guess))

    def beta_of(rho):
        lo, hi = max(beta_guess - width, 0.0), beta_guess + width
        for _ in range(40):
            f_lo, f_hi = H(rho, lo), H(rho, hi)
            if np.isfinite(f_lo) and np.isfinite(f_hi) and f_lo * f_hi <= 0:
                return brentq(lambda b: H(rho, b), lo, hi, xtol=1e-14, rtol=4 * np.finfo(float).eps)
            lo, hi = max(lo - 2 * (hi - lo), 0.0), hi + 2 * (hi - lo)
        return np.nan

    a, b = sorted((rho_a, rho_b))
    pad = 0.5 * (b - a) + 1e-9
    a, b = max(a - pad, 1e-12), min(b + pad, 1.0)
    sign = 1.0 if maximum else -1.0
    found = minimize_scalar(
        lambda r: -sign * beta_of(r), bounds=(a, b), method="bounded", options={"xatol": 1e-11}
    )
    return float(found.x), float(-sign * found.fun)
