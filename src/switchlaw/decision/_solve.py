"""``solve``: the optimal switching policy for one beta, by objective."""

from __future__ import annotations

import warnings

import numpy as np
from scipy.special import entr

from .._errors import InputError
from .._validate import as_distribution, as_positive, choice
from ..information._measures import NATS_PER_BIT, _mutual_information_nats
from ._inputs import as_beta, as_max_iter, check_problem
from ._minimum_information import METHODS, minimum_information_marginal, policy_for_marginal
from ._problem import max_entropy_policy
from ._results import Policy


#: Taylor coefficients of ``((1 + x) log(1 + x) - x) / x^2 = sum_j (-1)^j x^j / ((j+1)(j+2))``;
#: below ``|x| = 0.01`` ten terms reach float64 precision.
_SERIES = np.array([(-1) ** j / ((j + 1) * (j + 2)) for j in range(10)])


def excess_of_log(x: np.ndarray) -> np.ndarray:
    """``(1 + x) log(1 + x) - x >= 0`` without cancellation (series below ``|x| = 0.01``)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        out = (1 + x) * np.log1p(x) - x
    out[x <= -1] = 1.0  # (1 + x) log(1 + x) -> 0 as x -> -1
    small = np.abs(x) < 0.01
    if small.any():
        xs = x[small]
        series = np.full_like(xs, _SERIES[-1])
        for coefficient in _SERIES[-2::-1]:
            series = series * xs + coefficient
        out[small] = series * xs * xs
    return out


def information_nats(env: np.ndarray, probs: np.ndarray) -> float:
    """``I(X;Y) = sum_y p(y) sum_x r(x) phi(q(x|y) / r(x) - 1)``, ``phi(x) = (1+x) log(1+x) - x``.

    Every term is non-negative, so a policy that barely depends on the state (a budget of
    1e-12 bits) keeps its information to full relative precision; the textbook sum
    ``q log(q / r)`` loses it to cancellation (Cover & Thomas 2006, eq. 2.28, rewritten with
    ``sum_x (q - r) = 0``).
    """
    keep = env > 0
    p, q = env[keep], probs[keep]
    r = p @ q
    used = r > 0
    if not used.any():
        return 0.0
    x = q[:, used] / r[used] - 1.0
    terms = excess_of_log(x) * r[used]
    value = float(p @ terms.sum(axis=1))
    if not np.isfinite(value):
        return _mutual_information_nats(env, probs)
    return max(value, 0.0)


def expected_payoff(env: np.ndarray, probs: np.ndarray, payoff: np.ndarray) -> float:
    """``E[u]`` as the zero-information payoff ``max_x E[u(Y, x)]`` plus the gain over it.

    ``E[u] = E_0 + sum_y p(y) sum_x q(x|y) (u(y,x) - u(y,x*))`` with ``x*`` the best phenotype
    on average (``sum_x q = 1``): a policy that barely departs from ``x*`` keeps its small
    gain exactly instead of losing it in the rounding of ``E_0``.
    """
    means = env @ payoff
    star = int(np.argmax(means))
    gain = env @ (probs * (payoff - payoff[:, star : star + 1])).sum(axis=1)
    return float(means[star] + gain)


def policy_figures(payoff: np.ndarray, env: np.ndarray, probs: np.ndarray) -> tuple[float, float, float]:
    """``I(X;Y)`` (bits), ``H(X|Y)`` (bits) and ``E[u]`` (payoff units) of a policy."""
    return (
        information_nats(env, probs) / NATS_PER_BIT,
        float(env @ entr(probs).sum(axis=1)) / NATS_PER_BIT,
        expected_payoff(env, probs, payoff),
    )


def make_policy(
    payoff: np.ndarray,
    env: np.ndarray,
    probs: np.ndarray,
    *,
    beta: float,
    objective: str,
    converged: bool,
    iterations: int,
    status: str,
    message: str,
    gap_nats: float = 0.0,
    method: str = "",
    marginal: np.ndarray | None = None,
) -> Policy:
    """Assemble a :class:`Policy` with its information and payoff figures."""
    marginal = env @ probs if marginal is None else marginal
    information, entropy, payoff_value = policy_figures(payoff, env, probs)
    return Policy(
        probs=probs,
        marginal=marginal,
        information_bits=information,
        conditional_entropy_bits=entropy,
        expected_payoff=payoff_value,
        beta=beta,
        objective=objective,
        converged=converged,
        iterations=iterations,
        status=status,
        message=message,
        gap_nats=gap_nats,
        method=method,
    )


def solve(
    payoff,
    env,
    beta,
    *,
    objective: str = "min-information",
    reference=None,
    method: str = "newton",
    tol: float = 1e-12,
    max_iter: int | None = None,
    initial_marginal=None,
) -> Policy:
    """The optimal phenotype policy at sensitivity ``beta``.

    Parameters
    ----------
    payoff : array_like, shape (states, phenotypes)
        ``payoff[y, x] = u(y, x)``: benefit of phenotype ``x`` in state ``y`` (payoff units).
    env : array_like, shape (states,), or an environment with ``.probs``
        Probabilities ``p(y)`` of the states (sum to one within 1e-9). For an environment
        with a noisy receptor, ``payoff`` is over its true states and the cell decides on the
        sensed state with payoff ``E[u(Y, x) | S = s]``.
    beta : float
        Sensitivity: Lagrange multiplier of the payoff term, >= 0 (nats per payoff unit).
    objective : {"min-information", "max-entropy"}
        ``"min-information"`` minimises ``I(X;Y) - beta E[u]``; ``"max-entropy"`` maximises
        ``H(X|Y) + beta E[u]``, or ``-E_y KL(q(.|y) || reference) + beta E[u]`` when a
        ``reference`` phenotype distribution is given.
    reference : array_like, shape (phenotypes,), optional
        Reference phenotype distribution for the max-entropy objective.
    method : {"newton", "blahut-arimoto"}
        Min-information algorithm: active-set Newton on the marginal (default; falls back to
        Blahut–Arimoto if it stalls) or plain Blahut–Arimoto alternation.
    tol : float
        Certified tolerance on the objective, ``log max_x c(x) <= tol`` (nats). On top of it,
        ``status == "converged"`` certifies the policy: the Newton correction of every
        marginal mass in use is below 1e-10 relative (1e-8 where float64 rounding stops it
        shrinking), see :doc:`concepts`.
    max_iter : int, optional
        Iteration limit, >= 1 (default 500 Newton steps, 100000 Blahut–Arimoto steps).
    initial_marginal : array_like, optional
        Warm start for the min-information marginal.

    Returns
    -------
    Policy

    Warns
    -----
    RuntimeWarning
        ``method="blahut-arimoto"`` returned a policy it could not certify.

    Notes
    -----
    Min-information: ``q(x|y) = r(x) exp(beta u(y,x)) / Z(y)``, ``r(x) = sum_y p(y) q(x|y)``.
    At ``beta = 0`` the cell ignores the environment and uses the phenotype(s) with the best
    mean payoff (shared equally in a tie). Below the first critical beta (Kuhn–Tucker
    conditions) the answer is that single phenotype, exactly.

    Max-entropy: ``q(x|y) ∝ pi(x) exp(beta u(y,x))``; two phenotypes give the logistic law
    ``q = 1 / (1 + exp(-beta Δu))``.

    References
    ----------
    Blahut, R. (1972). IEEE Trans. Inf. Theory 18:460. Arimoto, S. (1972). IEEE Trans. Inf.
    Theory 18:14. Jaynes, E. T. (1957). Phys. Rev. 106:620.

    Examples
    --------
    >>> import switchlaw
    >>> policy = switchlaw.solve([[1.0, 0.0], [0.0, 1.0]], [0.5, 0.5], beta=2.0)
    >>> round(policy.expected_payoff, 6)
    0.880797
    """
    u, p = check_problem(payoff, env)
    beta = as_beta(beta)
    choice(objective, "objective", OBJECTIVES)
    max_iter = as_max_iter(max_iter)
    return OBJECTIVES[objective](
        u, p, beta, reference=reference, method=method, tol=tol, max_iter=max_iter,
        initial_marginal=initial_marginal,
    )


def _max_entropy(u, p, beta, *, reference, method, tol, max_iter, initial_marginal) -> Policy:
    del method, tol, max_iter, initial_marginal  # closed form: no iterations to steer
    ref = None if reference is None else as_distribution(reference, "reference")
    if ref is not None and ref.size != u.shape[1]:
        raise InputError(
            f"`reference` must have one entry per phenotype ({u.shape[1]}) (got {ref.size})"
        )
    q = max_entropy_policy(u, beta, ref)
    return make_policy(
        u, p, q, beta=beta, objective="max-entropy", converged=True, iterations=0,
        status="closed-form", message="softmax of beta * payoff", method="closed-form",
    )


def _min_information(u, p, beta, *, reference, method, tol, max_iter, initial_marginal) -> Policy:
    if reference is not None:
        raise InputError(
            "`reference` applies to objective='max-entropy' only "
            "(min-information chooses its own marginal)"
        )
    choice(method, "method", METHODS)
    tol = as_positive(tol, "tol")
    start = None
    if initial_marginal is not None:
        start = as_distribution(initial_marginal, "initial_marginal")
        if start.size != u.shape[1]:
            raise InputError(
                f"`initial_marginal` must have one entry per phenotype ({u.shape[1]}) "
                f"(got {start.size})"
            )
    policy = solve_checked(u, p, beta, method=method, start=start, tol=tol, max_iter=max_iter)
    if method == "blahut-arimoto" and policy.status == "not-converged":
        warnings.warn(
            f"Blahut–Arimoto did not certify the policy at beta={beta:.6g}: "
            f"{policy.message}; method='newton' resolves it",
            RuntimeWarning, stacklevel=3,
        )
    return policy


#: ``objective=`` names and their solvers.
OBJECTIVES = {"min-information": _min_information, "max-entropy": _max_entropy}


def solve_checked(
    u: np.ndarray,
    p: np.ndarray,
    beta: float,
    *,
    method: str = "newton",
    start: np.ndarray | None = None,
    tol: float = 1e-12,
    max_iter: int | None = None,
    prepared=None,
) -> Policy:
    """Min-information :func:`solve` on validated inputs (for loops over beta)."""
    r, record, status = minimum_information_marginal(
        u, p, beta, method=method, start=start, tol=tol, max_iter=max_iter,
        prepared=prepared,
    )
    q = policy_for_marginal(u, beta, r) if beta > 0 else np.tile(r, (u.shape[0], 1))
    return make_policy(
        u, p, q, beta=beta, objective="min-information", converged=record.converged,
        iterations=record.iterations, status=status, message=record.message,
        gap_nats=record.gap_nats, method=method if status != "closed-form" else "closed-form",
        marginal=r if status == "closed-form" else None,
    )
