"""The min-information solver against rate–distortion closed forms.

With payoff = -distortion, minimising I(X;Y) - beta E[u] traces R(D) with slope -beta
(Cover & Thomas, Elements of Information Theory, 2nd ed., ch. 10).
"""

import math

import numpy as np
import pytest
from scipy import stats

import switchlaw as sl
from conftest import binary_entropy_bits

HAMMING2 = -(1.0 - np.eye(2))


@pytest.mark.parametrize("method", ["newton", "blahut-arimoto"])
@pytest.mark.parametrize("p", [0.2, 0.35])
@pytest.mark.parametrize("beta", [0.3, 1.0, 1.6, 2.0, 4.0, 9.0, 30.0])
def test_bernoulli_hamming(p, beta, method):
    # Cover & Thomas Thm 10.3.1: R(D) = H_b(p) - H_b(D) for 0 <= D <= min(p, 1-p);
    # the slope is beta = ln((1-D)/D), so D = 1/(1+e^beta) above beta_c = ln((1-p)/p).
    policy = sl.solve(HAMMING2, [1 - p, p], beta, method=method)
    beta_c = math.log((1 - p) / p)
    if beta <= beta_c:
        distortion, rate = p, 0.0
    else:
        distortion = 1.0 / (1.0 + math.exp(beta))
        rate = binary_entropy_bits(p) - binary_entropy_bits(distortion)
    assert policy.converged
    assert -policy.expected_payoff == pytest.approx(distortion, rel=1e-9, abs=1e-14)
    assert policy.information_bits == pytest.approx(rate, rel=1e-8, abs=1e-12)


def test_bernoulli_first_critical_beta():
    # beta_c = ln((1-p)/p) (Kuhn–Tucker conditions, Blahut 1972).
    for p in (0.05, 0.2, 0.4):
        assert sl.first_critical_beta(HAMMING2, [1 - p, p]) == pytest.approx(
            math.log((1 - p) / p), rel=1e-13
        )


@pytest.mark.parametrize("m", [3, 5])
@pytest.mark.parametrize("beta", [0.5, 2.0, 6.0])
def test_uniform_source_hamming(m, beta):
    # Uniform source on m letters with Hamming distortion:
    # R(D) = log m - H_b(D) - D log(m-1), 0 <= D <= 1 - 1/m (Cover & Thomas ch. 10 problems);
    # on the curve, slope beta gives D = (m-1)/(e^beta + m - 1).
    payoff = -(1.0 - np.eye(m))
    policy = sl.solve(payoff, np.full(m, 1.0 / m), beta)
    distortion = (m - 1) / (math.exp(beta) + m - 1)
    rate = math.log2(m) - binary_entropy_bits(distortion) - distortion * math.log2(m - 1)
    assert -policy.expected_payoff == pytest.approx(distortion, rel=1e-10)
    assert policy.information_bits == pytest.approx(rate, rel=1e-9)


def _gaussian_problem(sigma=1.0, states=801, reproductions=241):
    """N(0, sigma^2) discretised by exact CDF differences; squared-error payoff."""
    edges = np.linspace(-7 * sigma, 7 * sigma, states + 1)
    probs = np.diff(stats.norm.cdf(edges, scale=sigma))
    probs /= probs.sum()
    centres = 0.5 * (edges[1:] + edges[:-1])
    outputs = np.linspace(-3.5 * sigma, 3.5 * sigma, reproductions)
    return -((centres[:, None] - outputs[None, :]) ** 2), probs


@pytest.mark.parametrize("beta", [1.0, 2.0, 8.0])
def test_gaussian_source_squared_error(beta):
    # Cover & Thomas Thm 10.3.2: R(D) = 0.5 log(sigma^2 / D); slope -beta gives D = 1/(2 beta).
    # A fine discretisation only approaches the continuous curve (Rose 1994): 2 % tolerance.
    payoff, probs = _gaussian_problem()
    policy = sl.solve(payoff, probs, beta)
    distortion = 1.0 / (2.0 * beta)
    assert -policy.expected_payoff == pytest.approx(distortion, rel=0.02)
    assert policy.information_bits == pytest.approx(0.5 * math.log2(1.0 / distortion), rel=0.02)


def test_gaussian_first_critical_beta():
    # Rose 1994 (IEEE Trans. Inf. Theory 40:1939): beta_c = 1/(2 sigma^2) for the Gaussian
    # source; a discretised source approaches it as the grid is refined.
    sigma = 1.5
    payoff, probs = _gaussian_problem(sigma=sigma, states=1601, reproductions=481)
    assert sl.first_critical_beta(payoff, probs) == pytest.approx(1 / (2 * sigma**2), rel=0.02)


def test_slope_of_the_curve_is_the_multiplier():
    # dR/dD = -beta (Cover & Thomas §10.4): dI_nats / dE[u] = beta.
    payoff = -np.abs(np.subtract.outer(np.arange(6), np.arange(4)) * 0.5)
    env = np.array([0.05, 0.1, 0.3, 0.25, 0.2, 0.1])
    h = 1e-5
    for beta in (1.2, 2.5, 5.0):
        lo, hi = sl.solve(payoff, env, beta - h), sl.solve(payoff, env, beta + h)
        slope = (hi.information_bits - lo.information_bits) * sl.NATS_PER_BIT / (
            hi.expected_payoff - lo.expected_payoff
        )
        assert slope == pytest.approx(beta, rel=1e-5)
