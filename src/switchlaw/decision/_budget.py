"""Budgeted decisions: maximise ``E[u]`` subject to ``I(X;Y) <= bits`` (a convex program).

With ``J(y, x) = p(y) q(x|y)`` affine in ``q``, ``I = sum_y p(y) KL(q(.|y) || r)`` is a sum of
relative-entropy cones. The marginal ``r`` has its own variable (``r == env @ Q``): writing
``env @ Q`` inside the cones makes the solver's linear system dense (measured 20–350x slower).
The multiplier of the information constraint, in payoff units per nat, is ``1 / beta``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from .._errors import InfeasibleError, InputError
from .._validate import as_array, as_distribution, as_nonnegative, choice
from ..information._measures import NATS_PER_BIT
from ._minimum_information import Prepared, first_critical_beta_of, policy_for_marginal
from ._results import Policy
from ._solve import check_problem, make_policy, solve_checked

BUDGET_METHODS = ("conic", "bisection")


@dataclass(frozen=True)
class LinearConstraint:
    """A linear condition on the joint distribution: ``lower <= sum_yx p(y) q(x|y) w(y,x) <= upper``.

    Examples: a measured phenotype fraction (``w[y, x] = 1`` for that ``x``), a moment of the
    signal among cells of one phenotype. Give ``lower == upper`` for an equality.
    """

    weights: np.ndarray
    lower: float = -math.inf
    upper: float = math.inf


def max_information_bits(env: np.ndarray, n_phenotypes: int) -> float:
    """Largest ``I(X;Y)`` any policy can reach: ``min(H(Y), log2 n)`` bits."""
    from scipy.special import entr

    return min(float(entr(env).sum()), math.log(n_phenotypes)) / NATS_PER_BIT


def _check_constraints(constraints, shape) -> list[LinearConstraint]:
    checked = []
    for i, c in enumerate(constraints or ()):
        if not isinstance(c, LinearConstraint):
            raise InputError(f"`constraints[{i}]` must be a LinearConstraint (got {type(c).__name__})")
        w = as_array(c.weights, f"constraints[{i}].weights", ndim=2)
        if w.shape != shape:
            raise InputError(
                f"`constraints[{i}].weights` must have the payoff's shape {shape} (got {w.shape})"
            )
        if math.isnan(c.lower) or math.isnan(c.upper) or c.lower > c.upper:
            raise InputError(
                f"`constraints[{i}]` needs lower <= upper (got {c.lower!r} and {c.upper!r})"
            )
        checked.append(LinearConstraint(w, float(c.lower), float(c.upper)))
    return checked


def solve_budget(
    payoff,
    env,
    *,
    bits,
    phenotype_fractions=None,
    constraints=None,
    method: str = "conic",
    solver: str = "CLARABEL",
) -> Policy:
    """Best expected payoff under a sensing budget: maximise ``E[u]`` s.t. ``I(X;Y) <= bits``.

    Parameters
    ----------
    payoff : array_like, shape (states, phenotypes)
    env : array_like, shape (states,), or an environment with ``.probs``
    bits : float
        Information budget (bits); between 0 and ``min(H(Y), log2 phenotypes)``.
    phenotype_fractions : array_like, shape (phenotypes,), optional
        Fix the marginal ``r(x)`` (e.g. measured fractions).
    constraints : sequence of LinearConstraint, optional
        Further linear conditions on the joint distribution.
    method : {"conic", "bisection"}
        With the budget alone both find the beta whose min-information solution uses
        exactly ``bits`` on the exact curve (Brent's method on ``I(beta)``), so the answer
        never uses more than ``bits`` and never earns less than ``max_x E[u(Y, x)]``. With
        ``phenotype_fractions`` or ``constraints``, ``"conic"`` solves the exponential-cone
        program with cvxpy (its own absolute tolerances apply); ``"bisection"`` refuses them.
    solver : str
        cvxpy solver with exponential cones (default Clarabel).

    Returns
    -------
    Policy
        ``beta`` is the multiplier of the budget (nats per payoff unit, the exponent
        convention of :func:`solve`); ``inf`` with status ``"budget-slack"`` when the budget
        exceeds what the best state-by-state policy needs.

    Raises
    ------
    InfeasibleError
        Budget below 0 or above ``min(H(Y), log2 n)`` bits, or constraints no policy meets.
    """
    u, p = check_problem(payoff, env)
    choice(method, "method", BUDGET_METHODS)
    if isinstance(bits, (str, bytes, bool, np.bool_)):
        raise InputError(f"`bits` must be a real number (got {bits!r})")
    try:
        budget = float(bits)
    except (TypeError, ValueError):
        raise InputError(f"`bits` must be a real number (got {bits!r})") from None
    if not math.isfinite(budget):
        raise InputError(f"`bits` must be finite (got {budget!r})")
    if budget < 0:
        raise InfeasibleError(f"`bits` must be >= 0: no policy uses negative information (got {budget!r})")
    top = max_information_bits(p, u.shape[1])
    if budget > top + 1e-12:
        raise InfeasibleError(
            f"`bits` must be at most {top:.6g}, the largest I(X;Y) possible with these states "
            f"and phenotypes (got {budget!r})"
        )
    fractions = None
    if phenotype_fractions is not None:
        fractions = as_distribution(phenotype_fractions, "phenotype_fractions")
        if fractions.size != u.shape[1]:
            raise InputError(
                f"`phenotype_fractions` must have one entry per phenotype ({u.shape[1]}) "
                f"(got {fractions.size})"
            )
    extra = _check_constraints(constraints, u.shape)
    if method == "bisection" and (fractions is not None or extra):
        raise InputError(
            "`method='bisection'` handles the budget alone; use method='conic' with "
            "`phenotype_fractions` or `constraints`"
        )
    if fractions is None and not extra:
        # The budget alone: the exact curve I(beta) decides, whatever the method (a conic
        # solve is only as good as its absolute tolerances, which overspend small budgets).
        return budget_policy(u, p, budget)
    return _conic(u, p, budget, fractions, extra, solver)


def budget_policy(u: np.ndarray, p: np.ndarray, budget: float) -> Policy:
    """Min-information policy using ``budget`` bits (validated inputs): the state-by-state
    best policy when the budget does not bind, else the beta found by bisection."""
    greedy = _greedy(u, p)
    if budget >= greedy.information_bits - 1e-12:
        return greedy
    return _bisection(u, p, budget)


def _greedy(u: np.ndarray, p: np.ndarray) -> Policy:
    """The beta -> infinity limit: each state takes its best phenotype(s)."""
    best = u >= u.max(axis=1, keepdims=True)
    q = best / best.sum(axis=1, keepdims=True)
    return make_policy(
        u, p, q, beta=math.inf, objective="min-information", converged=True, iterations=0,
        status="budget-slack", message="budget does not bind: every state takes its best phenotype",
        method="closed-form",
    )


def _bisection(u: np.ndarray, p: np.ndarray, budget: float) -> Policy:
    """The min-information policy whose ``I(X;Y)`` is ``budget`` bits, never more.

    ``I(beta)`` is non-decreasing (the slope of the curve is ``beta``, Cover & Thomas 2006
    §10.4) and zero up to the first critical beta ``beta_c``, so Brent's method on
    ``I(beta) - budget`` over ``[beta_c, beta_hi]`` finds the multiplier; each evaluation is a
    certified solve warm-started from the last. The answer is then moved down (never up) until
    it does not overspend. A budget of 0 is the zero-information policy, exactly.
    """
    prepared = Prepared.build(u, p)
    first = first_critical_beta_of(prepared.distinct, p)
    if not math.isfinite(first):
        # One phenotype is best in every state: it uses no information and no budget binds.
        policy = solve_checked(u, p, 0.0)
        return make_policy(
            u, p, policy.probs, beta=math.inf, objective="min-information", converged=True,
            iterations=0, status="budget-slack",
            message="one phenotype is best in every state: the budget does not bind",
            method="closed-form",
        )
    if budget == 0:
        return solve_checked(u, p, first, prepared=prepared)
    starts = {}
    under = {first: None}  # betas known not to overspend, with their policies

    def excess(beta: float) -> float:
        policy = solve_checked(u, p, beta, start=starts.get("r"), prepared=prepared)
        if policy.status == "converged":
            starts["r"] = policy.marginal
        if policy.information_bits <= budget:
            under[beta] = policy
        return policy.information_bits - budget

    lo = first
    hi = 2.0 * first if first > 0 else 1.0
    while excess(hi) < 0:
        lo, hi = hi, 2.0 * hi
        if hi > 1e300:
            raise InfeasibleError(
                f"no finite beta reaches `bits` = {budget!r}; the budget is nearly slack"
            )
    brentq(excess, lo, hi, xtol=1e-300, rtol=4 * np.finfo(float).eps, maxiter=500)
    # The largest beta seen that does not overspend: Brent's bracket closes on the root from
    # both sides, so it is within the bracket's relative width of the multiplier.
    beta = max(under)
    policy = under[beta] if under[beta] is not None else solve_checked(u, p, beta, prepared=prepared)
    return make_policy(
        u, p, policy.probs, beta=policy.beta, objective="min-information",
        converged=policy.converged, iterations=policy.iterations, status=policy.status,
        message=f"beta found by Brent's method on the exact curve I(beta) = {budget:.6g} bits",
        gap_nats=policy.gap_nats, method="bisection",
    )


def _conic(u, p, budget, fractions, extra, solver) -> Policy:
    import cvxpy as cp

    keep = p > 0
    # The solver's tolerances are absolute: work with payoffs of unit spread, then rescale the
    # multiplier (beta is in nats per *original* payoff unit).
    spread = float(np.ptp(u[keep])) or 1.0
    uk, pk = (u[keep] - u[keep].min()) / spread, p[keep]
    m, n = uk.shape
    q = cp.Variable((m, n), nonneg=True)
    r = cp.Variable(n, nonneg=True)
    ones = np.ones((m, 1))
    information = cp.sum(cp.multiply(pk[:, None], cp.rel_entr(q, ones @ cp.reshape(r, (1, n), order="C"))))
    budget_constraint = information <= budget * NATS_PER_BIT
    rules = [cp.sum(q, axis=1) == 1, r == pk @ q, budget_constraint]
    if fractions is not None:
        rules.append(r == fractions)
    for c in extra:
        value = cp.sum(cp.multiply(pk[:, None] * c.weights[keep], q))
        if c.lower == c.upper:
            rules.append(value == c.lower)
        else:
            if math.isfinite(c.lower):
                rules.append(value >= c.lower)
            if math.isfinite(c.upper):
                rules.append(value <= c.upper)
    problem = cp.Problem(cp.Maximize(cp.sum(cp.multiply(pk[:, None] * uk, q))), rules)
    try:
        problem.solve(solver=solver)
    except cp.error.SolverError as error:
        raise InfeasibleError(f"the conic solver failed: {error}") from None
    if problem.status in ("infeasible", "infeasible_inaccurate"):
        raise InfeasibleError(
            "no policy meets `bits` together with `phenotype_fractions`/`constraints` "
            f"(solver status {problem.status!r})"
        )
    if problem.status not in ("optimal", "optimal_inaccurate"):
        raise InfeasibleError(f"the conic solver ended with status {problem.status!r}")
    dual = float(budget_constraint.dual_value)  # per nat, in unit-spread payoffs
    marginal = np.clip(np.asarray(r.value, dtype=float), 0.0, None)
    marginal /= marginal.sum()
    beta = 1.0 / (dual * spread) if dual > 1e-9 else math.inf
    q_kept = np.clip(np.asarray(q.value, dtype=float), 0.0, None)
    q_kept /= q_kept.sum(axis=1, keepdims=True)
    probs = np.empty_like(u)
    probs[keep] = q_kept
    if (~keep).any():
        # Zero-probability states do not enter the program; they follow the Gibbs form.
        rest = (
            policy_for_marginal(u[~keep], beta, marginal)
            if math.isfinite(beta)
            else (u[~keep] >= u[~keep].max(axis=1, keepdims=True)).astype(float)
        )
        probs[~keep] = rest / rest.sum(axis=1, keepdims=True)
    status = "converged" if math.isfinite(beta) else "budget-slack"
    return make_policy(
        u, p, probs, beta=beta, objective="min-information",
        converged=problem.status == "optimal", iterations=int(problem.solver_stats.num_iters or 0),
        status=status if problem.status == "optimal" else "not-converged",
        message=f"cvxpy/{solver}: {problem.status}", gap_nats=float("nan"),
        method="conic",
    )
