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

import math

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
from scipy.special import logsumexp

#: Partition sums below this are recomputed in log domain.
UNDERFLOW = 1e-250
#: Cap for ``exp(beta u) / Z`` of phenotypes outside the support (avoids inf - inf).
_BIG = 1e300


class Scratch:
    """Work arrays that the solves of one caller reuse, one solve at a time.

    Every temporary of size ``states x phenotypes`` freshly allocated costs the operating
    system's zeroing of its pages on first touch (measured: a third of a large curve's time);
    a named work array is allocated once and handed out again, as a view of the needed shape.
    """

    __slots__ = ("_flat", "_kept", "_latest")

    def __init__(self) -> None:
        self._flat: dict[str, np.ndarray] = {}
        self._kept: dict[str, np.ndarray] = {}
        self._latest: dict[str, tuple] = {}

    def latest(self, name: str, key, make):
        """``make()``, computed again only when ``key`` differs from the last call with
        ``name`` (one value per name is kept: for tables that depend on beta)."""
        found = self._latest.get(name)
        if found is not None and found[0] == key:
            return found[1]
        value = make()
        self._latest[name] = (key, value)
        return value

    def kept(self, name: str, make) -> np.ndarray:
        """``make()``, computed on the first call with ``name`` and kept (for arrays derived
        from the beta-independent data that the work arrays serve)."""
        found = self._kept.get(name)
        if found is None:
            found = self._kept[name] = make()
        return found

    def get(self, name: str, shape: tuple[int, int]) -> np.ndarray:
        """An uninitialised float64 array of ``shape`` (two dimensions), the same memory on
        every call with ``name`` (whatever the previous caller left in it is overwritten)."""
        size = shape[0] * shape[1]
        flat = self._flat.get(name)
        if flat is None or flat.size < size:
            flat = self._flat[name] = np.empty(size)
        return flat[:size].reshape(shape)


class _PerTable:
    """Arrays derived once per payoff table from ``gaps`` and ``p``, kept in ``scratch``
    (shared by :class:`Gaps` and every :class:`Reduced` it serves)."""

    @property
    def gaps_by_phenotype(self) -> np.ndarray:
        """``gaps.T`` in C order (phenotypes x states), made once per table: a phenotype's
        gaps are then contiguous, and sums over states are pairwise."""
        return self.scratch.kept("gaps_t", lambda: np.ascontiguousarray(self.gaps.T))

    @property
    def root_p(self) -> np.ndarray:
        """``sqrt(p)``, made once per table."""
        return self.scratch.kept("root_p", lambda: np.sqrt(self.p))


@dataclass(frozen=True)
class Gaps(_PerTable):
    """The beta-independent part of a problem: ``u(y, x) - max_x u(y, x)`` on states with ``p(y) > 0``.

    Built once per payoff table and shared by every beta of a curve, which it serves one beta
    at a time: :meth:`at` writes the exponentials into the memory of the previous beta's
    (a problem from :meth:`at` is valid until the next call with another beta).
    """

    p: np.ndarray
    gaps: np.ndarray
    mean_row_max: float
    scratch: Scratch = field(default_factory=Scratch, compare=False, repr=False)
    _last: list = field(default_factory=list, compare=False, repr=False)

    @classmethod
    def build(cls, payoff: np.ndarray, env: np.ndarray) -> "Gaps":
        keep = env > 0
        p = env[keep]
        # Phenotype by phenotype (one transposed copy): each state's best payoff is then an
        # elementwise maximum over a few long rows, not a reduction over many short ones.
        by_phenotype = (
            np.array(payoff.T, order="C") if keep.all()  # (a copy, never the caller's array)
            else np.ascontiguousarray(payoff.T[:, keep])
        )
        row_max = np.maximum.reduce(by_phenotype, axis=0)
        by_phenotype -= row_max
        gaps = cls(p=p, gaps=by_phenotype.T, mean_row_max=float(p @ row_max))
        gaps.scratch.kept("gaps_t", lambda: by_phenotype)
        return gaps

    def at(self, beta: float) -> "Reduced":
        """The problem at ``beta`` (the same object again when ``beta`` is the last one)."""
        if self._last and self._last[0].beta == beta:
            return self._last[0]
        # Formed phenotype by phenotype and used through its transpose (Fortran order):
        # products with a vector per state, sums over the states and a phenotype's column
        # then run along contiguous memory (measured 2-4x faster than state-major rows of
        # a few phenotypes each).
        by_phenotype = self.scratch.get("expo", (self.gaps.shape[1], self.gaps.shape[0]))
        np.multiply(self.gaps_by_phenotype, beta, out=by_phenotype)
        np.exp(by_phenotype, out=by_phenotype)
        expo = by_phenotype.T
        problem = Reduced(
            p=self.p, gaps=self.gaps, beta=beta, expo=expo, offset=beta * self.mean_row_max,
            scratch=self.scratch,
        )
        self._last[:] = [problem]
        return problem


@dataclass(frozen=True)
class Reduced(_PerTable):
    """A min-information problem at one beta, restricted to states with ``p(y) > 0``.

    Attributes
    ----------
    p : (m,) probabilities of the retained states.
    gaps : (m, n) ``u(y, x) - max_x u(y, x)``, all <= 0 (Fortran order).
    beta : float.
    expo : (m, n) ``exp(beta * gaps)``, in ``[0, 1]`` (Fortran order: a phenotype's column is
        contiguous).
    offset : float, ``beta * sum_y p(y) max_x u(y, x)`` (added back to the objective).
    """

    p: np.ndarray
    gaps: np.ndarray
    beta: float
    expo: np.ndarray
    offset: float
    #: Work arrays shared with the other problems of the same :class:`Gaps` (one at a time).
    scratch: Scratch = field(default_factory=Scratch, compare=False, repr=False)

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
    log_z = np.log(np.maximum(z, UNDERFLOW))  # (rows below are replaced just after)
    if low.any():
        log_z[low] = logsumexp(problem.log_terms(r, low), axis=1)
    return log_z, low


def objective(problem: Reduced, r: np.ndarray) -> float:
    """``F(r) = I - beta E[u]`` of the best policy with marginal ``r`` (nats)."""
    return float(-(problem.p @ log_partition(problem, r)[0]) - problem.offset)


def evaluate(problem: Reduced, r: np.ndarray) -> Evaluation:
    """Objective and ``c(x) = sum_y p(y) exp(beta u(y,x)) / Z(y)`` at ``r``."""
    log_z, low = log_partition(problem, r)
    any_low = low.any()
    if any_low:
        weights = np.where(low, 0.0, problem.p * np.exp(-np.where(low, 0.0, log_z)))
    else:
        weights = problem.p * np.exp(-log_z)
    c = problem.expo.T @ weights
    if any_low:
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
