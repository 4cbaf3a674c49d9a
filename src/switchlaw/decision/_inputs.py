"""Checks at the decision stage's public boundary: the problem, ``beta`` and ``max_iter``.

Shared by every decision entry point (and kept apart from the solvers so that they do not
import each other).
"""

from __future__ import annotations

import numpy as np

from .._errors import InputError
from .._validate import as_distribution, as_nonnegative, as_payoff


def check_problem(payoff, env) -> tuple[np.ndarray, np.ndarray]:
    """Validated ``(payoff[s, x], env[s])`` over the states the cell decides on.

    An environment seen through a noisy receptor (an object with a ``channel``) takes the
    payoff over its *true* states and turns it into the payoff expected given each sensed
    state, ``E[u(Y, x) | S = s]``.
    """
    probs = as_distribution(env, "env")
    raw = np.asarray(env.probs if hasattr(env, "probs") and not isinstance(env, np.ndarray) else env,
                     dtype=np.float64)
    if raw.shape == probs.shape and abs(float(raw.sum()) - 1.0) <= 8 * np.finfo(float).eps:
        # Already normalised to rounding: dividing by the sum would perturb every entry by an
        # ulp, and next to a transition the policy is that sensitive (1e-16 / (beta/beta_c - 1)).
        probs = raw.copy()
    if getattr(env, "channel", None) is not None:
        true_states = env.channel.shape[0]
        return env.sensed_payoff(as_payoff(payoff, true_states)), probs
    return as_payoff(payoff, probs.size), probs


def as_beta(value, name: str = "beta") -> float:
    """A real, finite ``beta >= 0``; strings and booleans are refused (no silent coercion)."""
    if isinstance(value, (str, bytes, bool, np.bool_)):
        raise InputError(f"`{name}` must be a real number (got {value!r})")
    return as_nonnegative(value, name)


def as_max_iter(value):
    """``None`` or an integer >= 1: an iteration limit of 0 could certify nothing."""
    if value is None:
        return None
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (int, np.integer)):
        raise InputError(f"`max_iter` must be a positive integer or None (got {value!r})")
    if value < 1:
        raise InputError(f"`max_iter` must be >= 1 (got {value!r})")
    return int(value)
