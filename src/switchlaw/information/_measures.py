"""Entropy, conditional entropy, mutual information and KL divergence.

Conventions (Cover & Thomas, *Elements of Information Theory*, 2nd ed., ch. 2):
``0 log 0 = 0`` exactly (``scipy.special.entr``/``rel_entr``), and
``KL(p || q) = inf`` when ``p`` puts mass where ``q`` has none.
Joint quantities take ``env[y]`` (probability of state ``y``) and ``policy[y, x] = q(x | y)``.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import entr, rel_entr

from .._validate import as_distribution, as_stochastic_matrix, choice
from .._errors import InputError

#: One bit expressed in nats (``ln 2``).
NATS_PER_BIT = math.log(2.0)

_UNITS = ("nats", "bits")


def to_bits(nats):
    """Convert nats to bits (divide by ``ln 2``)."""
    value = np.asarray(nats, dtype=np.float64) / NATS_PER_BIT
    return float(value) if value.ndim == 0 else value


def _in_unit(nats: float, unit: str) -> float:
    choice(unit, "unit", _UNITS)
    return float(nats / NATS_PER_BIT) if unit == "bits" else float(nats)


def entropy(probs, *, unit: str = "nats") -> float:
    """Shannon entropy ``H(P) = -sum p log p``.

    Parameters
    ----------
    probs : array_like, shape (k,)
        A probability vector (sums to one within 1e-9).
    unit : {"nats", "bits"}

    Examples
    --------
    >>> round(entropy([0.5, 0.5], unit="bits"), 12)
    1.0
    """
    p = as_distribution(probs, "probs")
    return _in_unit(float(entr(p).sum()), unit)


def _joint_inputs(env, policy):
    p = as_distribution(env, "env")
    q = as_stochastic_matrix(policy, "policy")
    if q.shape[0] != p.size:
        raise InputError(
            f"`policy` must have one row per state of `env` ({p.size}) (got shape {q.shape})"
        )
    return p, q


def conditional_entropy(env, policy, *, unit: str = "nats") -> float:
    """Conditional entropy ``H(X | Y) = sum_y p(y) H(q(. | y))``.

    Parameters
    ----------
    env : array_like, shape (m,)
        Probabilities ``p(y)`` of the environment states.
    policy : array_like, shape (m, n)
        ``policy[y, x] = q(x | y)``; rows sum to one.
    unit : {"nats", "bits"}
    """
    p, q = _joint_inputs(env, policy)
    return _in_unit(float(p @ entr(q).sum(axis=1)), unit)


def mutual_information(env, policy, *, unit: str = "nats") -> float:
    """Mutual information ``I(X; Y) = sum_y p(y) KL(q(. | y) || r)`` with ``r = p @ q``.

    Parameters
    ----------
    env : array_like, shape (m,)
    policy : array_like, shape (m, n)
    unit : {"nats", "bits"}

    Examples
    --------
    A noiseless copy of a fair bit carries one bit:

    >>> round(mutual_information([0.5, 0.5], [[1, 0], [0, 1]], unit="bits"), 12)
    1.0
    """
    p, q = _joint_inputs(env, policy)
    return _in_unit(_mutual_information_nats(p, q), unit)


def _mutual_information_nats(p: np.ndarray, q: np.ndarray) -> float:
    """Unchecked kernel: ``I(X;Y)`` in nats, never negative."""
    keep = p > 0
    p, q = p[keep], q[keep]
    # r(x) >= p(y) q(x|y) always; the bound (floored at the smallest normal float) keeps an
    # underflowed r from making a negligible term infinite.
    r = np.maximum(np.maximum((p @ q)[None, :], p[:, None] * q), np.finfo(float).tiny)
    return max(float(p @ rel_entr(q, r).sum(axis=1)), 0.0)


def kl_divergence(p, q, *, unit: str = "nats") -> float:
    """Kullback–Leibler divergence ``KL(p || q) = sum p log(p / q)``; ``inf`` where ``q`` lacks support."""
    a = as_distribution(p, "p")
    b = as_distribution(q, "q")
    if a.shape != b.shape:
        raise InputError(f"`p` and `q` must have the same length (got {a.size} and {b.size})")
    return _in_unit(float(rel_entr(a, b).sum()), unit)
