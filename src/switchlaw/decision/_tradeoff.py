"""The information–payoff curve along a grid of betas, with its phase transitions located."""

from __future__ import annotations

import numpy as np
from scipy.optimize import brentq

from .._errors import InputError
from .._validate import as_array, choice
from ._minimum_information import (
    Prepared,
    first_critical_beta_of,
    minimum_information_marginal,
    solve_marginal,
)
from ._problem import evaluate
from ._results import CriticalBeta, Tradeoff
from ._solve import OBJECTIVES, check_problem, solve, solve_checked

#: Marginal entries below this count as "not in use" when comparing supports.
SUPPORT_FLOOR = 1e-10
#: Transitions are located to this relative accuracy in beta (payoffs in large units would
#: lose every digit to an absolute tolerance).
BETA_RTOL = 1e-12


def _support(r: np.ndarray) -> frozenset:
    return frozenset(int(i) for i in np.flatnonzero(r > SUPPORT_FLOOR))


class _Locator:
    """Finds the betas between two grid points where the support of the marginal changes.

    Works on distinct phenotype columns. With one phenotype ``x`` changing between supports
    ``S`` and ``S + {x}``, the transition is the root of ``log c_x(beta)`` with the marginal
    optimised over ``S`` alone (the Kuhn–Tucker condition for ``x``), found by Brent's method.
    Otherwise the interval is bisected on the full solution.
    """

    def __init__(self, prepared: Prepared, env: np.ndarray):
        self.payoff = prepared.distinct
        self.env = env
        self.n = self.payoff.shape[1]
        self.gaps = prepared.gaps
        # The locator works on distinct columns already: an identity grouping.
        self.identity = Prepared(
            self.payoff, np.arange(self.n), np.ones(self.n, dtype=int), prepared.gaps
        )

    def full(self, beta: float, start: np.ndarray | None) -> np.ndarray:
        r, _, _ = minimum_information_marginal(
            self.payoff, self.env, beta, start=start, prepared=self.identity
        )
        return r

    def kkt_excess(self, beta: float, smaller: frozenset, x: int, start: np.ndarray) -> float:
        allowed = np.zeros(self.n, dtype=bool)
        allowed[list(smaller)] = True
        record = solve_marginal(
            self.payoff, self.env, beta, start=start, allowed=allowed, gaps=self.gaps
        )
        return float(np.log(evaluate(self.gaps.at(beta), record.marginal).c[x]))

    def between(self, lo: float, r_lo: np.ndarray, hi: float, r_hi: np.ndarray) -> list:
        s_lo, s_hi = _support(r_lo), _support(r_hi)
        if s_lo == s_hi:
            return []
        changed = s_lo ^ s_hi
        if len(changed) == 1 and hi - lo > BETA_RTOL * hi:
            (x,) = changed
            smaller = s_lo & s_hi
            start = r_lo if s_lo == smaller else r_hi
            try:
                # At beta = 0 every Kuhn–Tucker condition holds with equality; start just above.
                a = lo if lo > 0 else hi * 1e-12
                f_lo = self.kkt_excess(a, smaller, x, start)
                f_hi = self.kkt_excess(hi, smaller, x, start)
                if f_lo * f_hi < 0:
                    beta = brentq(
                        self.kkt_excess, a, hi, args=(smaller, x, start),
                        xtol=1e-300, rtol=BETA_RTOL,
                    )
                    # Trust the root only if it is the single change in the interval: the
                    # full solutions just either side must have the two end supports.
                    step = 1e-7 * beta
                    if (
                        _support(self.full(max(beta - step, lo), r_lo)) == s_lo
                        and _support(self.full(min(beta + step, hi), r_hi)) == s_hi
                    ):
                        return [self._record(beta, s_lo, s_hi)]
            except (ValueError, FloatingPointError):
                pass
        if hi - lo <= BETA_RTOL * hi:
            return [self._record(0.5 * (lo + hi), s_lo, s_hi)]
        mid = 0.5 * (lo + hi)
        r_mid = self.full(mid, r_lo)
        return self.between(lo, r_lo, mid, r_mid) + self.between(mid, r_mid, hi, r_hi)

    @staticmethod
    def _record(beta: float, before: frozenset, after: frozenset) -> tuple:
        return (float(beta), tuple(sorted(after - before)), tuple(sorted(before - after)))


