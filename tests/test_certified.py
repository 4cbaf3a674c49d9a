"""Certified policies next to transitions, and budgets that never overspend (issue 13).

References: the one-dimensional Kuhn–Tucker condition of a two-phenotype problem (Blahut
1972; Cover & Thomas 2006, §10.8), solved to 40 digits with mpmath (a general-purpose
arbitrary-precision library) from a float64 brentq bracket; the slope and monotonicity of the
rate–distortion curve (Cover & Thomas 2006, §10.4).
"""

import math

import mpmath
import numpy as np
import pytest
from scipy.optimize import brentq

import switchlaw as sl
from switchlaw._errors import InputError


def kuhn_tucker_root(payoff, env, beta, star, other):
    """Exact entering mass t of ``other`` at ``beta``: ``sum_y p(y) d(y) / (1 + t d(y)) = 0``
    with ``d = exp(beta (u_other - u_star)) - 1`` (Kuhn–Tucker condition of the marginal,
    Blahut 1972). brentq brackets it in float64; mpmath refines it at 40 digits, because
    float64 rounding of the sum alone moves the root by up to 1e-7 relative at eps = 1e-8.
    """
    gaps = payoff[:, other] - payoff[:, star]  # the same float64 differences the solver sees
    d = np.expm1(beta * gaps)
    start = brentq(lambda t: env @ (d / (1 + t * d)), 0.0, 1 - 1e-15, xtol=1e-300,
                   rtol=8.9e-16, maxiter=500)
    with mpmath.workdps(40):
        b = mpmath.mpf(beta)
        big_d = [mpmath.expm1(b * mpmath.mpf(g)) for g in gaps]
        probs = [mpmath.mpf(p) for p in env]
        root = mpmath.findroot(
            lambda t: sum(p * x / (1 + t * x) for p, x in zip(probs, big_d)), mpmath.mpf(start)
        )
        policy = np.empty_like(payoff)
        for y, g in enumerate(gaps):
            z = 1 + root * big_d[y]
            policy[y, other] = float(root * mpmath.exp(b * mpmath.mpf(g)) / z)
            policy[y, star] = float((1 - root) / z)
    return float(root), policy


@pytest.mark.parametrize("eps", [1e-8, 1e-6, 1e-4, 1e-2])
def test_two_phenotypes_just_past_the_critical_beta(eps):
    # Every entry of the policy within 1e-8 relative of the exact Kuhn–Tucker solution.
    rng = np.random.default_rng(1313)
    checked = 0
    while checked < 12:
        states = int(rng.integers(2, 12))
        payoff, env = rng.normal(size=(states, 2)), rng.dirichlet(np.ones(states))
        beta_c = sl.first_critical_beta(payoff, env)
        if not 0 < beta_c < math.inf:
            continue
        star = int(np.argmax(env @ payoff))
        beta = beta_c * (1 + eps)
        _, exact = kuhn_tucker_root(payoff, env, beta, star, 1 - star)
        policy = sl.solve(payoff, env, beta)
        assert policy.status == "converged"
        np.testing.assert_allclose(policy.probs, exact, rtol=1e-8, atol=0)
        checked += 1


def test_the_issue_example_enters_with_the_kuhn_tucker_mass():
    # Issue 13: today's solver gave the second phenotype 1.64e-4; the Kuhn–Tucker root is 5.00e-6.
    payoff = np.array([[0.27, -0.66], [-0.89, -0.19]])
    env = np.array([0.43, 0.57])
    beta = sl.first_critical_beta(payoff, env) * (1 + 1e-5)
    root, exact = kuhn_tucker_root(payoff, env, beta, 0, 1)
    assert root == pytest.approx(5.00e-6, rel=1e-3)
    policy = sl.solve(payoff, env, beta)
    assert policy.status == "converged"
    assert policy.marginal[1] == pytest.approx(root, rel=1e-8)
    np.testing.assert_allclose(policy.probs, exact, rtol=1e-8, atol=0)


def test_blahut_arimoto_never_returns_a_far_policy_silently():
    # Next to a transition the alternation crawls (Blahut 1972): with few iterations it must
    # say so, both in the status and with a warning.
    payoff = np.array([[0.27, -0.66], [-0.89, -0.19]])
    env = np.array([0.43, 0.57])
    beta = sl.first_critical_beta(payoff, env) * (1 + 1e-5)
    with pytest.warns(RuntimeWarning, match="Blahut–Arimoto did not certify"):
        policy = sl.solve(payoff, env, beta, method="blahut-arimoto", max_iter=2000)
    assert policy.status == "not-converged"


