"""Minimum-information decisions: minimise ``I(X;Y) - beta E[u]``.

The stationary point is ``q(x|y) = r(x) exp(beta u(y,x)) / Z(y)`` with ``r`` the marginal of
``q`` (Blahut 1972; Arimoto 1972). With ``payoff = -distortion`` this is rate–distortion theory.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from ._blahut_arimoto import blahut_arimoto_marginal
from ._inputs import check_problem
from ._marginal_newton import _UNIT, MarginalResult, newton_marginal
from ._problem import Gaps, policy_from_marginal


def tie_tolerance(env: np.ndarray, magnitudes: np.ndarray, top) -> np.ndarray:
    """How far below the largest mean payoff a mean counts as tied with it: twice the
    rounding bound of the two sums ``sum_y p(y) u(y, x)`` over ``m`` states (Higham 2002,
    §3.1, any order of summation), ``2 (m + 1) u (sum_y p |u(y,x)| + sum_y p |u(y,x*)|)``,
    so that float64 cannot order the two means. ``magnitudes``: ``sum_y p |u(y, x)|`` per
    phenotype (on the last axis); ``top``: that of the phenotype with the largest mean."""
    return 2.0 * (env.shape[-1] + 1) * _UNIT * (magnitudes + top)


def best_on_average(payoff: np.ndarray, env: np.ndarray) -> np.ndarray:
    """Mask of the phenotypes whose mean payoff ``E[u(Y, x)]`` is largest, with the means
    that float64 cannot tell apart from it (:func:`tie_tolerance`): a difference of 1e-169
    between two means of that size is a real one."""
    means = env @ payoff
    top = int(np.argmax(means))
    magnitudes = env @ np.abs(payoff)
    return means >= means[top] - tie_tolerance(env, magnitudes, magnitudes[top])


def first_critical_beta_of(payoff: np.ndarray, env: np.ndarray) -> float:
    """Smallest beta at which a second phenotype enters (``inf`` if none ever does).

    Kuhn–Tucker conditions of the min-information problem (Blahut 1972): the deterministic
    policy on ``x* = argmax_x E[u(Y, x)]`` stays optimal while
    ``sum_y p(y) exp(beta (u(y,x) - u(y,x*))) <= 1`` for every ``x``. Each left side minus one,
    ``g(beta) = sum_y p(y) expm1(beta delta(y))``, is a convex function of beta, zero at zero
    with slope ``E[delta] < 0`` there; its positive root is found by Newton's method from
    above (:func:`_roots_from_above`), Brent's method where that does not settle. In this
    form the sum has no rounding of one to cancel: near a tie in the mean payoffs the form
    ``log sum_y p exp(beta delta)`` loses the root to a relative error of about
    ``u Var[delta] / E[delta]^2`` (seen: 1e-7), this one keeps it to about
    ``u E|delta| / |E[delta]|``.
    """
    keep = env > 0
    u, p = (payoff, env) if keep.all() else (payoff[keep], env[keep])
    best = best_on_average(u, p)
    if best.sum() > 1:
        gaps_to_best = u[:, best] - u[:, best][:, :1]
        if np.any(gaps_to_best != 0):
            return 0.0
    star = int(np.argmax(best))
    # Phenotype by phenotype (contiguous rows): the payoff differences to x*.
    deltas = np.array(u.T, order="C")
    deltas -= deltas[star]
    tops = np.maximum.reduce(deltas, axis=1)
    tops[star] = 0.0
    candidates = np.flatnonzero(tops > 0)
    if not candidates.size:
        return math.inf
    deltas = deltas[candidates]
    if ((deltas @ p) >= 0).any():  # equal means but a different payoff: enters at once
        return 0.0
    # In units of a power of two near the largest difference (exact): the search then runs
    # the same in any payoff unit, and beta delta neither overflows nor underflows.
    unit = 2.0 ** math.floor(math.log2(float(np.abs(deltas).max())))
    deltas /= unit
    roots = _roots_from_above(deltas, p)
    for row, root in enumerate(roots):
        if root is None:
            roots[row] = _bracketed_root(deltas[row], p)
    return float(min(roots)) / unit


_max = np.maximum.reduce

#: Largest exponent in :func:`_excess` (``expm1`` overflows past 709): only the sign and
#: the order of magnitude of a value that large matter to the searches.
_EXPONENT_CAP = 700.0
#: Newton's method for the first critical beta gives up after this many steps.
_FIRST_STEPS = 60


def _excess(beta: float, delta: np.ndarray, p: np.ndarray) -> float:
    """``g(beta) = sum_y p(y) expm1(beta delta(y))``."""
    return float(p @ np.expm1(np.minimum(beta * delta, _EXPONENT_CAP)))


def _roots_from_above(deltas: np.ndarray, p: np.ndarray) -> list:
    """The positive root of ``g`` (:func:`first_critical_beta_of`) of every row of
    ``deltas`` at once, by Newton's method; ``None`` for a row it does not settle.

    ``g`` is negative up to its root and increasing beyond it, and a convex function lies
    above its tangents, so Newton's steps from a point beyond the root stay beyond it and
    converge monotonically. Start: the root of the second-order expansion
    ``beta E[delta] + beta^2 E[delta^2] / 2``, raised by 1 %, 4 %, 17 %, ... until ``g`` is
    positive, but never beyond ``-log p(y) / delta(y)`` for the state with the largest
    ``delta(y)`` (there that state's term alone reaches one, so the point is beyond the
    root)."""
    k = deltas.shape[0]
    means = deltas @ p
    tops = np.maximum.reduce(deltas, axis=1)
    with np.errstate(divide="ignore", over="ignore"):
        bound = -np.log(p[np.argmax(deltas, axis=1)]) / tops
        beta = np.minimum(-2.0 * means / ((deltas * deltas) @ p), bound)
    roots: list = [None] * k
    active = np.flatnonzero(np.isfinite(beta) & (beta > 0))
    below = np.zeros(k, dtype=bool)  # beta still below the root: growing
    below[active] = True
    growth = np.full(k, 1.01)  # (the start is usually within a fraction of a percent)
    work = np.empty_like(deltas)
    for _ in range(_FIRST_STEPS):
        if not active.size:
            break
        d = deltas if active.size == k else deltas[active]
        b = beta[active]
        exponents = np.multiply(b[:, None], d, out=work[: active.size])
        if not _max(b * tops[active]) <= _EXPONENT_CAP:
            np.minimum(exponents, _EXPONENT_CAP, out=exponents)
        terms = np.expm1(exponents, out=exponents)
        value = terms @ p
        slope = (np.multiply(terms, d, out=terms) @ p) + means[active]
        doubling = below[active] & ~(value > 0)
        below[active] = doubling
        step = np.where(doubling, 0.0, value / slope)
        done = ~doubling & (~(value > 0) | (np.abs(step) <= 4 * np.finfo(float).eps * b))
        failed = ~doubling & (~np.isfinite(step) | ~(slope > 0))
        for i in active[done & ~failed]:
            roots[i] = float(beta[i])
        beta[active] = np.where(doubling, np.minimum(growth[active] * b, bound[active]), b - step)
        growth[active] = np.where(doubling, growth[active] ** 4, growth[active])
        stuck = doubling & (b == bound[active])
        active = active[~done & ~failed & ~stuck]
    return roots


def _bracketed_root(delta: np.ndarray, p: np.ndarray) -> float:
    """The positive root of ``g`` for one ``delta`` by bracketing and Brent's method."""
    upper = 1.0
    while _excess(upper, delta, p) <= 0:
        upper *= 2.0
    lower = upper / 2.0
    while _excess(lower, delta, p) > 0 and lower > 1e-300:
        upper, lower = lower, lower / 2.0
    return float(brentq(_excess, lower, upper, args=(delta, p), xtol=1e-300,
                        rtol=4 * np.finfo(float).eps))


