"""Derivatives of the min-information solution by implicit differentiation (JAX, float64)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._jax import jax_float64
from .._validate import as_positive
from ..information._measures import NATS_PER_BIT
from ._solve import as_beta, check_problem, solve_checked

#: Marginal entries above this are treated as the support when differentiating.
_SUPPORT = 1e-12


@dataclass(frozen=True, repr=False)
class Sensitivity:
    """Local derivatives of the min-information solution at one beta.

    Attributes
    ----------
    beta, information_bits, expected_payoff : float
        The solution point.
    d_information_bits_d_beta : float
        bits per (nats per payoff unit).
    d_expected_payoff_d_beta : float
    d_information_bits_d_payoff : ndarray, shape (states, phenotypes)
        bits per payoff unit.
    d_expected_payoff_d_payoff : ndarray, shape (states, phenotypes)
    """

    beta: float
    information_bits: float
    expected_payoff: float
    d_information_bits_d_beta: float
    d_expected_payoff_d_beta: float
    d_information_bits_d_payoff: np.ndarray
    d_expected_payoff_d_payoff: np.ndarray

    def __repr__(self) -> str:
        return (
            f"Sensitivity(beta={self.beta:.6g}: dI/dbeta={self.d_information_bits_d_beta:.6g} "
            f"bits, dE[u]/dbeta={self.d_expected_payoff_d_beta:.6g})"
        )


def sensitivity(payoff, env, beta) -> Sensitivity:
    """Derivatives of ``I(X;Y)`` and ``E[u]`` at the min-information optimum.

    The optimal marginal on its support solves the stationarity conditions of the convex
    problem ``min_r -sum_y p(y) log sum_x r(x) exp(beta u(y,x))`` on the simplex; the implicit
    function theorem gives its derivative with respect to ``beta`` and ``payoff``, and JAX
    differentiates the rest. Valid away from critical betas (where the support changes, the
    derivatives jump). Phenotypes outside the support have zero payoff derivatives.

    Parameters
    ----------
    payoff : array_like, shape (states, phenotypes)
    env : array_like, shape (states,), or an environment with ``.probs``
    beta : float, > 0

    Returns
    -------
    Sensitivity
    """
    u, p = check_problem(payoff, env)
    beta = as_positive(as_beta(beta), "beta")
    policy = solve_checked(u, p, beta)
    support = np.flatnonzero(policy.marginal > _SUPPORT)
    m, n = u.shape
    d_i_d_u = np.zeros((m, n))
    d_e_d_u = np.zeros((m, n))
    if support.size == 1:
        d_e_d_u[:, support[0]] = p
        return Sensitivity(beta, policy.information_bits, policy.expected_payoff, 0.0, 0.0,
                           d_i_d_u, d_e_d_u)
    jax, jnp = jax_float64()
    keep = p > 0
    pk = jnp.asarray(p[keep])

    def marginal(z):
        return jnp.concatenate([z, 1.0 - jnp.sum(z, keepdims=True)])

    def objective(z, b, us):
        logits = b * us + jnp.log(marginal(z))[None, :]
        return -jnp.sum(pk * jax.scipy.special.logsumexp(logits, axis=1))

    def outcomes(z, b, us):
        r = marginal(z)
        logits = b * us + jnp.log(r)[None, :]
        log_q = logits - jax.scipy.special.logsumexp(logits, axis=1, keepdims=True)
        q = jnp.exp(log_q)
        info = jnp.sum(pk[:, None] * q * (log_q - jnp.log(r)[None, :])) / NATS_PER_BIT
        gain = jnp.sum(pk[:, None] * q * us)
        return jnp.stack([info, gain])

    z0 = jnp.asarray(policy.marginal[support][:-1] / policy.marginal[support].sum())
    us = jnp.asarray(u[keep][:, support])
    gradient = jax.grad(objective, argnums=0)
    hessian = jax.jacfwd(gradient, argnums=0)(z0, beta, us)
    mixed_beta = jax.jacfwd(gradient, argnums=1)(z0, beta, us)
    mixed_u = jax.jacfwd(gradient, argnums=2)(z0, beta, us)
    dz_dbeta = -jnp.linalg.solve(hessian, mixed_beta)
    dz_du = -jnp.linalg.solve(hessian, mixed_u.reshape(z0.size, -1)).reshape(mixed_u.shape)
    partial_z, partial_beta, partial_u = jax.jacfwd(outcomes, argnums=(0, 1, 2))(z0, beta, us)
    total_beta = partial_beta + partial_z @ dz_dbeta
    total_u = partial_u + jnp.einsum("oz,zyx->oyx", partial_z, dz_du)
    rows = np.flatnonzero(keep)
    d_i_d_u[np.ix_(rows, support)] = np.asarray(total_u[0])
    d_e_d_u[np.ix_(rows, support)] = np.asarray(total_u[1])
    return Sensitivity(
        beta=beta,
        information_bits=policy.information_bits,
        expected_payoff=policy.expected_payoff,
        d_information_bits_d_beta=float(total_beta[0]),
        d_expected_payoff_d_beta=float(total_beta[1]),
        d_information_bits_d_payoff=d_i_d_u,
        d_expected_payoff_d_payoff=d_e_d_u,
    )
