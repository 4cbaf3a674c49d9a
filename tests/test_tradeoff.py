"""`tradeoff`: the curve, its labelled form, and its phase transitions."""

import math

import numpy as np
import pytest

import switchlaw as sl

HAMMING2 = -(1.0 - np.eye(2))


def brute_force_changes(payoff, env, lo, hi, points):
    """Grid cells where the set of phenotypes in use changes, from independent cold solves."""
    grid = np.linspace(lo, hi, points)
    supports = [
        frozenset(np.flatnonzero(sl.solve(payoff, env, b, method="blahut-arimoto",
                                          max_iter=400_000).marginal > 1e-7))
        for b in grid
    ]
    return [(grid[i], grid[i + 1]) for i in range(points - 1) if supports[i] != supports[i + 1]]


def test_bernoulli_critical_beta_is_exact():
    # beta_c = ln((1-p)/p) (Cover & Thomas Thm 10.3.1; Kuhn–Tucker conditions, Blahut 1972).
    curve = sl.tradeoff(HAMMING2, [0.8, 0.2], np.linspace(0, 5, 11))
    (critical,) = curve.critical_betas
    assert critical.beta == pytest.approx(math.log(4), abs=1e-12)
    assert critical.exact and critical.entering == (1,) and critical.leaving == ()


def test_every_transition_is_found_and_located():
    # Independent check: Blahut–Arimoto cold solves on a fine grid bracket each transition;
    # each located beta must sit in its bracket and the support must differ 1e-6 either side.
    rng = np.random.default_rng(7)
    payoff = rng.normal(size=(40, 5))
    env = rng.dirichlet(np.ones(40))
    curve = sl.tradeoff(payoff, env, np.linspace(0, 3, 31))
    brackets = brute_force_changes(payoff, env, 0, 3, 301)
    located = [c.beta for c in curve.critical_betas]
    assert len(located) == len(brackets) >= 2
    for beta, (lo, hi) in zip(located, brackets):
        assert lo <= beta <= hi
        before = sl.solve(payoff, env, beta - 1e-6).phenotypes_in_use
        after = sl.solve(payoff, env, beta + 1e-6).phenotypes_in_use
        assert before != after
    assert located == sorted(located)


def test_a_phenotype_that_leaves_is_reported():
    # A compromise phenotype is used at moderate sensitivity, then dropped once the cell can
    # afford to tell the two states apart (a support change in the other direction).
    payoff = np.array([[1.0, 0.0, 0.75], [0.0, 1.0, 0.75]])
    curve = sl.tradeoff(payoff, [0.5, 0.5], np.linspace(0.1, 12, 60))
    leaving = [c for c in curve.critical_betas if c.leaving]
    assert leaving and leaving[0].leaving == (2,)
    below = sl.solve(payoff, [0.5, 0.5], leaving[0].beta - 1e-6)
    above = sl.solve(payoff, [0.5, 0.5], leaving[0].beta + 1e-6)
    assert 2 in below.phenotypes_in_use and 2 not in above.phenotypes_in_use


def test_curve_matches_pointwise_solves_in_any_order(rng):
    payoff = rng.normal(size=(30, 4))
    env = rng.dirichlet(np.ones(30))
    betas = np.array([3.0, 0.0, 1.0, 10.0, 0.2])
    curve = sl.tradeoff(payoff, env, betas)
    for i, beta in enumerate(betas):
        single = sl.solve(payoff, env, beta)
        assert curve.expected_payoff[i] == pytest.approx(single.expected_payoff, abs=1e-10)
        assert curve.information_bits[i] == pytest.approx(single.information_bits, abs=1e-10)
    assert curve.converged.all()


@pytest.mark.parametrize("duplicate", [False, True])
def test_large_curve_figures_match_the_policies_of_pointwise_solves(rng, duplicate):
    # Tables of 2**15 numbers or more take each point's figures from its solve's own
    # exponentials (duplicate columns: the batched figures); both must give what the
    # policy of a separate solve gives (information without cancellation, Cover & Thomas
    # eq. 2.28; H(X|Y) and E[u] of the policy itself). Betas from below the first critical
    # one, where the information is tiny, to far above it; 1e-25 bits absolute, because at
    # the critical beta itself a solve may leave a mass at rounding level (1e-31 bits seen),
    # and a form that cancels would be off by about 1e-17.
    payoff = rng.normal(size=(5000, 8))
    if duplicate:
        payoff[:, 7] = payoff[:, 2]
    env = rng.dirichlet(np.ones(5000))
    first = sl.first_critical_beta(payoff, env)
    betas = np.array([0.5, 1.0, 1.0 + 1e-6, 1.01, 1.5, 4.0, 40.0, 400.0]) * first
    curve = sl.tradeoff(payoff, env, betas)
    for i, beta in enumerate(betas):
        single = sl.solve(payoff, env, beta)
        for name in ("information_bits", "conditional_entropy_bits", "expected_payoff"):
            value, expected = getattr(curve, name)[i], getattr(single, name)
            assert value == pytest.approx(expected, rel=1e-9, abs=1e-25), (name, beta)
        np.testing.assert_allclose(curve.marginals[i], single.marginal, rtol=1e-9, atol=1e-15)
    assert curve.converged.all()


