"""`solve`: both objectives, both min-information methods, and the numerically hard corners."""

import math

import numpy as np
import pytest
from scipy.special import expit

import switchlaw as sl


def random_problem(rng, states, phenotypes, scale=1.0):
    payoff = scale * rng.normal(size=(states, phenotypes))
    env = rng.dirichlet(np.full(states, 0.5))
    return payoff, env


def free_energy(policy):
    """I(X;Y) - beta E[u] in nats, the min-information objective."""
    return policy.information_bits * sl.NATS_PER_BIT - policy.beta * policy.expected_payoff


@pytest.mark.parametrize("beta", [0.05, 0.4, 1.5, 6.0, 60.0, 1e3, 1e4])
def test_newton_matches_blahut_arimoto(rng, beta):
    # Blahut–Arimoto alternation (Blahut 1972; Arimoto 1972) is the reference method: both
    # must reach the same optimum of the convex problem within their certified gaps.
    for _ in range(5):
        payoff, env = random_problem(rng, int(rng.integers(2, 60)), int(rng.integers(2, 7)))
        fast = sl.solve(payoff, env, beta)
        slow = sl.solve(payoff, env, beta, method="blahut-arimoto", max_iter=400_000)
        assert fast.converged and slow.converged
        assert free_energy(fast) == pytest.approx(free_energy(slow), abs=1e-10)
        assert fast.gap_nats <= 1e-12


def test_newton_iterations_stay_small_across_a_transition():
    # Next to the critical beta ln 4 of a Bernoulli(0.2) source, Blahut–Arimoto crawls
    # (thousands of iterations); the Newton solve on the marginal must not.
    payoff, env = -(1 - np.eye(2)), [0.8, 0.2]
    slow = sl.solve(payoff, env, 1.39, method="blahut-arimoto")
    fast = sl.solve(payoff, env, 1.39)
    assert slow.iterations > 1000
    assert fast.iterations <= 10
    assert fast.expected_payoff == pytest.approx(slow.expected_payoff, abs=1e-9)


def test_policy_is_the_gibbs_form_of_its_marginal(rng):
    # Stationary point: q(x|y) = r(x) exp(beta u(y,x)) / Z(y) (Blahut 1972; domain notes §2).
    payoff, env = random_problem(rng, 40, 5)
    policy = sl.solve(payoff, env, 3.0)
    gibbs = policy.marginal * np.exp(3.0 * payoff)
    gibbs /= gibbs.sum(axis=1, keepdims=True)
    np.testing.assert_allclose(policy.probs, gibbs, atol=1e-12)
    np.testing.assert_allclose(env @ policy.probs, policy.marginal, atol=1e-12)


def test_small_beta_collapses_on_the_best_average_phenotype(rng):
    # Domain notes §2: at small beta the marginal collapses on argmax_x E[u(x, Y)].
    payoff, env = random_problem(rng, 30, 4)
    policy = sl.solve(payoff, env, 0.5 * sl.first_critical_beta(payoff, env))
    best = int(np.argmax(env @ payoff))
    assert policy.phenotypes_in_use == (best,)
    assert policy.information_bits == pytest.approx(0.0, abs=1e-15)  # rounding of p @ q
    assert policy.status == "closed-form"
    zero = sl.solve(payoff, env, 0.0)
    np.testing.assert_array_equal(zero.marginal, np.eye(4)[best])


def test_max_entropy_two_phenotypes_is_logistic():
    # Jaynes 1957; domain notes §2: q = 1 / (1 + exp(-beta * Δu)).
    delta = np.linspace(-3, 3, 13)
    payoff = np.stack([np.zeros_like(delta), delta], axis=1)
    policy = sl.solve(payoff, np.full(13, 1 / 13), 2.5, objective="max-entropy")
    np.testing.assert_allclose(policy.probs[:, 1], expit(2.5 * delta), rtol=1e-14)


def test_max_entropy_with_reference_tilts_the_reference():
    # q(x|y) ∝ pi(x) exp(beta u(y,x)) (Jaynes 1957).
    payoff = np.array([[1.0, 0.0, 0.5], [0.0, 2.0, 0.1]])
    reference = np.array([0.6, 0.3, 0.1])
    policy = sl.solve(payoff, [0.5, 0.5], 1.3, objective="max-entropy", reference=reference)
    expected = reference * np.exp(1.3 * payoff)
    expected /= expected.sum(axis=1, keepdims=True)
    np.testing.assert_allclose(policy.probs, expected, rtol=1e-14)
    at_zero = sl.solve(payoff, [0.5, 0.5], 0.0, objective="max-entropy", reference=reference)
    np.testing.assert_allclose(at_zero.probs, np.tile(reference, (2, 1)), rtol=1e-15)


