"""Many min-information problems solved as one stack (issue 13, section 3).

References: the single-problem solver ``switchlaw.solve``, itself checked against Kuhn–Tucker
roots computed to 40 digits with mpmath in tests/test_certified.py (Blahut 1972); the
rate–distortion function of a Bernoulli(p) source with Hamming distortion,
``R(D) = H(p) - H(D)`` for ``D <= min(p, 1 - p)``, whose optimal reproduction distribution is
``P(Xhat = 1) = (p - D) / (1 - 2 D)`` with ``D = 1 / (1 + e^beta)`` (Cover & Thomas 2006,
Elements of Information Theory, 2nd ed., §10.3.1; the slope of R(D) is ``-beta``).
"""

import math

import numpy as np
import pytest
from scipy.special import xlogy

import switchlaw as sl
from switchlaw.decision._batch import solve_stack
from switchlaw.decision._marginal_newton import POLICY_RTOL


def assert_agrees_with_solve(payoff, env, betas, found):
    """Every problem of the stack against ``switchlaw.solve`` on its own: the same status and
    every marginal mass within 1e-10 relative (exact zeros where the single solver has them)."""
    for k in range(payoff.shape[0]):
        policy = sl.solve(payoff[k], env[k], float(betas[k]))
        assert found.status[k] == policy.status, k
        assert found.converged[k]
        np.testing.assert_allclose(found.marginals[k], policy.marginal, rtol=1e-10, atol=0)


def random_stack(rng, k, states, phenotypes):
    payoff = rng.normal(size=(k, states, phenotypes))
    env = rng.dirichlet(np.ones(states), size=k)
    return payoff, env


def test_a_random_stack_agrees_with_single_solves(rng):
    payoff, env = random_stack(rng, 40, 12, 4)
    betas = np.geomspace(0.05, 40.0, 40)  # below the first transition up to nearly hard
    found = solve_stack(payoff, env, betas)
    assert_agrees_with_solve(payoff, env, betas, found)
    supports = {int((r > 0).sum()) for r in found.marginals}
    assert len(supports) >= 3  # mixed supports across the stack
    assert found.stacked.sum() >= 30  # most of them certified inside the stack


def test_just_past_and_just_below_the_first_critical_beta(rng):
    # beta_c (1 + 1e-6): the entering mass is ~1e-6 of the other; beta_c (1 - 1e-6): one
    # phenotype, closed form (Kuhn–Tucker conditions, Blahut 1972).
    payoff, env, betas = [], [], []
    while len(betas) < 16:
        u, p = rng.normal(size=(6, 2)), rng.dirichlet(np.ones(6))
        beta_c = sl.first_critical_beta(u, p)
        if not 0 < beta_c < math.inf:
            continue
        factor = 1 + 1e-6 if len(betas) % 2 == 0 else 1 - 1e-6
        payoff.append(u), env.append(p), betas.append(beta_c * factor)
    payoff, env, betas = np.array(payoff), np.array(env), np.array(betas)
    found = solve_stack(payoff, env, betas)
    assert_agrees_with_solve(payoff, env, betas, found)
    above, below = found.marginals[0::2], found.marginals[1::2]
    assert (above > 0).all() and above.min() < 1e-4
    assert ((below == 0) | (below == 1)).all()
    assert (found.status[1::2] == "closed-form").all()


def test_duplicate_columns_share_their_mass_as_in_single_solves(rng):
    base, env = random_stack(rng, 6, 8, 3)
    payoff = base[:, :, [0, 1, 0, 2, 1]]  # phenotypes 2 and 4 copy 0 and 1
    # A column that differs only on a state that never occurs is a duplicate too.
    payoff = payoff.copy()
    env[:, 0] = 0.0
    env /= env.sum(axis=1, keepdims=True)
    payoff[:, 0, 3] = 5.0
    payoff[:, 0, 1] = 5.0 + base[:, 0, 2]
    payoff[:, 0, 4] = -5.0
    betas = np.array([0.3, 1.0, 3.0, 8.0, 20.0, 50.0])
    found = solve_stack(payoff, env, betas)
    assert_agrees_with_solve(payoff, env, betas, found)
    np.testing.assert_array_equal(found.marginals[:, 0], found.marginals[:, 2])


def test_a_stack_of_one_and_warm_starts(rng):
    payoff, env = random_stack(rng, 1, 10, 5)
    found = solve_stack(payoff, env, 4.0)
    assert_agrees_with_solve(payoff, env, [4.0], found)
    # Warm-started from a nearby beta's marginals (a curve or a grid of densities).
    payoff, env = random_stack(rng, 20, 10, 5)
    near = solve_stack(payoff, env, 3.9).marginals
    found = solve_stack(payoff, env, 4.0, starts=near)
    assert_agrees_with_solve(payoff, env, np.full(20, 4.0), found)
    assert found.stacked.sum() >= 15