def deterministic_excess(u: np.ndarray, p: np.ndarray, star, beta) -> tuple:
    """``g_x(beta) = sum_y p(y) expm1(beta (u(y,x) - u(y,x*)))`` on the last axis (the
    Kuhn–Tucker test of the one-phenotype policy on ``x*``: it is optimal while every
    ``g_x <= 0``), and a bound on the rounding error of each: ``2 (m + 2) u`` times the sum of
    the terms' magnitudes (Higham 2002, §3.1; ``expm1`` and the product add two roundings).
    ``u``: states x phenotypes (a leading axis of problems allowed), ``star`` the index of
    ``x*`` (per problem), ``beta`` a number (per problem)."""
    reference = np.take_along_axis(u, np.reshape(star, np.shape(star) + (1, 1)), axis=-1)
    exponent = np.reshape(beta, np.shape(beta) + (1, 1)) * (u - reference)
    with np.errstate(over="ignore"):
        terms = np.expm1(np.minimum(exponent, _EXPONENT_CAP))
    excess = np.einsum("...m,...mn->...n", p, terms)
    bound = 2.0 * (u.shape[-2] + 2) * _UNIT * np.einsum("...m,...mn->...n", p, np.abs(terms))
    return excess, bound


def stays_deterministic(payoff: np.ndarray, env: np.ndarray, beta: float) -> bool:
    """Whether the single best-on-average phenotype is optimal at ``beta`` (Kuhn–Tucker test).

    ``sum_y p(y) exp(beta (u(y,x) - u(y,x*))) <= 1`` for every ``x`` (Blahut 1972), tested as
    ``sum_y p(y) expm1(beta (u(y,x) - u(y,x*))) <= 0`` (:func:`deterministic_excess`): next
    to a tie in the mean payoffs the left side minus one is tiny beside its terms, and a fixed
    tolerance on its logarithm (formerly 1e-14) kept one phenotype up to 0.5 % past the first
    critical beta. Where a sum is within its rounding bound of zero, ``beta`` is compared with
    :func:`first_critical_beta_of` instead, so that a solve and a curve split at the same
    beta. A tie in the best mean payoff between different columns fails the test for every
    ``beta > 0``.
    """
    keep = env > 0
    u, p = payoff[keep], env[keep]
    best = best_on_average(u, p)
    if best.sum() > 1:
        return False
    excess, bound = deterministic_excess(u, p, int(np.argmax(best)), beta)
    if (excess > bound).any():
        return False
    if (excess <= -bound).all():
        return True
    return bool(beta <= first_critical_beta_of(payoff, env))


