"""Local derivatives of equilibria and critical betas by the implicit function theorem (JAX).

Equilibria are roots of the model's reduced equation ``H(rho, beta; theta) = 0``
(:meth:`~switchlaw.MeanField.reduced`), so ``d rho*/d theta = -H_theta / H_rho``. A
transcritical point is a root of ``H(0, beta)`` in beta (there the low-density growth rate
changes sign) and a fold a point where ``H = H_rho = 0``; in both cases
``d beta_c/d theta = -H_theta / H_beta``. ``H`` depends on the law through the mean-field
fractions ``f_x(rho)``; for the min-information law these are the optimal marginal, whose
derivatives with respect to beta, the payoff and the state probabilities come from implicit
differentiation of its stationarity conditions (as in :func:`switchlaw.sensitivity`); JAX
differentiates the rest. Only ``dp/drho`` and ``du/drho`` of the environment itself are
finite differences (fourth order). Valid away from the betas where the law's support
changes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._errors import InputError
from .._jax import jax_float64
from .._validate import as_nonnegative
from ..decision._minimum_information import minimum_information_marginal
from ..laws._law import _sensed, decision_problem
from ..population._mean_field import MeanField
from ..population._scalar import derivative

_SUPPORT = 1e-12


def _sensed_table(model: MeanField, rho: float):
    env, u, _ = decision_problem(model.payoff, model.environment, rho, model.phenotypes)
    return env, u


_COMPILED: dict = {}


def _compiled():
    """The JAX pieces, jit-compiled once per process (eager mode compiles op by op: slow)."""
    if _COMPILED:
        return _COMPILED
    jax, jnp = jax_float64()

    def fractions(b, us, ps):
        return ps @ jax.nn.softmax(b * us, axis=1)

    def stationarity(z, b, us, ps):
        def objective(zz):
            r = jnp.concatenate([zz, 1.0 - jnp.sum(zz, keepdims=True)])
            return -jnp.sum(ps * jax.scipy.special.logsumexp(b * us + jnp.log(r)[None, :], axis=1))
        return jax.grad(objective)(z)

    def implicit(z, b, us, ps):
        # Stationarity G(z; b, u, p) = 0, so dz/dtheta = -G_z^{-1} G_theta.
        hessian = jax.jacfwd(stationarity, argnums=0)(z, b, us, ps)
        mixed = jax.jacfwd(stationarity, argnums=(1, 2, 3))(z, b, us, ps)
        return tuple(-jnp.linalg.solve(hessian, g.reshape(z.size, -1)) for g in mixed)

    def reduced_fast(ff, b, d, c, t, r):
        return jnp.dot(ff, b * (1.0 - r) - d - c * r)

    def reduced_tau(ff, b, d, c, t, r):
        return jnp.sum(ff / (1.0 - t * (b * (1.0 - r) - d - c * r))) - 1.0

    every = (0, 1, 2, 3, 4, 5)
    _COMPILED.update(
        max_entropy=jax.jit(lambda b, us, ps: (fractions(b, us, ps),
                                               *jax.jacfwd(fractions, argnums=(0, 1, 2))(b, us, ps))),
        implicit=jax.jit(implicit),
        fast=jax.jit(lambda *a: (reduced_fast(*a), jax.grad(reduced_fast, argnums=every)(*a))),
        tau=jax.jit(lambda *a: (reduced_tau(*a), jax.grad(reduced_tau, argnums=every)(*a))),
    )
    return _COMPILED


def law_jacobians(model: MeanField, rho: float, beta: float) -> dict:
    """``f`` and its derivatives in beta, the sensed payoff ``u[s, x]`` and ``p(s)`` at ``rho``."""
    compiled = _compiled()
    env, u = _sensed_table(model, rho)
    p = env.probs
    m, n = u.shape
    if model.objective == "max-entropy":
        f, d_beta, d_u, d_p = (np.asarray(a, dtype=float) for a in compiled["max_entropy"](beta, u, p))
    else:
        f, _, _ = minimum_information_marginal(u, p, beta)
        d_beta, d_u, d_p = np.zeros(n), np.zeros((n, m, n)), np.zeros((n, m))
        support = np.flatnonzero(f > _SUPPORT)
        if support.size > 1:
            r_s = f[support] / f[support].sum()
            solved = [np.asarray(a, dtype=float) for a in
                      compiled["implicit"](r_s[:-1], float(beta), u[:, support], p)]

            def embed(dz):  # derivative of z -> the full marginal (zero off the support)
                full = np.zeros((n,) + dz.shape[1:])
                full[support[:-1]] = dz
                full[support[-1]] = -dz.sum(axis=0)
                return full

            d_beta = embed(solved[0][:, 0])
            d_u[:, :, support] = embed(solved[1]).reshape(n, m, support.size)
            d_p = embed(solved[2])
    return {"f": np.asarray(f, dtype=float), "beta": d_beta, "u": d_u, "p": d_p, "env": env}


def _reduced_partials(model: MeanField, f: np.ndarray, rho: float) -> dict:
    """``H`` and its partial derivatives in ``f, b, d, c, tau, rho`` (JAX)."""
    compiled = _compiled()
    tau = model.tau
    args = (f, model.division, model.death, model.crowding, 0.0 if tau is None else float(tau), float(rho))
    value, grads = compiled["fast" if tau is None else "tau"](*args)
    names = ("f", "division", "death", "crowding", "tau", "rho")
    partials = {k: np.asarray(g, dtype=float) for k, g in zip(names, grads)}
    partials["value"] = float(value)
    if tau is None:
        partials["tau"] = np.array(math.nan)
    return partials


def _payoff_map(env) -> np.ndarray:
    """``A[s, y]``: the sensed payoff is ``A @ table`` (identity without a receptor)."""
    return env.sensed_payoff(np.eye(env.hidden_probs.size))


def _pieces(model, rho, beta, *, need_rho: bool):
    law = law_jacobians(model, rho, beta)
    h = _reduced_partials(model, law["f"], rho)
    grad_f = h["f"]
    pieces = {
        "value": h["value"],
        "beta": float(grad_f @ law["beta"]),
        "division": h["division"], "death": h["death"], "crowding": h["crowding"],
        "tau": float(h["tau"]),
        "payoff": np.einsum("x,xsk,sy->yk", grad_f, law["u"], _payoff_map(law["env"])),
    }
    if need_rho:
        dp = derivative(lambda r: _sensed(model.environment, r).probs, rho, step=1e-3)
        du = derivative(lambda r: _sensed_table(model, r)[1], rho, step=1e-3)
        df = law["p"] @ dp + np.einsum("xsk,sk->x", law["u"], du)
        pieces["rho"] = float(grad_f @ df + h["rho"])
    return pieces


@dataclass(frozen=True, repr=False)
class EquilibriumSensitivity:
    """Derivatives of an equilibrium density with respect to the model's parameters.

    Attributes
    ----------
    density, beta : float
        The equilibrium and the sensitivity it is at.
    d_density_d_beta : float
        Per (nats per payoff unit).
    d_density_d_division, d_density_d_death, d_density_d_crowding : ndarray, shape (phenotypes,)
        Per unit rate of each phenotype (time units).
    d_density_d_tau : float
        Per time unit (NaN in the fast-switching limit).
    d_density_d_payoff : ndarray, shape (states, phenotypes)
        Per payoff unit of ``u(y, x)``, the same change at every density.
    """

    density: float
    beta: float
    d_density_d_beta: float
    d_density_d_division: np.ndarray
    d_density_d_death: np.ndarray
    d_density_d_crowding: np.ndarray
    d_density_d_tau: float
    d_density_d_payoff: np.ndarray

    def __repr__(self) -> str:
        return (f"EquilibriumSensitivity(density={self.density:.6g} at beta={self.beta:.6g}: "
                f"d density/d beta={self.d_density_d_beta:.6g})")


@dataclass(frozen=True, repr=False)
class CriticalSensitivity:
    """Derivatives of a critical beta (transcritical point or fold) with respect to parameters.

    Attributes
    ----------
    kind : str
    beta, density : float
        The critical point.
    d_beta_d_division, d_beta_d_death, d_beta_d_crowding : ndarray, shape (phenotypes,)
        nats per payoff unit, per unit rate.
    d_beta_d_tau : float
        NaN in the fast-switching limit.
    d_beta_d_payoff : ndarray, shape (states, phenotypes)
        Per payoff unit of ``u(y, x)``, the same change at every density.
    """

    kind: str
    beta: float
    density: float
    d_beta_d_division: np.ndarray
    d_beta_d_death: np.ndarray
    d_beta_d_crowding: np.ndarray
    d_beta_d_tau: float
    d_beta_d_payoff: np.ndarray

    def __repr__(self) -> str:
        return (f"CriticalSensitivity({self.kind} at beta={self.beta:.6g}: d beta/d death="
                f"{np.array2string(self.d_beta_d_death, precision=4, separator=', ')})")


def _model(model) -> MeanField:
    if not isinstance(model, MeanField):
        raise InputError(f"`model` must be a MeanField (got {type(model).__name__})")
    return model


def equilibrium_sensitivity(model, beta, density) -> EquilibriumSensitivity:
    """Derivatives of a positive equilibrium by the implicit function theorem.

    Parameters
    ----------
    model : MeanField
    beta : float
        Sensitivity (nats per payoff unit).
    density : float
        A positive equilibrium at ``beta`` (from :meth:`MeanField.equilibria`), not a fold.

    Returns
    -------
    EquilibriumSensitivity

    Notes
    -----
    ``d rho*/d theta = -H_theta / H_rho`` with ``H`` the reduced equation.

    References
    ----------
    Krantz & Parks (2002), *The Implicit Function Theorem*, Birkhäuser, Thm 1.3.1.
    """
    model = _model(model)
    beta = as_nonnegative(beta, "beta")
    rho = as_nonnegative(density, "density")
    if not 0 < rho <= 1:
        raise InputError(f"`density` must be a positive equilibrium in (0, 1] (got {rho!r})")
    parts = _pieces(model, rho, beta, need_rho=True)
    if abs(parts["value"]) > 1e-7:
        raise InputError(
            f"`density` {rho!r} is not an equilibrium at beta {beta!r} (reduced equation "
            f"{parts['value']:.3g}); take one from model.equilibria(beta)"
        )
    if parts["rho"] == 0:
        raise InputError(f"`density` {rho!r} is a fold (dH/drho = 0): use critical_sensitivity")
    scale = -1.0 / parts["rho"]
    return EquilibriumSensitivity(
        density=rho, beta=beta, d_density_d_beta=scale * parts["beta"],
        d_density_d_division=scale * parts["division"], d_density_d_death=scale * parts["death"],
        d_density_d_crowding=scale * parts["crowding"], d_density_d_tau=scale * parts["tau"],
        d_density_d_payoff=scale * parts["payoff"],
    )


def critical_sensitivity(model, point) -> CriticalSensitivity:
    """Derivatives of a critical beta from :meth:`MeanField.critical_betas`.

    Parameters
    ----------
    model : MeanField
    point : CriticalPoint
        A transcritical point or fold located in beta.

    Returns
    -------
    CriticalSensitivity

    Notes
    -----
    ``d beta_c/d theta = -H_theta / H_beta`` at ``(rho_c, beta_c)``: ``rho_c = 0`` for a
    transcritical point (``H(0, beta)`` vanishes with the low-density growth rate); at a fold
    ``H_rho = 0``, so the density's own change does not enter to first order.
    """
    model = _model(model)
    kind = getattr(point, "kind", None)
    if kind not in ("transcritical", "fold") or getattr(point, "parameter", "beta") != "beta":
        raise InputError("`point` must be a transcritical point or fold located in beta "
                         f"(got {point!r})")
    parts = _pieces(model, float(point.density), float(point.beta), need_rho=False)
    if parts["beta"] == 0:
        raise InputError(f"`point`: the reduced equation does not change with beta there ({point!r})")
    scale = -1.0 / parts["beta"]
    return CriticalSensitivity(
        kind=kind, beta=float(point.beta), density=float(point.density),
        d_beta_d_division=scale * parts["division"], d_beta_d_death=scale * parts["death"],
        d_beta_d_crowding=scale * parts["crowding"], d_beta_d_tau=scale * parts["tau"],
        d_beta_d_payoff=scale * parts["payoff"],
    )