def test_information_and_payoff_rise_with_beta(rng):
    # Rate–distortion curves are monotone (Cover & Thomas §10.2).
    payoff = rng.normal(size=(50, 6))
    env = rng.dirichlet(np.ones(50))
    curve = sl.tradeoff(payoff, env, np.geomspace(1e-3, 1e3, 80))
    assert np.all(np.diff(curve.information_bits) >= -1e-12)
    assert np.all(np.diff(curve.expected_payoff) >= -1e-12)


def test_to_xarray_is_labelled():
    curve = sl.tradeoff(HAMMING2, [0.8, 0.2], [0.5, 2.0, 4.0])
    data = curve.to_xarray(states=["absent", "present"], phenotypes=["rest", "respond"])
    assert data["information"].attrs["units"] == "bit"
    assert data["policy"].dims == ("beta", "state", "phenotype")
    assert list(data["phenotype"].values) == ["rest", "respond"]
    np.testing.assert_allclose(data.attrs["critical_betas"], [math.log(4)])
    assert "critical betas: 1.38629" in repr(curve)


def test_max_entropy_curve_has_no_transitions():
    curve = sl.tradeoff(HAMMING2, [0.8, 0.2], [0.0, 1.0, 2.0], objective="max-entropy")
    assert curve.critical_betas == ()
    np.testing.assert_allclose(curve.probs[0], 0.5)


def test_bad_beta_grid():
    with pytest.raises(sl.InputError, match="`betas` must be >= 0"):
        sl.tradeoff(HAMMING2, [0.8, 0.2], [-1.0, 1.0])
    with pytest.raises(sl.InputError, match="`betas` must be finite"):
        sl.tradeoff(HAMMING2, [0.8, 0.2], [1.0, np.inf])


def test_policies_are_rebuilt_from_the_marginals(rng):
    # The Gibbs form of the min-information policy, q(x|y) = r(x) exp(beta u(y,x)) / Z(y)
    # (Blahut 1972), written here with scipy's softmax: the curve keeps r and rebuilds q.
    from scipy.special import softmax

    payoff = rng.normal(size=(25, 4))
    env = rng.dirichlet(np.ones(25))
    betas = np.array([0.0, 0.5, 3.0, 20.0])
    curve = sl.tradeoff(payoff, env, betas)
    stacked = curve.probs
    assert stacked.shape == (4, 25, 4)
    for i, beta in enumerate(betas):
        q = curve.probs_at(i)
        np.testing.assert_array_equal(q, stacked[i])
        np.testing.assert_allclose(env @ q, curve.marginals[i], rtol=1e-12, atol=1e-15)
        if beta > 0:
            with np.errstate(divide="ignore"):
                gibbs = softmax(beta * payoff + np.log(curve.marginals[i]), axis=1)
            np.testing.assert_allclose(q, gibbs, rtol=1e-9, atol=1e-15)
        np.testing.assert_allclose(q, sl.solve(payoff, env, beta).probs, rtol=1e-8, atol=1e-13)
    with pytest.raises(IndexError, match="`index` must be in"):
        curve.probs_at(4)


def test_a_long_curve_does_not_keep_every_policy():
    # Issue 17: a long curve on a large table must not hold one policy per beta. Keeping
    # them would trace at least k x the table (80 x 1.6 MB here); common practice, no source.
    import tracemalloc

    rng = np.random.default_rng(17)
    payoff = rng.normal(size=(25_000, 8))
    env = rng.dirichlet(np.ones(25_000))
    betas = np.geomspace(0.05, 20.0, 80)
    tracemalloc.start()
    try:
        curve = sl.tradeoff(payoff, env, betas)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < 20 * payoff.nbytes  # every policy kept: > 80 * payoff.nbytes
    held = sum(getattr(curve, name).nbytes for name in (
        "betas", "information_bits", "conditional_entropy_bits", "expected_payoff",
        "marginals", "iterations", "converged"))
    assert held < payoff.nbytes
    assert curve.converged.all()
