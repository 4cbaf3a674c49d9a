"""``solve``: the optimal switching policy for one beta, by objective."""

from __future__ import annotations

import numpy as np
from scipy.special import entr

from .._errors import InputError
from .._validate import as_distribution, as_nonnegative, as_payoff, as_positive, choice
from ..information._measures import NATS_PER_BIT, _mutual_information_nats
from ._minimum_information import METHODS, minimum_information_marginal, policy_for_marginal
from ._results import Policy



def check_problem(payoff, env) -> tuple[np.ndarray, np.ndarray]:
    """Validated ``(payoff[s, x], env[s])`` over the states the cell decides on.

    An environment seen through a noisy receptor (an object with a ``channel``) takes the
    payoff over its *true* states and turns it into the payoff expected given each sensed
    state, ``E[u(Y, x) | S = s]``.
    """
    probs = as_distribution(env, "env")
    if getattr(env, "channel", None) is not None:
        true_states = env.channel.shape[0]
        return env.sensed_payoff(as_payoff(payoff, true_states)), probs
    return as_payoff(payoff, probs.size), probs


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
    return Policy(
        probs=probs,
        marginal=marginal,
        information_bits=_mutual_information_nats(env, probs) / NATS_PER_BIT,
        conditional_entropy_bits=float(env @ entr(probs).sum(axis=1)) / NATS_PER_BIT,
        expected_payoff=float(env @ (probs * payoff).sum(axis=1)),
        beta=beta,
        objective=objective,
        converged=converged,
        iterations=iterations,
        status=status,
        message=message,
        gap_nats=gap_nats,
        method=method,
    )


def max_entropy_policy(payoff: np.ndarray, beta: float, reference: np.ndarray | None) -> np.ndarray:
    """``q(x|y) ∝ pi(x) exp(beta u(y,x))`` (Jaynes 1957); ``pi`` uniform if not given."""
    logits = beta * payoff
    if reference is not None:
        with np.errstate(divide="ignore"):
            logits = logits + np.log(reference)[None, :]
    logits = logits - logits.max(axis=1, keepdims=True)
    q = np.exp(logits)
    return q / q.sum(axis=1, keepdims=True)


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
        Certified tolerance on the objective, ``log max_x c(x) <= tol`` (nats).
    max_iter : int, optional
        Iteration limit (default 500 Newton steps, 100000 Blahut–Arimoto steps).
    initial_marginal : array_like, optional
        Warm start for the min-information marginal.

    Returns
    -------
    Policy

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
    beta = as_nonnegative(beta, "beta")
    choice(objective, "objective", OBJECTIVES)
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
    return solve_checked(u, p, beta, method=method, start=start, tol=tol, max_iter=max_iter)


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