def first_critical_beta(payoff, env) -> float:
    """The smallest beta at which the min-information policy starts to use a second phenotype.

    Below it the cell ignores the environment and always takes ``x* = argmax_x E[u(Y, x)]``.
    Exact (root of a one-dimensional convex function; Kuhn–Tucker conditions, Blahut 1972).
    ``inf`` if ``x*`` is never left (every other phenotype is dominated), ``0`` for a tie in the
    best mean payoff between phenotypes that differ somewhere (means that float64 cannot
    order, :func:`tie_tolerance`).

    Parameters
    ----------
    payoff : array_like, shape (states, phenotypes)
    env : array_like, shape (states,), or an environment with ``.probs``

    Examples
    --------
    Bernoulli(0.2) source with Hamming distortion: ``ln((1 - p) / p) = ln 4``.

    >>> round(first_critical_beta([[0.0, -1.0], [-1.0, 0.0]], [0.8, 0.2]), 10)
    1.3862943611
    """
    u, p = check_problem(payoff, env)  # a receptor turns the payoff into E[u | sensed state]
    if u.shape[1] == 1:
        return float("inf")
    return first_critical_beta_of(_unique_phenotypes(u, p)[0], p)


@dataclass(frozen=True)
class Prepared:
    """What every beta of one problem shares: distinct phenotype columns and their gaps."""

    distinct: np.ndarray
    inverse: np.ndarray
    counts: np.ndarray
    gaps: Gaps

    @classmethod
    def build(cls, payoff: np.ndarray, env: np.ndarray) -> "Prepared":
        distinct, inverse, counts = _unique_phenotypes(payoff, env)
        return cls(distinct, inverse, counts, Gaps.build(distinct, env))

    def merge(self, r: np.ndarray) -> np.ndarray:
        """A marginal over all phenotypes summed onto the distinct columns."""
        return np.bincount(self.inverse, weights=r, minlength=self.distinct.shape[1])

    def split(self, r_distinct: np.ndarray) -> np.ndarray:
        """A marginal over distinct columns shared equally among duplicates."""
        return r_distinct[self.inverse] / self.counts[self.inverse]


def _unique_phenotypes(payoff: np.ndarray, env: np.ndarray | None = None):
    """Merge phenotypes whose payoffs agree on every state that occurs (``p(y) > 0``).

    The problem cannot tell them apart, so they share their mass equally (a fixed convention
    that keeps the answer independent of starting points). Returns the distinct columns (in
    order of first appearance), the group of every phenotype, and the group sizes.
    """
    n = payoff.shape[1]
    keep = np.ones(payoff.shape[0], dtype=bool) if env is None else env > 0
    # Two columns are compared in full only where they agree on a few states first (their
    # sampled entries as bytes, -0.0 made +0.0, which compares equal to it).
    kept_rows = np.flatnonzero(keep)
    sample = np.ascontiguousarray((payoff[kept_rows[:8]] + 0.0).T)
    group = np.arange(n)
    firsts_by_sample: dict = {}
    for j in range(n):
        key = sample[j].tobytes()
        for i in firsts_by_sample.get(key, ()):
            if np.array_equal(payoff[kept_rows, i], payoff[kept_rows, j]):
                group[j] = i
                break
        else:
            firsts_by_sample.setdefault(key, []).append(j)
    firsts = np.flatnonzero(group == np.arange(n))
    rank = np.empty(n, dtype=int)
    rank[firsts] = np.arange(firsts.size)
    inverse = rank[group]
    distinct = payoff if firsts.size == n else payoff[:, firsts]  # (read only, never written)
    return distinct, inverse, np.bincount(inverse)


