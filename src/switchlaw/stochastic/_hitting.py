"""Exact probability that a birth–death chain hits 0 before a ceiling (first-step analysis)."""

from __future__ import annotations

import numpy as np

from .._errors import InputError
from ._checks import as_count, as_counts, rates_over_states


def chain_rates(birth, death, upper: int) -> tuple[np.ndarray, np.ndarray]:
    """Birth and death rates at ``n = 0..upper`` (zero at the two absorbing ends), checked.

    Rates are evaluated only at the interior states ``0 < n < upper``; a state where both are
    zero would trap the chain and is an error naming it.
    """
    interior = np.arange(1, upper)
    b = np.zeros(upper + 1)
    d = np.zeros(upper + 1)
    if interior.size:
        b[1:upper] = rates_over_states(birth, "birth", interior)
        d[1:upper] = rates_over_states(death, "death", interior)
        stuck = (b[1:upper] + d[1:upper]) == 0
        if stuck.any():
            n = int(interior[np.argmax(stuck)])
            raise InputError(
                f"`birth` and `death` are both 0 at state n={n}: the chain could never leave it"
            )
    return b, d


def _check_upper_and_starts(n0, upper):
    upper = as_count(upper, "upper", minimum=1)
    starts = as_counts(n0, "n0")
    if (starts > upper).any():
        bad = int(starts.ravel()[np.argmax(starts.ravel() > upper)])
        raise InputError(f"`n0` must be <= `upper` ({upper}) (got {bad})")
    return upper, starts


def _probabilities(b: np.ndarray, d: np.ndarray, upper: int, starts: np.ndarray) -> np.ndarray:
    """First-step solution at every start, from checked rate tables (see :func:`hitting_probability`)."""
    zero_birth = np.flatnonzero(b[1:upper] == 0) + 1
    low = 0
    if zero_birth.size:
        low = int(zero_birth.max())
        trapped = np.flatnonzero(d[1:low + 1] == 0) + 1
        if trapped.size:
            w = int(trapped.max())
            raise InputError(
                f"`death` is 0 at n={w} and `birth` is 0 at n={low}: a chain started between "
                f"them never hits 0 or `upper`"
            )
    # log rho_k = sum_{i=low+1}^{k} log(d_i / b_i), rho_low = 1; terms k = low..upper-1.
    with np.errstate(divide="ignore"):
        steps = np.log(d[low + 1:upper]) - np.log(b[low + 1:upper])
    log_rho = np.concatenate([[0.0], np.cumsum(steps)])
    # Suffix log-sums: tail[j] = log sum_{k=low+j}^{upper-1} rho_k, computed from the end.
    tail = np.logaddexp.accumulate(log_rho[::-1])[::-1]
    tail = np.append(tail, -np.inf)  # empty sum for n0 = upper
    out = np.ones(starts.shape)
    above = starts > low
    out[above] = np.exp(tail[starts[above] - low] - tail[0])
    out[starts == 0] = 1.0
    return out


def hitting_probability(birth, death, n0, upper):
    """Exact probability that a birth–death chain started at ``n0`` hits 0 before ``upper``.

    Parameters
    ----------
    birth, death : callable, array_like or float
        Rates ``birth(n)``, ``death(n)`` per unit time (callables of ``n``, arrays indexed by
        ``n``, or constants). Only the interior states ``0 < n < upper`` are used; rates there
        must be finite and >= 0, and not both zero at one state.
    n0 : int or array_like of int
        Starting size(s), ``0 <= n0 <= upper``.
    upper : int
        The ceiling, ``>= 1``.

    Returns
    -------
    float or ndarray
        ``P(hit 0 before upper | n0)`` (an array when ``n0`` is one).

    Notes
    -----
    First-step analysis of the embedded jump chain (Karlin & Taylor 1975, ch. 4, the gambler's
    ruin for birth–death chains): with ``rho_0 = 1`` and
    ``rho_k = prod_{i=1}^{k} death(i) / birth(i)``,

        P(hit 0 before M | n0) = sum_{k=n0}^{M-1} rho_k / sum_{k=0}^{M-1} rho_k.

    The sums are formed in log space (``logaddexp``) so that products over hundreds of states
    neither overflow nor underflow. A zero death rate at ``i`` makes ``rho_k = 0`` for
    ``k >= i`` (the chain cannot fall below ``i``). A zero birth rate at ``z`` means the chain
    can never climb past ``z``: started at or below it, it hits 0 with probability one; started
    above it, the formula applies on ``[z, M]`` since reaching ``z`` then leads to 0.

    References
    ----------
    Karlin, S. & Taylor, H. M. (1975). *A First Course in Stochastic Processes*, 2nd ed.,
    Academic Press, ch. 4.

    Examples
    --------
    Gambler's ruin with a fair coin: ``P = 1 - n0 / M``.

    >>> round(hitting_probability(1.0, 1.0, 3, 10), 12)
    0.7
    """
    upper, starts = _check_upper_and_starts(n0, upper)
    b, d = chain_rates(birth, death, upper)
    out = _probabilities(b, d, upper, starts)
    return float(out) if out.ndim == 0 else out
