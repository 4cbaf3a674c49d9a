"""The likelihood of observed phenotype counts under a derived law, and its gradient.

The law is ``q(x | s, rho) ∝ r(x) exp(beta u(s, x))`` over the states ``s`` the cell decides
on: ``r`` uniform under maximum entropy (a softmax), the self-consistent marginal under minimum
information. Observed per-cell counts give ``sum n(y, x) log q_obs(x | y)`` with
``q_obs = W q`` through a receptor channel ``W(s | y)`` (``q`` itself without one); counts of
phenotypes only give ``sum n(x) log f(x)`` with ``f = sum_s p(s | rho) q(x | s, rho)``.

Gradients: JAX differentiates the likelihood in ``beta`` and the payoff table exactly; under
minimum information the marginal's dependence on them comes from the implicit function theorem
at the solver's solution (as in :func:`switchlaw.sensitivity`); the user's payoff function is
differentiated in its own parameters by central differences.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from .._jax import jax_float64
from ..decision._minimum_information import minimum_information_marginal

#: Marginal entries above this count as the support when differentiating (as in decision/).
_SUPPORT = 1e-12


@dataclass(frozen=True)
class Conditions:
    """What the law sees at each observed condition (fixed during a fit).

    Attributes
    ----------
    probs : ndarray, shape (k, m)
        ``p(s | rho_i)`` over the states the cell decides on.
    log_channel : ndarray, shape (k, m_obs, m) or None
        ``log W(s | y)`` from observed (true) states to sensed states; ``None`` without a
        receptor.
    """

    probs: np.ndarray
    log_channel: np.ndarray | None


@lru_cache(maxsize=None)
def _observed_functions(kind: str, noisy: bool):
    """Jitted ``L(beta, U, log_r)`` and its gradient for one data kind."""
    jax, jnp = jax_float64()
    from jax.scipy.special import logsumexp

    def log_likelihood(beta, U, log_r, support, counts, probs, log_channel):
        logits = jnp.where(support[:, None, :], beta * U + jnp.where(support, log_r, 0.0)[:, None, :], -jnp.inf)
        log_q = logits - logsumexp(logits, axis=2, keepdims=True)  # [k, s, x]
        if kind == "states":
            if noisy:
                log_q = logsumexp(log_channel[:, :, :, None] + log_q[:, None, :, :], axis=2)
            terms = jnp.where(counts > 0, counts * jnp.where(counts > 0, log_q, 0.0), 0.0)
        else:
            log_p = jnp.where(probs > 0, jnp.log(jnp.where(probs > 0, probs, 1.0)), -jnp.inf)
            log_f = logsumexp(log_p[:, :, None] + log_q, axis=1)  # [k, x]
            terms = jnp.where(counts > 0, counts * jnp.where(counts > 0, log_f, 0.0), 0.0)
        return jnp.sum(terms)

    value_and_grad = jax.jit(jax.value_and_grad(log_likelihood, argnums=(0, 1, 2)))
    value = jax.jit(log_likelihood)
    return value, value_and_grad


@lru_cache(maxsize=None)
def _marginal_functions():
    """Jitted stationarity pieces of the reduced min-information problem on a support."""
    jax, jnp = jax_float64()
    from jax.scipy.special import logsumexp

    def objective(z, beta, U, p):
        r = jnp.concatenate([z, 1.0 - jnp.sum(z, keepdims=True)])
        return -jnp.sum(p * logsumexp(beta * U + jnp.log(r)[None, :], axis=1))

    gradient = jax.grad(objective, argnums=0)
    hessian = jax.jit(jax.jacfwd(gradient, argnums=0))

    @jax.jit
    def pullback(z, beta, U, p, lam):
        _, vjp = jax.vjp(lambda b, u: gradient(z, b, u, p), beta, U)
        return vjp(lam)

    return hessian, pullback


def marginals(U: np.ndarray, probs: np.ndarray, beta: float, objective: str, starts=None) -> np.ndarray:
    """``r(x | rho_i)`` for every condition: uniform (max-entropy) or the optimal marginal."""
    k, _, n = U.shape
    if objective == "max-entropy":
        return np.full((k, n), 1.0 / n)
    out = np.empty((k, n))
    for i in range(k):
        keep = probs[i] > 0
        start = None if starts is None else starts[i]
        r, _, _ = minimum_information_marginal(U[i][keep], probs[i][keep], float(beta), start=start)
        out[i] = r
    return out


def log_likelihood(kind: str, counts, conditions: Conditions, U, beta: float, objective: str,
                   *, with_gradient: bool, starts=None):
    """``(L, dL/dbeta, dL/dU, r)`` (the two derivatives ``None`` without ``with_gradient``).

    ``U`` is the payoff over decided-on states, shape ``(k, m, n)``; ``counts`` is
    ``(k, m_obs, n)`` per-cell counts (``kind="states"``) or ``(k, n)`` (``"fractions"``).
    """
    if objective == "max-entropy" and kind == "states" and conditions.log_channel is None:
        return _softmax_states(counts, U, beta, with_gradient)
    _, jnp = jax_float64()
    r = marginals(U, conditions.probs, beta, objective, starts)
    support = r > _SUPPORT
    with np.errstate(divide="ignore"):
        log_r = np.where(support, np.log(np.where(support, r, 1.0)), 0.0)
    noisy = conditions.log_channel is not None
    log_channel = conditions.log_channel if noisy else np.zeros((1, 1, 1))
    value_fn, grad_fn = _observed_functions(kind, noisy)
    # numpy arrays go straight into the jitted functions (cheaper than jnp.asarray per call).
    args = (np.float64(beta), np.asarray(U, dtype=float), log_r, support,
            np.asarray(counts, dtype=float), conditions.probs, log_channel)
    if not with_gradient:
        return float(value_fn(*args)), None, None, r
    value, (d_beta, d_U, d_log_r) = grad_fn(*args)
    value = float(value)
    d_beta = float(d_beta)
    d_U = np.array(d_U)
    if objective == "min-information" and np.isfinite(value):
        hessian, pullback = _marginal_functions()
        d_log_r = np.asarray(d_log_r)
        for i in range(U.shape[0]):
            on = np.flatnonzero(support[i])
            keep = conditions.probs[i] > 0
            if on.size < 2:
                continue
            ri = r[i, on]
            # dL/dz with r = [z, 1 - sum z]: dL/dr_x = dL/dlog r_x / r_x.
            d_r = d_log_r[i, on] / ri
            d_z = d_r[:-1] - d_r[-1]
            z = jnp.asarray(ri[:-1] / ri.sum())
            Ui = jnp.asarray(U[i][np.ix_(keep, on)])
            pi = jnp.asarray(conditions.probs[i][keep])
            lam = np.linalg.solve(np.asarray(hessian(z, float(beta), Ui, pi)), d_z)
            c_beta, c_U = pullback(z, float(beta), Ui, pi, jnp.asarray(lam))
            d_beta -= float(c_beta)
            d_U[i][np.ix_(keep, on)] -= np.asarray(c_U)
    return value, d_beta, d_U, r


def _softmax_states(counts, U, beta: float, with_gradient: bool):
    """Per-cell counts under a softmax law: the multinomial-logit likelihood and its exact
    gradient in closed form (``dL/d(beta u) = n - N q``), no solver and no JAX needed."""
    from scipy.special import log_softmax

    log_q = log_softmax(beta * U, axis=2)
    value = float(np.sum(counts * log_q))
    r = np.full((U.shape[0], U.shape[2]), 1.0 / U.shape[2])
    if not with_gradient:
        return value, None, None, r
    residual = counts - counts.sum(axis=2, keepdims=True) * np.exp(log_q)
    return value, float(np.sum(residual * U)), beta * residual, r


def law_probs(U: np.ndarray, r: np.ndarray, beta: float) -> np.ndarray:
    """``q(x | s, rho_i)`` from payoffs ``U[k, m, n]`` and marginals ``r[k, n]``."""
    from scipy.special import softmax

    with np.errstate(divide="ignore"):
        logits = beta * U + np.log(r)[:, None, :]
    return softmax(logits, axis=2)