def test_problems_the_stack_hands_over_are_solved_alone(rng):
    payoff, env = random_stack(rng, 5, 7, 3)
    u, p = payoff[1], env[1]
    beta_c = sl.first_critical_beta(u, p)
    # beta = 0 (closed form of the single solver), a beta at the first critical beta to
    # rounding (the Kuhn–Tucker test is decided there), a warm start missing a phenotype
    # the optimum uses, and a single-state problem.
    betas = np.array([0.0, beta_c * (1 + 1e-15), 6.0, 2.0, 5.0])
    single = np.zeros(7)
    single[3] = 1.0
    env[4] = single
    found = solve_stack(payoff, env, betas)
    assert not found.stacked[0] and not found.stacked[1]
    assert_agrees_with_solve(payoff, env, betas, found)
    starts = np.tile([1.0, 0.0, 0.0], (5, 1))
    starts[2] = [0.5, 0.5, 0.0]
    found = solve_stack(payoff, env, betas, starts=starts)
    assert_agrees_with_solve(payoff, env, betas, found)


def test_entering_masses_near_rounding_are_handed_to_the_single_solver(rng):
    # At beta_c (1 + 1e-8) the entering mass is ~1e-8 and the Kuhn–Tucker residual cancels to
    # about sixteen digits: the stack hands such problems to the single solver, whose
    # extended-precision finish certifies them (tests/test_certified.py checks it against
    # mpmath roots); the answers are the single solver's.
    payoff, env, betas = [], [], []
    while len(betas) < 12:
        u, p = rng.normal(size=(6, 2)), rng.dirichlet(np.ones(6))
        beta_c = sl.first_critical_beta(u, p)
        if 0 < beta_c < math.inf:
            payoff.append(u), env.append(p), betas.append(beta_c * (1 + 1e-8))
    payoff, env, betas = np.array(payoff), np.array(env), np.array(betas)
    found = solve_stack(payoff, env, betas)
    assert (~found.stacked).any()
    assert_agrees_with_solve(payoff, env, betas, found)


@pytest.mark.parametrize("beta", [1.5, 3.0, 6.0])
def test_bernoulli_hamming_rate_distortion_closed_form(beta):
    # Cover & Thomas 2006, §10.3.1: for a Bernoulli(p) source with Hamming distortion,
    # R(D) = H(p) - H(D) for D <= min(p, 1 - p); at slope -beta, D = 1 / (1 + e^beta), and the
    # optimal reproduction distribution is P(Xhat = 1) = (p - D) / (1 - 2 D). Below the first
    # critical beta ln((1 - p) / p) the answer is R = 0 with Xhat = 0 always.
    sources = np.array([0.05, 0.1, 0.2, 0.3, 0.4, 0.5])
    payoff = np.tile(-(1.0 - np.eye(2)), (sources.size, 1, 1))
    env = np.column_stack([1.0 - sources, sources])
    found = solve_stack(payoff, env, beta)
    assert found.converged.all()
    d = 1.0 / (1.0 + math.exp(beta))
    for k, p in enumerate(sources):
        r = found.marginals[k]
        if beta <= math.log((1 - p) / p):
            assert r.tolist() == [1.0, 0.0]
            continue
        exact_r1 = (p - d) / (1.0 - 2.0 * d)
        assert r[1] == pytest.approx(exact_r1, rel=POLICY_RTOL)
        q = r * np.exp(beta * payoff[k])
        q /= q.sum(axis=1, keepdims=True)
        information = float((env[k][:, None] * xlogy(q, q / r)).sum())
        h = lambda x: -(x * math.log(x) + (1 - x) * math.log(1 - x))  # noqa: E731
        assert information == pytest.approx(h(p) - h(d), rel=1e-9)


def test_min_information_law_over_a_density_grid_matches_single_solves():
    # The law's fractions over a density grid come from the stack; each equals the marginal
    # of switchlaw.solve on that density's decision problem (invented payoffs).
    payoff = {
        "divide": sl.Linear(-1.0 / 6, 1.0),
        "move": sl.Linear(0.6 / 6, 0.2),
        "rest": sl.Linear(0.0, 0.45),
    }
    model = sl.MeanField(
        payoff=payoff, environment=lambda rho: sl.occupancy(6, rho),
        division=[1.0, 0.0, 0.2], death=[0.3, 0.3, 0.3], objective="min-information",
    )
    densities = np.linspace(0.0, 1.0, 41)
    fractions = model.fractions(densities, 8.0)
    for rho, f in zip(densities, fractions):
        env = sl.occupancy(6, rho)
        table = np.column_stack([payoff[name](env.values) for name in payoff])
        policy = sl.solve(table, env, 8.0)
        np.testing.assert_allclose(f, policy.marginal, rtol=1e-10, atol=1e-300)