def test_bernoulli_source_blahut_arimoto_converges_and_is_certified():
    # Cover & Thomas Thm 10.3.1: D = 1/(1 + e^beta) above beta_c = ln 4; away from the
    # transition Blahut–Arimoto converges and its policy is certified.
    policy = sl.solve(-(1 - np.eye(2)), [0.8, 0.2], 3.0, method="blahut-arimoto")
    assert policy.status == "converged"
    assert -policy.expected_payoff == pytest.approx(1 / (1 + math.exp(3.0)), rel=1e-9)


@pytest.mark.parametrize(
    "call, match",
    [
        (lambda: sl.solve([[1.0, 0.0], [0.0, 1.0]], [0.5, 0.5], "2"), r"`beta` must be a real number"),
        (lambda: sl.solve([[1.0, 0.0], [0.0, 1.0]], [0.5, 0.5], True), r"`beta` must be a real number"),
        (lambda: sl.solve([[1.0, 0.0], [0.0, 1.0]], [0.5, 0.5], 2.0, max_iter=0), r"`max_iter` must be >= 1"),
        (lambda: sl.solve([[1.0, 0.0], [0.0, 1.0]], [0.5, 0.5], 2.0, max_iter=2.5), r"`max_iter` must be a positive integer"),
        (lambda: sl.tradeoff([[1.0, 0.0], [0.0, 1.0]], [0.5, 0.5], ["1", "2"]), r"`betas` must be real numbers"),
        (lambda: sl.solve_budget([[1.0, 0.0], [0.0, 1.0]], [0.5, 0.5], bits=math.nan), r"`bits` must be finite"),
        (lambda: sl.solve_budget([[1.0, 0.0], [0.0, 1.0]], [0.5, 0.5], bits=math.inf), r"`bits` must be finite"),
        (lambda: sl.solve_budget([[1.0, 0.0], [0.0, 1.0]], [0.5, 0.5], bits="0.1"), r"`bits` must be a real number"),
    ],
)
def test_bad_arguments_are_named(call, match):
    # Common practice, no source: the error names the argument and the rule.
    with pytest.raises(InputError, match=match):
        call()


def test_the_issue_budget_example_is_not_overspent():
    # Issue 13: 1e-9 bits used to spend 2.2e-8 bits and earn 0.5499999862 < 0.55.
    payoff = np.array([[1, 0, 0.6], [0, 1, 0.6], [0.3, 0.2, 0.1]])
    env = np.array([0.45, 0.45, 0.10])
    policy = sl.solve_budget(payoff, env, bits=1e-9)
    assert policy.information_bits <= 1e-9 * (1 + 1e-9)
    assert policy.information_bits >= 1e-9 * (1 - 1e-6)
    assert policy.expected_payoff >= (env @ payoff).max()
    assert policy.beta >= sl.first_critical_beta(payoff, env)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_budgets_from_a_picobit_to_the_capacity(seed):
    # Never overspent, never below the zero-information payoff max_x E[u(Y,x)], and the
    # multiplier is the inverse of the trade-off curve: tradeoff(beta) spends the budget.
    rng = np.random.default_rng(seed)
    payoff = rng.normal(size=(8, 3))
    env = rng.dirichlet(np.ones(8))
    blind = (env @ payoff).max()
    most = sl.max_information_bits(env, 3)
    for bits in [1e-12, 1e-10, 1e-8, 1e-6, 1e-4, 1e-2, 0.1, 0.5 * most, most]:
        policy = sl.solve_budget(payoff, env, bits=bits)
        assert policy.information_bits <= bits * (1 + 1e-9)
        assert policy.expected_payoff >= blind
        if policy.status == "budget-slack":
            assert math.isinf(policy.beta)
            continue
        curve = sl.tradeoff(payoff, env, [policy.beta])
        assert curve.information_bits[0] == pytest.approx(bits, rel=1e-6)
        # One-sided check of the multiplier: a slightly larger beta overspends.
        larger = sl.tradeoff(payoff, env, [policy.beta * (1 + 1e-6)])
        assert larger.information_bits[0] > bits


def test_zero_budget_is_the_zero_information_policy_exactly():
    # At I = 0 the policy ignores the state: the best phenotype on average (Kuhn–Tucker).
    rng = np.random.default_rng(5)
    payoff, env = rng.normal(size=(10, 4)), rng.dirichlet(np.ones(10))
    policy = sl.solve_budget(payoff, env, bits=0.0)
    best = int(np.argmax(env @ payoff))
    np.testing.assert_array_equal(policy.probs, np.tile(np.eye(4)[best], (10, 1)))
    assert policy.information_bits == 0.0
    assert policy.expected_payoff == (env @ payoff).max()


