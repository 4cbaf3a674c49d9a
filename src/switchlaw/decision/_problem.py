"""The minimum-information problem reduced to its marginal.

For fixed marginal ``r`` the best policy is ``q(x|y) = r(x) exp(beta u(y,x)) / Z(y)``, so
minimising ``I(X;Y) - beta E[u]`` is the convex problem over the simplex

    F(r) = -sum_y p(y) log sum_x r(x) exp(beta u(y, x))

(Blahut 1972). Its gradient is ``-c`` with ``c(x) = sum_y p(y) exp(beta u(y,x)) / Z(y)``;
``F(r) - min F <= log max_x c(x)`` certifies how far ``r`` is from optimal.

Exponentials are precomputed once per beta, shifted by each row's maximum so that they lie in
``[0, 1]``. Rows whose partition sum underflows (large beta with the state's best phenotype
almost unused) are recomputed in log domain; only those rows pay for it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import logsumexp

#: Partition sums below this are recomputed in log domain.
_UNDERFLOW = 1e-250
#: Cap for ``exp(beta u) / Z`` of phenotypes outside the support (avoids inf - inf).
_BIG = 1e300


@dataclass(frozen=True)
class Reduced:
    """A min-information problem at one beta, restricted to states with ``p(y) > 0``.

    Attributes
    ----------
    p : (m,) probabilities of the retained states.
    shifted : (m, n) ``beta * (u(y, x) - max_x u(y, x))``, all <= 0.
    expo : (m, n) ``exp(shifted)``.
    offset : float, ``beta * sum_y p(y) max_x u(y, x)`` (added back to the objective).
    """

    p: np.ndarray
    shifted: np.ndarray
    expo: np.ndarray
    offset: float

    @classmethod
    def build(cls, payoff: np.ndarray, env: np.ndarray, beta: float) -> "Reduced":
        keep = env > 0
        u = payoff[keep]
        p = env[keep]
        row_max = u.max(axis=1)
        shifted = beta * (u - row_max[:, None])
        return cls(p=p, shifted=shifted, expo=np.exp(shifted), offset=float(beta * (p @ row_max)))

    @property
    def n_phenotypes(self) -> int:
        return self.expo.shape[1]


@dataclass(frozen=True)
class Evaluation:
    """``F(r)``, ``c(r)`` and the per-state ratios ``exp(beta u) / Z`` at one marginal."""

    objective: float
    log_z: np.ndarray
    ratio: np.ndarray
    c: np.ndarray


def log_partition(problem: Reduced, r: np.ndarray) -> np.ndarray:
    """``log sum_x r(x) exp(shifted(y, x))`` per state, log domain only where needed."""
    z = problem.expo @ r
    low = ~(z > _UNDERFLOW)
    with np.errstate(divide="ignore"):
        log_z = np.log(z)
        if low.any():
            log_z[low] = logsumexp(problem.shifted[low] + np.log(r)[None, :], axis=1)
    return log_z


def objective(problem: Reduced, r: np.ndarray) -> float:
    """``F(r) = I - beta E[u]`` of the best policy with marginal ``r`` (nats)."""
    return float(-(problem.p @ log_partition(problem, r)) - problem.offset)


def evaluate(problem: Reduced, r: np.ndarray) -> Evaluation:
    """Objective, gradient information and ratios at ``r``."""
    z = problem.expo @ r
    low = ~(z > _UNDERFLOW)
    with np.errstate(divide="ignore", over="ignore"):
        log_z = np.log(z)
        ratio = problem.expo / z[:, None]
        if low.any():
            log_z[low] = logsumexp(problem.shifted[low] + np.log(r)[None, :], axis=1)
            ratio[low] = np.exp(problem.shifted[low] - log_z[low, None])
    np.minimum(ratio, _BIG, out=ratio)
    c = problem.p @ ratio
    return Evaluation(
        objective=float(-(problem.p @ log_z) - problem.offset), log_z=log_z, ratio=ratio, c=c
    )


def policy_from_marginal(payoff: np.ndarray, beta: float, r: np.ndarray) -> np.ndarray:
    """``q(x|y) ∝ r(x) exp(beta u(y,x))`` for every state, computed in log domain."""
    with np.errstate(divide="ignore"):
        logits = beta * payoff + np.log(r)[None, :]
    logits -= logits.max(axis=1, keepdims=True)
    q = np.exp(logits)
    q /= q.sum(axis=1, keepdims=True)
    return q
