"""Information core against scipy.stats.entropy (a general-purpose reference library) and
textbook identities (Cover & Thomas, Elements of Information Theory, 2nd ed., ch. 2)."""

import math

import numpy as np
import pytest
from scipy import stats

import switchlaw as sl


def test_entropy_matches_scipy(rng):
    p = rng.dirichlet(np.ones(7))
    assert sl.entropy(p) == pytest.approx(stats.entropy(p), rel=1e-13)
    assert sl.entropy(p, unit="bits") == pytest.approx(stats.entropy(p, base=2), rel=1e-13)


def test_zero_log_zero_is_zero():
    # 0 log 0 = 0 (Cover & Thomas §2.1): a zero entry changes nothing.
    assert sl.entropy([0.5, 0.5, 0.0], unit="bits") == 1.0
    assert sl.entropy([1.0, 0.0]) == 0.0


def test_kl_matches_scipy_and_is_infinite_without_support(rng):
    p, q = rng.dirichlet(np.ones(5)), rng.dirichlet(np.ones(5))
    assert sl.kl_divergence(p, q) == pytest.approx(stats.entropy(p, q), rel=1e-13)
    assert sl.kl_divergence([0.5, 0.5], [1.0, 0.0]) == math.inf
    assert sl.kl_divergence([1.0, 0.0], [0.5, 0.5], unit="bits") == pytest.approx(1.0)


def test_mutual_information_chain_rule(rng):
    # I(X;Y) = H(X) + H(Y) - H(X,Y) with entropies from scipy.stats.entropy.
    env = rng.dirichlet(np.ones(6))
    policy = rng.dirichlet(np.ones(4), size=6)
    joint = env[:, None] * policy
    expected = (
        stats.entropy(joint.sum(0)) + stats.entropy(env) - stats.entropy(joint.ravel())
    )
    assert sl.mutual_information(env, policy) == pytest.approx(expected, rel=1e-12)
    # H(X|Y) = H(X,Y) - H(Y)
    assert sl.conditional_entropy(env, policy) == pytest.approx(
        stats.entropy(joint.ravel()) - stats.entropy(env), rel=1e-12
    )


def test_independent_policy_carries_no_information(rng):
    env = rng.dirichlet(np.ones(5))
    row = rng.dirichlet(np.ones(3))
    assert sl.mutual_information(env, np.tile(row, (5, 1))) == pytest.approx(0.0, abs=1e-15)


def test_units_convert_by_ln2():
    assert sl.to_bits(math.log(2)) == pytest.approx(1.0)
    assert sl.NATS_PER_BIT == pytest.approx(0.6931471805599453)


@pytest.mark.parametrize(
    "call, argument",
    [
        (lambda: sl.entropy([0.5, 0.6]), "probs"),
        (lambda: sl.entropy([1.2, -0.2]), "probs"),
        (lambda: sl.entropy([np.nan, 1.0]), "probs"),
        (lambda: sl.entropy([[0.5, 0.5]]), "probs"),
        (lambda: sl.mutual_information([0.5, 0.5], [[1.0, 0.0]]), "policy"),
        (lambda: sl.mutual_information([0.5, 0.5], [[0.7, 0.7], [0.5, 0.5]]), "policy"),
        (lambda: sl.kl_divergence([0.5, 0.5], [1.0]), "p"),
        (lambda: sl.entropy([0.5, 0.5], unit="dits"), "unit"),
    ],
)
def test_bad_input_names_the_argument(call, argument):
    with pytest.raises(sl.InputError, match=f"`{argument}`"):
        call()
