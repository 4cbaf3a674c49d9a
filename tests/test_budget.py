"""`solve_budget`: the convex program against the fixed-point solver and closed forms."""

import math

import numpy as np
import pytest

import switchlaw as sl
from conftest import binary_entropy_bits


def test_budget_on_the_bernoulli_curve_recovers_the_slope():
    # Cover & Thomas Thm 10.3.1: with R = H_b(p) - H_b(D) bits, the optimal D solves the
    # budget and the multiplier is beta = ln((1 - D)/D).
    p, distortion = 0.2, 0.05
    bits = binary_entropy_bits(p) - binary_entropy_bits(distortion)
    policy = sl.solve_budget(-(1 - np.eye(2)), [1 - p, p], bits=bits)
    assert -policy.expected_payoff == pytest.approx(distortion, rel=1e-5)
    assert policy.beta == pytest.approx(math.log((1 - distortion) / distortion), rel=1e-4)


@pytest.mark.parametrize("seed", range(4))
def test_conic_budget_agrees_with_the_fixed_point(seed):
    # The budget's dual value is beta, and the policies agree at the same information level
    # (domain notes §2.3).
    rng = np.random.default_rng(seed)
    payoff = rng.normal(size=(25, 4))
    env = rng.dirichlet(np.ones(25))
    first = sl.first_critical_beta(payoff, env)
    for beta in (1.5 * first + 0.2, 4.0 * first + 1.0):
        fixed = sl.solve(payoff, env, beta)
        conic = sl.solve_budget(payoff, env, bits=fixed.information_bits)
        assert conic.beta == pytest.approx(beta, rel=1e-4)
        assert conic.expected_payoff == pytest.approx(fixed.expected_payoff, abs=1e-6)
        np.testing.assert_allclose(conic.probs, fixed.probs, atol=1e-3)
        bisected = sl.solve_budget(payoff, env, bits=fixed.information_bits, method="bisection")
        assert bisected.beta == pytest.approx(beta, rel=1e-9)


def test_zero_budget_takes_the_best_average_phenotype(rng):
    payoff = rng.normal(size=(10, 3))
    env = rng.dirichlet(np.ones(10))
    policy = sl.solve_budget(payoff, env, bits=0.0, method="bisection")
    assert policy.information_bits == pytest.approx(0.0, abs=1e-12)
    assert policy.expected_payoff == pytest.approx((env @ payoff).max(), abs=1e-12)


def test_a_budget_that_does_not_bind_is_reported_as_slack():
    payoff = np.array([[1.0, 0.0], [0.0, 1.0], [0.2, 0.1]])
    env = np.array([0.4, 0.4, 0.2])
    greedy_bits = sl.mutual_information(env, [[1, 0], [0, 1], [1, 0]], unit="bits")
    for method in ("conic", "bisection"):
        policy = sl.solve_budget(payoff, env, bits=min(1.0, greedy_bits + 0.05), method=method)
        assert policy.status == "budget-slack"
        assert policy.beta == math.inf
        assert policy.expected_payoff == pytest.approx(0.4 + 0.4 + 0.2 * 0.2)


def test_fixed_phenotype_fractions_are_met(rng):
    payoff = rng.normal(size=(15, 3))
    env = rng.dirichlet(np.ones(15))
    fractions = np.array([0.5, 0.3, 0.2])
    policy = sl.solve_budget(payoff, env, bits=0.3, phenotype_fractions=fractions)
    np.testing.assert_allclose(policy.marginal, fractions, atol=1e-6)
    assert policy.information_bits <= 0.3 + 1e-6


def test_linear_constraint_caps_a_moment(rng):
    payoff = rng.normal(size=(12, 2))
    env = rng.dirichlet(np.ones(12))
    weights = np.zeros((12, 2))
    weights[:, 1] = 1.0  # fraction of phenotype 1
    unconstrained = sl.solve_budget(payoff, env, bits=0.2)
    cap = 0.5 * unconstrained.marginal[1]
    policy = sl.solve_budget(
        payoff, env, bits=0.2, constraints=[sl.LinearConstraint(weights, upper=cap)]
    )
    assert policy.marginal[1] <= cap + 1e-6
    assert policy.expected_payoff <= unconstrained.expected_payoff + 1e-7


def test_budget_beyond_what_is_possible_names_the_maximum():
    env = [0.5, 0.5]
    with pytest.raises(sl.InfeasibleError, match=r"`bits` must be at most 1\b"):
        sl.solve_budget(np.eye(2), env, bits=1.5)
    with pytest.raises(sl.InfeasibleError, match="`bits`"):
        sl.solve_budget(np.eye(2), env, bits=-0.1)
    assert sl.max_information_bits(np.array([0.25] * 4), 2) == pytest.approx(1.0)


def test_conflicting_constraints_are_infeasible():
    weights = np.array([[1.0, 0.0], [1.0, 0.0]])
    with pytest.raises(sl.InfeasibleError, match="no policy meets"):
        sl.solve_budget(
            np.eye(2), [0.5, 0.5], bits=0.5,
            phenotype_fractions=[0.5, 0.5],
            constraints=[sl.LinearConstraint(weights, lower=0.9)],
        )