def test_feasible_budget_with_a_tiny_state_probability():
    # Issue 13: a 16 x 7 problem with a tiny state probability raised InfeasibleError.
    rng = np.random.default_rng(16)
    payoff = rng.normal(size=(16, 7))
    env = rng.dirichlet(np.ones(16))
    env[3] = 1e-14
    env /= env.sum()
    for bits in [1e-6, 0.3, 1.0]:
        policy = sl.solve_budget(payoff, env, bits=bits)
        assert policy.information_bits <= bits * (1 + 1e-9)
        assert policy.expected_payoff >= (env @ payoff).max()


def test_critical_beta_keeps_its_digits_in_large_payoff_units():
    # beta_c scales as 1 / payoff unit (the objective depends on beta * u only): relative
    # accuracy must not depend on the unit. Bernoulli(0.2): beta_c = ln 4 (Cover & Thomas).
    for unit in [1e-6, 1.0, 1e6, 1e12]:
        beta_c = sl.first_critical_beta(-(1 - np.eye(2)) * unit, [0.8, 0.2])
        assert beta_c * unit == pytest.approx(math.log(4), rel=1e-13)


def test_every_transition_keeps_its_digits_in_small_and_large_units():
    # The objective depends on beta * u only, so beta_k * unit is the same for every unit
    # (common practice, no source: a change of units is a symmetry of the problem).
    rng = np.random.default_rng(11)
    payoff, env = rng.normal(size=(12, 4)), rng.dirichlet(np.ones(12))
    reference = sl.tradeoff(payoff, env, np.linspace(0, 6, 13)).critical_betas
    assert len(reference) >= 2
    for unit in [1e-9, 1e9]:
        scaled = sl.tradeoff(payoff * unit, env, np.linspace(0, 6, 13) / unit).critical_betas
        assert len(scaled) == len(reference)
        for a, b in zip(scaled, reference):
            assert a.beta * unit == pytest.approx(b.beta, rel=1e-9)
            assert (a.entering, a.leaving) == (b.entering, b.leaving)


def test_a_curve_past_the_critical_beta_is_certified_too():
    # The curve warm-starts each beta from the last (a different route to the policy than a
    # cold solve): the same Kuhn–Tucker references, every entry within 1e-8 relative.
    rng = np.random.default_rng(2024)
    checked = 0
    while checked < 6:
        states = int(rng.integers(2, 12))
        payoff, env = rng.normal(size=(states, 2)), rng.dirichlet(np.ones(states))
        beta_c = sl.first_critical_beta(payoff, env)
        if not 0 < beta_c < math.inf:
            continue
        star = int(np.argmax(env @ payoff))
        eps = np.array([1e-8, 1e-7, 1e-6, 1e-5, 1e-4, 1e-3, 1e-2])
        curve = sl.tradeoff(payoff, env, beta_c * (1 + eps))
        assert curve.converged.all()
        for i, e in enumerate(eps):
            _, exact = kuhn_tucker_root(payoff, env, beta_c * (1 + e), star, 1 - star)
            np.testing.assert_allclose(curve.probs_at(i), exact, rtol=1e-8, atol=0)
        checked += 1


def test_float64_residual_bound_covers_its_rounding():
    # The float64 Kuhn–Tucker residual comes with a worst-case rounding bound (Higham 2002,
    # §3.1 and §4.2); against the same residual in extended precision the actual error must
    # stay inside it, next to a transition and away from one, on small and large tables.
    from switchlaw.decision._marginal_newton import kkt_residual
    from switchlaw.decision._problem import Reduced, evaluate

    rng = np.random.default_rng(20261203)
    for states, phenotypes in [(3, 2), (50, 4), (2000, 6)]:
        payoff = rng.normal(size=(states, phenotypes))
        env = rng.dirichlet(np.ones(states))
        beta_c = sl.first_critical_beta(payoff, env)
        for beta in [beta_c * (1 + 1e-6), 3 * beta_c + 0.5]:
            marginal = sl.solve(payoff, env, beta).marginal
            problem = Reduced.build(payoff, env, beta)
            ev = evaluate(problem, marginal)
            columns = np.flatnonzero(marginal > 0)
            residual, bound = kkt_residual(problem, ev, marginal, columns=columns, bound=True)
            exact = kkt_residual(problem, ev, marginal, columns=columns, extended=True)
            assert np.all(np.abs(residual - exact) <= bound)
            assert np.all(bound < 1e-12)
