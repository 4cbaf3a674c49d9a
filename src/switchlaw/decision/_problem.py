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
from functools import cached_property

import numpy as np
from scipy.special import logsumexp

#: Partition sums below this are recomputed in log domain.
UNDERFLOW = 1e-250
#: Cap for ``exp(beta u) / Z`` of phenotypes outside the support (avoids inf - inf).
_BIG = 1e300


@dataclass(frozen=True)
class Gaps:
    """The beta-independent part of a problem: ``u(y, x) - max_x u(y, x)`` on states with ``p(y) > 0``.

    Built once per payoff table and shared by every beta of a curve.
    """

    p: np.ndarray
    gaps: np.ndarray
    mean_row_max: float

    @classmethod
    def build(cls, payoff: np.ndarray, env: np.ndarray) -> "Gaps":
        keep = env > 0
        u = payoff[keep]
        p = env[keep]
        row_max = u.max(axis=1)
        return cls(p=p, gaps=u - row_max[:, None], mean_row_max=float(p @ row_max))

    def at(self, beta: float) -> "Reduced":
        return Reduced(
            p=self.p, gaps=self.gaps, beta=beta, expo=np.exp(beta * self.gaps),
            offset=beta * self.mean_row_max,
        )


@dataclass(frozen=True)
class Reduced:
    """A min-information problem at one beta, restricted to states with ``p(y) > 0``.

    Attributes
    ----------
    p : (m,) probabilities of the retained states.
    gaps : (m, n) ``u(y, x) - max_x u(y, x)``, all <= 0.
    beta : float.
    expo : (m, n) ``exp(beta * gaps)``, in ``[0, 1]``.
    offset : float, ``beta * sum_y p(y) max_x u(y, x)`` (added back to the objective).
    """

    p: np.ndarray
    gaps: np.ndarray
    beta: float
    expo: np.ndarray
    offset: float

    @classmethod
    def build(cls, payoff: np.ndarray, env: np.ndarray, beta: float) -> "Reduced":
        return Gaps.build(payoff, env).at(beta)

    @property
    def n_phenotypes(self) -> int:
        return self.expo.shape[1]

    def log_terms(self, r: np.ndarray, rows: np.ndarray) -> np.ndarray:
        """``beta * gaps + log r`` on the given rows (log domain)."""
        with np.errstate(divide="ignore"):
            return self.beta * self.gaps[rows] + np.log(r)[None, :]


@dataclass(frozen=True)
class Evaluation:
    """``F(r)``, ``c(r)`` and (on demand) the ratios ``exp(beta u) / Z`` at one marginal."""

    problem: Reduced
    objective: float
    log_z: np.ndarray
    low: np.ndarray
    c: np.ndarray

    @cached_property
    def ratio(self) -> np.ndarray:
        """``exp(beta u(y,x)) / Z(y)`` per state and phenotype, capped at 1e300."""
        problem = self.problem
        with np.errstate(over="ignore", invalid="ignore"):  # low rows are replaced below
            ratio = problem.expo * np.exp(-self.log_z)[:, None]
            if self.low.any():
                ratio[self.low] = np.exp(
                    problem.beta * problem.gaps[self.low] - self.log_z[self.low, None]
                )
        return np.minimum(ratio, _BIG, out=ratio)


def log_partition(problem: Reduced, r: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``log sum_x r(x) exp(beta gaps(y, x))`` per state, log domain only where needed.

    Returns the logs and the mask of rows that needed the log domain.
    """
    z = problem.expo @ r
    low = ~(z > UNDERFLOW)
    with np.errstate(divide="ignore"):
        log_z = np.log(z)
    if low.any():
        log_z[low] = logsumexp(problem.log_terms(r, low), axis=1)
    return log_z, low


def objective(problem: Reduced, r: np.ndarray) -> float:
    """``F(r) = I - beta E[u]`` of the best policy with marginal ``r`` (nats)."""
    return float(-(problem.p @ log_partition(problem, r)[0]) - problem.offset)


def evaluate(problem: Reduced, r: np.ndarray) -> Evaluation:
    """Objective and ``c(x) = sum_y p(y) exp(beta u(y,x)) / Z(y)`` at ``r``."""
    log_z, low = log_partition(problem, r)
    weights = np.where(low, 0.0, problem.p * np.exp(-np.where(low, 0.0, log_z)))
    c = problem.expo.T @ weights
    if low.any():
        with np.errstate(over="ignore"):
            extra = np.exp(problem.beta * problem.gaps[low] - log_z[low, None])
        c = c + problem.p[low] @ np.minimum(extra, _BIG)
    return Evaluation(
        problem=problem,
        objective=float(-(problem.p @ log_z) - problem.offset),
        log_z=log_z,
        low=low,
        c=c,
    )


def policy_from_marginal(payoff: np.ndarray, beta: float, r: np.ndarray) -> np.ndarray:
    """``q(x|y) ∝ r(x) exp(beta u(y,x))`` for every state, computed in log domain."""
    with np.errstate(divide="ignore"):
        # Gaps to each row's best payoff: a constant added to the payoff changes nothing.
        logits = beta * (payoff - payoff.max(axis=1, keepdims=True)) + np.log(r)[None, :]
    logits -= logits.max(axis=1, keepdims=True)
    q = np.exp(logits)
    q /= q.sum(axis=1, keepdims=True)
    return q


def max_entropy_policy(payoff: np.ndarray, beta: float, reference: np.ndarray | None) -> np.ndarray:
    """``q(x|y) ∝ pi(x) exp(beta u(y,x))`` (Jaynes 1957); ``pi`` uniform if not given."""
    logits = beta * payoff
    if reference is not None:
        with np.errstate(divide="ignore"):
            logits = logits + np.log(reference)[None, :]
    logits = logits - logits.max(axis=1, keepdims=True)
    q = np.exp(logits)
    return q / q.sum(axis=1, keepdims=True)


def curve_policy(
    payoff: np.ndarray, beta: float, objective: str, marginal: np.ndarray,
    reference: np.ndarray | None = None,
) -> np.ndarray:
    """The policy of one point of a trade-off curve, rebuilt from what the curve keeps.

    Min-information: the Gibbs policy of the solver's marginal (``beta = 0``: the marginal in
    every state), exactly as :func:`switchlaw.solve` forms it; max-entropy: the softmax.
    """
    if objective == "max-entropy":
        return max_entropy_policy(payoff, beta, reference)
    if beta == 0:
        return np.tile(marginal, (payoff.shape[0], 1))
    return policy_from_marginal(payoff, beta, marginal)
