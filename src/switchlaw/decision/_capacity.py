"""Capacity of a sensing channel by Blahut–Arimoto, with certified bounds."""

from __future__ import annotations

import numpy as np
from scipy.special import rel_entr

from .._errors import InputError
from .._validate import as_positive, as_stochastic_matrix
from ..information._measures import NATS_PER_BIT
from ._results import Capacity


def capacity(channel, *, tol_bits: float = 1e-10, max_iter: int = 100_000) -> Capacity:
    """Capacity ``C = max_p I(Y; S)`` of a channel ``W(s | y)`` (bits per use).

    Parameters
    ----------
    channel : array_like, shape (inputs, outputs)
        ``channel[y, s] = W(s | y)``; rows sum to one.
    tol_bits : float
        Stop once the certified bracket on ``C`` is narrower than this (bits).
    max_iter : int

    Returns
    -------
    Capacity

    Notes
    -----
    With ``D(y) = KL(W(.|y) || pW)``, every input ``p`` gives
    ``log sum_y p(y) exp(D(y)) <= C <= max_y D(y)``; the update is ``p <- p exp(D) / sum``
    (Blahut 1972; Arimoto 1972). A receptor's capacity caps any useful sensing budget.

    References
    ----------
    Cover, T. M. & Thomas, J. A. (2006). *Elements of Information Theory*, 2nd ed., §7.1 and
    §10.8.

    Examples
    --------
    >>> round(capacity([[0.9, 0.1], [0.1, 0.9]]).bits, 8)   # 1 - H_b(0.1)
    0.53100441
    """
    w = as_stochastic_matrix(channel, "channel")
    tol_bits = as_positive(tol_bits, "tol_bits")
    if isinstance(max_iter, bool) or not isinstance(max_iter, (int, np.integer)) or max_iter < 1:
        raise InputError(f"`max_iter` must be a positive integer (got {max_iter!r})")
    m = w.shape[0]
    p = np.full(m, 1.0 / m)
    lower = upper = 0.0
    for iteration in range(max_iter + 1):
        output = p @ w
        divergence = rel_entr(w, output[None, :]).sum(axis=1)
        top = divergence.max()
        upper = top
        lower = top + np.log(p @ np.exp(divergence - top))
        if (upper - lower) / NATS_PER_BIT <= tol_bits:
            break
        p = p * np.exp(divergence - top)
        p /= p.sum()
    converged = (upper - lower) / NATS_PER_BIT <= tol_bits
    return Capacity(
        bits=float(0.5 * (lower + upper) / NATS_PER_BIT),
        input=p,
        gap_bits=float((upper - lower) / NATS_PER_BIT),
        converged=bool(converged),
        iterations=iteration,
        message="certified bracket below tolerance" if converged else "iteration limit reached",
    )
