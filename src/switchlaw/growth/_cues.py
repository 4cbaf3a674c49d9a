"""Noisy cues: sensing channels from the environment to what the cell registers."""

from __future__ import annotations

import numpy as np

from .._errors import InputError
from .._validate import as_nonnegative
from ._checks import check_count


def symmetric_cue(n_states: int, error) -> np.ndarray:
    """A cue that reports the true state with probability ``1 - error`` and each other state
    with probability ``error / (n_states - 1)`` (the ``n``-ary symmetric channel).

    Parameters
    ----------
    n_states : int
        Number of environment states (= cue states), >= 2.
    error : float
        Probability that the cue is wrong, in ``[0, 1]``.

    Returns
    -------
    ndarray, shape (n_states, n_states)
        ``cue[e, c]``; rows sum to one.

    Notes
    -----
    With uniform environments it carries
    ``log2 n - H_b(error) - error log2(n - 1)`` bits (Cover & Thomas 2006, §7.1).

    Examples
    --------
    >>> symmetric_cue(2, 0.1).tolist()
    [[0.9, 0.1], [0.1, 0.9]]
    """
    n = check_count(n_states, "n_states", 2)
    error = as_nonnegative(error, "error")
    if error > 1:
        raise InputError(f"`error` must be a probability in [0, 1] (got {error!r})")
    cue = np.full((n, n), error / (n - 1))
    np.fill_diagonal(cue, 1.0 - error)
    return cue
