"""A stage of the pipeline (see docs/architecture.md): information measures of discrete distributions.

Everything here computes in nats; pass ``unit="bits"`` to get bits at the edge.
"""

from ._measures import (
    NATS_PER_BIT,
    conditional_entropy,
    entropy,
    kl_divergence,
    mutual_information,
    to_bits,
)

__all__ = [
    "NATS_PER_BIT",
    "conditional_entropy",
    "entropy",
    "kl_divergence",
    "mutual_information",
    "to_bits",
]
