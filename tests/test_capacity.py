"""Channel capacities against Cover & Thomas, Elements of Information Theory, 2nd ed., ch. 7."""

import math

import numpy as np
import pytest

import switchlaw as sl
from conftest import binary_entropy_bits


@pytest.mark.parametrize("flip", [0.0, 0.05, 0.2, 0.5])
def test_binary_symmetric(flip):
    # C = 1 - H_b(p) (Cover & Thomas §7.1.4).
    result = sl.capacity([[1 - flip, flip], [flip, 1 - flip]])
    assert result.bits == pytest.approx(1 - binary_entropy_bits(flip), abs=1e-9)
    np.testing.assert_allclose(result.input, [0.5, 0.5], atol=1e-6)


@pytest.mark.parametrize("erasure", [0.0, 0.3, 0.9])
def test_binary_erasure(erasure):
    # C = 1 - eps (Cover & Thomas §7.1.5).
    channel = [[1 - erasure, erasure, 0.0], [0.0, erasure, 1 - erasure]]
    assert sl.capacity(channel).bits == pytest.approx(1 - erasure, abs=1e-9)


def test_z_channel():
    # Z-channel with p = 1/2: C = log2(5/4), achieved at P(X=1) = 2/5 (Cover & Thomas
    # problem 7.8; the input is from memory and checked here too).
    result = sl.capacity([[1.0, 0.0], [0.5, 0.5]])
    assert result.bits == pytest.approx(math.log2(5 / 4), abs=1e-9)
    assert result.input[1] == pytest.approx(0.4, abs=1e-5)
    assert result.converged and result.gap_bits <= 1e-10


def test_noiseless_channel_carries_log_inputs():
    assert sl.capacity(np.eye(5)).bits == pytest.approx(math.log2(5), abs=1e-12)


def test_capacity_bounds_the_information_of_any_input(rng):
    channel = rng.dirichlet(np.ones(4), size=3)
    cap = sl.capacity(channel).bits
    for _ in range(20):
        p = rng.dirichlet(np.ones(3))
        assert sl.mutual_information(p, channel, unit="bits") <= cap + 1e-9


def test_bad_channel():
    with pytest.raises(sl.InputError, match="`channel` rows must sum to 1"):
        sl.capacity([[0.5, 0.4], [0.5, 0.5]])
    with pytest.raises(sl.InputError, match="`tol_bits`"):
        sl.capacity(np.eye(2), tol_bits=0)