def test_zero_probability_states_get_a_policy_but_no_weight(rng):
    payoff, env = random_problem(rng, 12, 3)
    env[[2, 7]] = 0.0
    env /= env.sum()
    policy = sl.solve(payoff, env, 4.0)
    np.testing.assert_allclose(policy.probs.sum(axis=1), 1.0, atol=1e-14)
    kept = env > 0
    reduced = sl.solve(payoff[kept], env[kept], 4.0)
    assert policy.expected_payoff == pytest.approx(reduced.expected_payoff, abs=1e-12)
    assert policy.information_bits == pytest.approx(reduced.information_bits, abs=1e-12)


def test_identical_phenotypes_share_their_mass(rng):
    payoff, env = random_problem(rng, 20, 3)
    doubled = np.column_stack([payoff, payoff[:, 1]])
    single = sl.solve(payoff, env, 2.0)
    twin = sl.solve(doubled, env, 2.0)
    assert twin.marginal[1] == pytest.approx(twin.marginal[3], abs=1e-15)
    assert twin.marginal[1] + twin.marginal[3] == pytest.approx(single.marginal[1], abs=1e-10)
    # Duplicating a phenotype changes neither the payoff nor the information it carries.
    assert twin.expected_payoff == pytest.approx(single.expected_payoff, abs=1e-10)
    assert twin.information_bits == pytest.approx(single.information_bits, abs=1e-10)


def test_single_phenotype_and_single_state():
    one = sl.solve([[1.0], [2.0]], [0.3, 0.7], 5.0)
    np.testing.assert_array_equal(one.probs, [[1.0], [1.0]])
    assert one.information_bits == 0.0 and one.expected_payoff == pytest.approx(1.7)
    state = sl.solve([[1.0, 3.0, 2.0]], [1.0], 5.0)
    np.testing.assert_array_equal(state.marginal, [0.0, 1.0, 0.0])


def test_huge_beta_underflow_is_handled_in_log_domain():
    # At beta = 1e4 the rare state's best phenotype has exp(beta * Δu) underflow everywhere
    # else; the solution must stay finite and equal the state-by-state best policy's payoff.
    payoff = np.array([[1.0, 0.0, 0.9], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]])
    env = np.array([0.999998, 1e-6, 1e-6])
    policy = sl.solve(payoff, env, 1e4)
    assert np.isfinite(policy.probs).all()
    assert policy.converged
    greedy = env @ payoff.max(axis=1)
    assert policy.expected_payoff == pytest.approx(greedy, abs=1e-6)
    reference = sl.solve(payoff, env, 1e4, method="blahut-arimoto", max_iter=400_000)
    assert free_energy(policy) == pytest.approx(free_energy(reference), abs=1e-9)


def test_warm_start_from_an_exact_zero_still_finds_the_optimum(rng):
    # A phenotype whose marginal is exactly zero can never come back under Blahut–Arimoto;
    # the Newton solve adds it back through its Kuhn–Tucker condition.
    payoff, env = random_problem(rng, 50, 4)
    cold = sl.solve(payoff, env, 5.0)
    warm = sl.solve(payoff, env, 5.0, initial_marginal=[1.0, 0.0, 0.0, 0.0])
    assert free_energy(warm) == pytest.approx(free_energy(cold), abs=1e-12)
    both = sl.solve(payoff, env, 5.0, method="blahut-arimoto", initial_marginal=[1, 0, 0, 0])
    assert free_energy(both) == pytest.approx(free_energy(cold), abs=1e-9)


def test_results_are_float64_and_print_briefly(rng):
    payoff, env = random_problem(rng, 8, 3)
    policy = sl.solve(payoff.astype(np.float32), env, 2.0)
    assert policy.probs.dtype == np.float64 and policy.marginal.dtype == np.float64
    text = repr(policy)
    assert text.startswith("Policy(min-information, beta=2") and "bits" in text
    assert len(text) < 200


def test_cost_per_bit_and_beta_are_one_multiplier():
    # Maximising E[u] - c I_bits is objective 1 with beta = ln 2 / c (domain notes §2.4).
    assert sl.beta_from_cost(math.log(2) / 3.0) == pytest.approx(3.0)
    assert sl.cost_from_beta(sl.beta_from_cost(0.37)) == pytest.approx(0.37)
    with pytest.raises(sl.InputError, match="`cost_per_bit`"):
        sl.beta_from_cost(0.0)