def tradeoff(
    payoff,
    env,
    betas,
    *,
    objective: str = "min-information",
    reference=None,
) -> Tradeoff:
    """Optimal policies along a grid of betas: the information–payoff trade-off curve.

    Parameters
    ----------
    payoff : array_like, shape (states, phenotypes)
    env : array_like, shape (states,), or an environment with ``.probs``
    betas : array_like, shape (k,)
        Sensitivities (nats per payoff unit), finite and >= 0, in any order.
    objective : {"min-information", "max-entropy"}
    reference : array_like, optional
        Reference phenotype distribution (max-entropy only).

    Returns
    -------
    Tradeoff
        Arrays over ``betas`` (in the order given) and ``critical_betas``: every beta in the
        scanned range where the set of phenotypes in use changes, located to 1e-12 relative in beta
        (Brent's method on the Kuhn–Tucker condition of the entering or leaving phenotype).
        The first one, where a second phenotype enters, comes from its closed form.

    Notes
    -----
    Solutions are warm-started along increasing beta. The active-set Newton solver adds
    phenotypes explicitly when their Kuhn–Tucker condition fails, so a phenotype whose marginal
    was exactly zero at the previous beta is not lost (as it would be under Blahut–Arimoto).
    """
    u, p = check_problem(payoff, env)
    choice(objective, "objective", OBJECTIVES)
    if isinstance(betas, (str, bytes)) or np.asarray(betas).dtype.kind in "USObb":
        if np.asarray(betas).dtype.kind != "O" or any(
            isinstance(b, (str, bytes, bool)) for b in np.ravel(np.asarray(betas, dtype=object))
        ):
            raise InputError(f"`betas` must be real numbers (got {betas!r:.60})")
    grid = as_array(betas, "betas", ndim=1)
    if (grid < 0).any():
        raise InputError(f"`betas` must be >= 0 (got minimum {float(grid.min())!r})")
    order = np.argsort(grid, kind="stable")
    policies = []
    if objective == "max-entropy":
        policies = [solve(u, p, beta, objective=objective, reference=reference) for beta in grid[order]]
    else:
        if reference is not None:
            solve(u, p, 1.0, reference=reference)  # raises the documented error
        prepared = Prepared.build(u, p)
        start = None
        for beta in grid[order]:
            policy = solve_checked(u, p, float(beta), start=start, prepared=prepared)
            if policy.status != "closed-form":
                start = policy.marginal
            policies.append(policy)
    back = np.empty_like(order)
    back[order] = np.arange(order.size)
    policies = [policies[i] for i in back]
    critical = ()
    if objective == "min-information" and u.shape[1] > 1:
        critical = _critical_betas(prepared, p, np.sort(grid), [policies[i] for i in order])
    return Tradeoff(
        betas=grid,
        information_bits=np.array([q.information_bits for q in policies]),
        conditional_entropy_bits=np.array([q.conditional_entropy_bits for q in policies]),
        expected_payoff=np.array([q.expected_payoff for q in policies]),
        probs=np.stack([q.probs for q in policies]),
        marginals=np.stack([q.marginal for q in policies]),
        iterations=np.array([q.iterations for q in policies]),
        converged=np.array([q.converged for q in policies]),
        critical_betas=critical,
        objective=objective,
    )


def _critical_betas(prepared: Prepared, p, grid, sorted_policies) -> tuple:
    """Locate support changes between consecutive grid betas (distinct phenotypes only)."""
    distinct, inverse = prepared.distinct, prepared.inverse
    locator = _Locator(prepared, p)
    merged = prepared.merge

    # The first transition has a closed form (Kuhn–Tucker conditions): add it to the points
    # between which changes are located, so that it is never missed, and report it exactly.
    first = first_critical_beta_of(distinct, p)
    points = [(float(b), merged(q.marginal)) for b, q in zip(grid, sorted_policies)]
    if grid[0] < first < grid[-1]:
        points.append((first, locator.full(first, None)))
        points.sort(key=lambda item: item[0])
    found = []
    for (lo, r_lo), (hi, r_hi) in zip(points[:-1], points[1:]):
        if lo < hi:
            found += locator.between(lo, r_lo, hi, r_hi)
    exact = [False] * len(found)
    if found and first > 0:
        nearest = int(np.argmin([abs(f[0] - first) for f in found]))
        if abs(found[nearest][0] - first) <= 1e-6 * first:
            found[nearest] = (first,) + found[nearest][1:]
            exact[nearest] = True
    groups = [np.flatnonzero(inverse == g) for g in range(distinct.shape[1])]

    def expand(indices):
        return tuple(sorted(int(i) for g in indices for i in groups[g]))

    return tuple(
        CriticalBeta(beta=b, entering=expand(e), leaving=expand(l), exact=exact)
        for (b, e, l), exact in sorted(zip(found, exact))
    )
