"""Bad input: one-line `InputError` messages that name the argument, the rule and the value."""

import numpy as np
import pytest

import switchlaw as sl

PAYOFF = np.eye(2)
ENV = [0.5, 0.5]


@pytest.mark.parametrize(
    "call, pattern",
    [
        (lambda: sl.solve(PAYOFF, [0.5, 0.6], 1.0), r"`env` must sum to 1 within 1e-09 \(got sum 1\.1"),
        (lambda: sl.solve(PAYOFF, [1.5, -0.5], 1.0), r"`env` must be non-negative; entry 1 is -0\.5"),
        (lambda: sl.solve(PAYOFF, [np.nan, 1.0], 1.0), r"`env` must be finite; entry 0 is nan"),
        (lambda: sl.solve([[1.0, np.inf], [0, 1]], ENV, 1.0), r"`payoff` must be finite; entry \(0, 1\) is inf"),
        (lambda: sl.solve(np.eye(3), ENV, 1.0), r"`payoff` must have one row per environment state \(2\) \(got shape \(3, 3\)\)"),
        (lambda: sl.solve([1.0, 2.0], ENV, 1.0), r"`payoff` must be a 2-D array \(got shape \(2,\)\)"),
        (lambda: sl.solve(PAYOFF, ENV, -1.0), r"`beta` must be finite and >= 0 \(got -1\.0\)"),
        (lambda: sl.solve(PAYOFF, ENV, np.nan), r"`beta` must be finite and >= 0 \(got nan\)"),
        (lambda: sl.solve(PAYOFF, ENV, "big"), r"`beta` must be a real number \(got 'big'\)"),
        (lambda: sl.solve(PAYOFF, ENV, 1.0, objective="greedy"), r"`objective` must be one of 'min-information', 'max-entropy' \(got 'greedy'\)"),
        (lambda: sl.solve(PAYOFF, ENV, 1.0, method="simplex"), r"`method` must be one of 'newton', 'blahut-arimoto'"),
        (lambda: sl.solve(PAYOFF, ENV, 1.0, reference=[0.5, 0.5]), r"`reference` applies to objective='max-entropy' only"),
        (lambda: sl.solve(PAYOFF, ENV, 1.0, objective="max-entropy", reference=[1.0]), r"`reference` must have one entry per phenotype \(2\)"),
        (lambda: sl.solve(PAYOFF, [], 1.0), r"`env` must not be empty"),
        (lambda: sl.solve_budget(PAYOFF, ENV, bits=2.0), r"`bits` must be at most 1, the largest I\(X;Y\) possible .* \(got 2\.0\)"),
        (lambda: sl.solve_budget(PAYOFF, ENV, bits=0.5, method="grid"), r"`method` must be one of 'conic', 'bisection'"),
        (lambda: sl.solve_budget(PAYOFF, ENV, bits=0.5, phenotype_fractions=[1.0]), r"`phenotype_fractions` must have one entry per phenotype"),
        (lambda: sl.solve_budget(PAYOFF, ENV, bits=0.5, constraints=[np.eye(2)]), r"`constraints\[0\]` must be a LinearConstraint"),
        (lambda: sl.tradeoff(PAYOFF, ENV, [[1.0]]), r"`betas` must be a 1-D array"),
        (lambda: sl.capacity([[0.5, 0.6]]), r"`channel` rows must sum to 1"),
        (lambda: sl.sensitivity(PAYOFF, ENV, 0.0), r"`beta` must be > 0"),
        (lambda: sl.first_critical_beta(PAYOFF, [0.2, 0.2]), r"`env` must sum to 1"),
    ],
)
def test_message_names_argument_rule_and_value(call, pattern):
    with pytest.raises(sl.InputError, match=pattern) as info:
        call()
    message = str(info.value)
    assert "\n" not in message
    assert isinstance(info.value, ValueError)


def test_environment_objects_are_accepted():
    class Environment:
        states = np.arange(2)
        probs = np.array([0.25, 0.75])

    policy = sl.solve(PAYOFF, Environment(), 1.0)
    assert policy.probs.shape == (2, 2)


def test_tiny_rounding_in_env_is_renormalised():
    policy = sl.solve(PAYOFF, [0.5 + 4e-10, 0.5], 1.0)
    assert policy.probs.sum(axis=1) == pytest.approx([1.0, 1.0])


def test_public_names_exist():
    for name in sl.__all__:
        assert hasattr(sl, name), name
    assert sl.InputError.__module__ == "switchlaw"


def test_occupancy_refuses_a_neighbourhood_too_large_to_hold(tmp_path):
    # One state per occupied-neighbour count: 10**12 neighbours would need terabytes; the
    # bound is named in one line instead of a MemoryError (common practice, no source).
    with pytest.raises(sl.InputError, match=r"`neighbours` must be at most 100,000"):
        sl.occupancy(10**12, 0.5)


def test_occupancy_of_a_large_neighbourhood_stays_a_distribution():
    # Past N ~ 1000 comb(N, k) overflows; the pmf must still match scipy.stats.binom.
    from scipy import stats

    env = sl.occupancy(5000, 0.3)
    np.testing.assert_allclose(env.probs, stats.binom.pmf(np.arange(5001), 5000, 0.3), rtol=1e-12, atol=1e-300)
    assert abs(env.probs.sum() - 1.0) < 1e-12
