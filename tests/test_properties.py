"""Property tests (hypothesis) of invariants every policy must satisfy.

Sources: 0 <= I(X;Y) <= min(H(X), H(Y)) (Cover & Thomas §2.4–2.6); the rate–distortion
curve is non-decreasing in its slope parameter (Cover & Thomas §10.2).
"""

import numpy as np
from hypothesis import given
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

import switchlaw as sl


@st.composite
def problems(draw):
    states = draw(st.integers(1, 12))
    phenotypes = draw(st.integers(1, 5))
    payoff = draw(
        arrays(np.float64, (states, phenotypes),
               elements=st.floats(-5, 5, allow_nan=False, allow_infinity=False))
    )
    weights = draw(
        arrays(np.float64, states, elements=st.floats(0, 1, allow_nan=False))
    )
    if weights.sum() <= 1e-6:
        weights = np.ones(states)
    env = weights / weights.sum()
    return payoff, env


betas = st.floats(0, 200, allow_nan=False, allow_infinity=False)


@given(problems(), betas, st.sampled_from(["min-information", "max-entropy"]))
def test_rows_sum_to_one_and_information_is_bounded(problem, beta, objective):
    payoff, env = problem
    policy = sl.solve(payoff, env, beta, objective=objective)
    np.testing.assert_allclose(policy.probs.sum(axis=1), 1.0, atol=1e-12)
    assert (policy.probs >= 0).all()
    upper = min(sl.entropy(policy.marginal, unit="bits"), sl.entropy(env, unit="bits"))
    assert -1e-12 <= policy.information_bits <= upper + 1e-9
    assert policy.converged


@given(problems(), betas, betas)
def test_information_and_payoff_do_not_fall_as_beta_rises(problem, a, b):
    payoff, env = problem
    lo, hi = sorted((a, b))
    p_lo, p_hi = sl.solve(payoff, env, lo), sl.solve(payoff, env, hi)
    scale = 1.0 + np.abs(payoff).max()
    assert p_hi.information_bits >= p_lo.information_bits - 1e-8
    assert p_hi.expected_payoff >= p_lo.expected_payoff - 1e-9 * scale


@given(problems(), betas)
def test_min_information_beats_every_environment_blind_policy(problem, beta):
    # Any policy that ignores y has I = 0, so the optimum's I - beta E[u] is at most
    # -beta * max_x E[u(Y, x)].
    payoff, env = problem
    policy = sl.solve(payoff, env, beta)
    value = policy.information_bits * sl.NATS_PER_BIT - beta * policy.expected_payoff
    assert value <= -beta * (env @ payoff).max() + 1e-9 * (1 + beta * np.abs(payoff).max())