def solve_marginal(
    payoff: np.ndarray,
    env: np.ndarray,
    beta: float,
    *,
    method: str = "newton",
    start: np.ndarray | None = None,
    allowed: np.ndarray | None = None,
    tol: float = 1e-12,
    max_iter: int | None = None,
    gaps: Gaps | None = None,
    policy: bool = True,
) -> MarginalResult:
    """Optimal marginal for distinct phenotype columns (no duplicate columns expected).

    ``gaps`` is ``Gaps.build(payoff, env)`` when the caller already has it; ``policy=False``
    certifies the objective only, the masses to float64 rounding (see
    :func:`~._marginal_newton.newton_marginal`): for callers that use ``c(x)`` or the support.
    """
    n = payoff.shape[1]
    allowed = np.ones(n, dtype=bool) if allowed is None else allowed
    warm = start is not None
    if start is None:
        start = allowed / allowed.sum()
    problem = (gaps or Gaps.build(payoff, env)).at(beta)
    return METHODS[method](
        problem, start, allowed=allowed, tol=tol, max_iter=max_iter, warm=warm, policy=policy
    )


def _newton_with_fallback(
    problem, start, *, allowed, tol, max_iter, warm=False, policy=True
) -> MarginalResult:
    """Newton on the marginal; should it stall, Blahut–Arimoto finishes from where it stopped."""
    result = newton_marginal(
        problem, start, allowed=allowed, tol=tol, max_iter=max_iter or 500, warm=warm,
        policy=policy,
    )
    if result.converged or result.policy_uncertified:
        return result  # Blahut–Arimoto cannot resolve what rounding hides from Newton
    fallback = blahut_arimoto_marginal(problem, result.marginal, allowed=allowed, tol=tol)
    return MarginalResult(
        fallback.marginal,
        fallback.gap_nats,
        result.iterations + fallback.iterations,
        fallback.converged,
        f"{result.message}; Blahut–Arimoto fallback: {fallback.message}",
    )


def _blahut_arimoto(
    problem, start, *, allowed, tol, max_iter, warm=False, policy=True
) -> MarginalResult:
    del warm, policy  # the alternation mixes any start with the uniform marginal
    return blahut_arimoto_marginal(
        problem, start, allowed=allowed, tol=tol, max_iter=max_iter or 100_000
    )


#: ``method=`` names of the min-information solvers.
METHODS = {"newton": _newton_with_fallback, "blahut-arimoto": _blahut_arimoto}


def minimum_information_marginal(
    payoff: np.ndarray,
    env: np.ndarray,
    beta: float,
    *,
    method: str = "newton",
    start: np.ndarray | None = None,
    tol: float = 1e-12,
    max_iter: int | None = None,
    prepared: Prepared | None = None,
    policy: bool = True,
    first: float | None = None,
) -> tuple[np.ndarray, MarginalResult, str]:
    """Optimal marginal over all phenotypes (duplicates merged), and the status word.

    Returns the marginal over the original phenotypes, the solver record, and ``status``.
    ``prepared`` is ``Prepared.build(payoff, env)`` when the caller already has it;
    ``first``: the first critical beta (:func:`first_critical_beta_of`) when the caller has
    it; then the closed form holds exactly up to it, without the test of
    :func:`stays_deterministic`. ``policy=False`` certifies the objective only (see
    :func:`solve_marginal`).
    """
    n = payoff.shape[1]
    if n == 1:
        return np.ones(1), MarginalResult(np.ones(1), 0.0, 0, True, "single phenotype"), "closed-form"
    if beta == 0:
        best = best_on_average(payoff, env)
        r = best / best.sum()
        record = MarginalResult(r, 0.0, 0, True, "beta = 0: every phenotype on the best mean payoff")
        return r, record, "closed-form"
    prepared = prepared or Prepared.build(payoff, env)
    distinct = prepared.distinct
    if beta <= first if first is not None else stays_deterministic(distinct, env, beta):
        r_distinct = np.zeros(distinct.shape[1])
        r_distinct[int(np.argmax(best_on_average(distinct, env)))] = 1.0
        record = MarginalResult(
            r_distinct, 0.0, 0, True,
            "below the first critical beta: one phenotype (Kuhn–Tucker conditions)",
        )
        status = "closed-form"
    else:
        if start is not None:
            start = prepared.merge(start)
            if start.sum() <= 0:
                start = None
        record = solve_marginal(
            distinct, env, beta, method=method, start=start, tol=tol, max_iter=max_iter,
            gaps=prepared.gaps, policy=policy,
        )
        r_distinct = record.marginal
        status = "converged" if record.converged else "not-converged"
    return prepared.split(r_distinct), record, status


def policy_for_marginal(payoff: np.ndarray, beta: float, r: np.ndarray) -> np.ndarray:
    """The Gibbs policy of the min-information problem for marginal ``r``."""
    return policy_from_marginal(payoff, beta, r)
