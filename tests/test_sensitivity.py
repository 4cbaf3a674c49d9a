"""Implicit-function derivatives (JAX) against central finite differences of `solve`."""

import numpy as np
import pytest

import switchlaw as sl


def central(f, x, h):
    return (f(x + h) - f(x - h)) / (2 * h)


@pytest.mark.parametrize("beta", [0.8, 2.0, 7.0])
def test_derivatives_match_finite_differences(beta):
    rng = np.random.default_rng(11)
    payoff = rng.normal(size=(20, 4))
    env = rng.dirichlet(np.ones(20))
    result = sl.sensitivity(payoff, env, beta)
    h = 1e-5
    assert result.d_expected_payoff_d_beta == pytest.approx(
        central(lambda b: sl.solve(payoff, env, b).expected_payoff, beta, h), rel=1e-5, abs=1e-9
    )
    assert result.d_information_bits_d_beta == pytest.approx(
        central(lambda b: sl.solve(payoff, env, b).information_bits, beta, h), rel=1e-5, abs=1e-9
    )
    for y, x in [(0, 0), (3, 2), (11, 1), (19, 3)]:
        bump = np.zeros_like(payoff)
        bump[y, x] = 1.0

        def gain(t):
            return sl.solve(payoff + t * bump, env, beta).expected_payoff

        def info(t):
            return sl.solve(payoff + t * bump, env, beta).information_bits

        assert result.d_expected_payoff_d_payoff[y, x] == pytest.approx(
            central(gain, 0.0, h), rel=1e-5, abs=1e-9
        )
        assert result.d_information_bits_d_payoff[y, x] == pytest.approx(
            central(info, 0.0, h), rel=1e-5, abs=1e-9
        )


def test_slope_identity_holds_for_the_derivatives():
    # Along the curve dI_nats / dE[u] = beta (Cover & Thomas §10.4): the two derivatives
    # with respect to beta must be in that ratio.
    payoff = -np.abs(np.subtract.outer(np.arange(5), np.arange(3)))
    env = np.array([0.1, 0.2, 0.4, 0.2, 0.1])
    result = sl.sensitivity(payoff, env, 3.0)
    ratio = result.d_information_bits_d_beta * sl.NATS_PER_BIT / result.d_expected_payoff_d_beta
    assert ratio == pytest.approx(3.0, rel=1e-10)


def test_single_phenotype_regime_has_flat_beta_derivatives(rng):
    payoff = rng.normal(size=(6, 3))
    env = rng.dirichlet(np.ones(6))
    beta = 0.5 * sl.first_critical_beta(payoff, env)
    result = sl.sensitivity(payoff, env, beta)
    assert result.d_expected_payoff_d_beta == 0.0
    best = int(np.argmax(env @ payoff))
    np.testing.assert_allclose(result.d_expected_payoff_d_payoff[:, best], env)
