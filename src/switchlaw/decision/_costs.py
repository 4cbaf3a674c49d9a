"""Sensing cost per bit and the sensitivity beta are two faces of one Lagrange multiplier."""

from __future__ import annotations

import math

from .._validate import as_positive
from ..information._measures import NATS_PER_BIT


def beta_from_cost(cost_per_bit) -> float:
    """Beta (nats per payoff unit) for a sensing cost of ``cost_per_bit`` payoff units per bit.

    Maximising ``E[u] - c I_bits`` is minimising ``I_nats - beta E[u]`` with ``beta = ln 2 / c``.

    >>> round(beta_from_cost(math.log(2)), 12)
    1.0
    """
    return NATS_PER_BIT / as_positive(cost_per_bit, "cost_per_bit")


def cost_from_beta(beta) -> float:
    """Sensing cost per bit (payoff units) equivalent to ``beta``: ``ln 2 / beta``."""
    return NATS_PER_BIT / as_positive(beta, "beta")
