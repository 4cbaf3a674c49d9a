"""Shared test settings: float64 throughout, hypothesis kept quick by default."""

import os

import numpy as np
import pytest
from hypothesis import HealthCheck, settings

# The default run draws the same examples every time (CI must not pass or fail by chance);
# the thorough profile explores afresh (SWITCHLAW_HYPOTHESIS=thorough).
settings.register_profile(
    "default", max_examples=40, deadline=None, derandomize=True,
    suppress_health_check=[HealthCheck.too_slow],
)
settings.register_profile("thorough", max_examples=400, deadline=None)
settings.load_profile(os.environ.get("SWITCHLAW_HYPOTHESIS", "default"))


@pytest.fixture
def rng():
    return np.random.default_rng(20261202)


def binary_entropy_bits(p: float) -> float:
    """H_b(p) in bits, written out independently of the package."""
    if p in (0.0, 1.0):
        return 0.0
    return float(-(p * np.log2(p) + (1 - p) * np.log2(1 - p)))
