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


@pytest.mark.parametrize("seed", [0, 1])
@pytest.mark.parametrize("mean_gap", [1e-4, 1e-5, 1e-6])
def test_first_critical_beta_next_to_a_tie_in_the_means(seed, mean_gap):
    # Two phenotypes whose mean payoffs differ by mean_gap on a spread of order one: the
    # root of sum_y p(y) (exp(beta delta(y)) - 1) (Kuhn–Tucker condition, Blahut 1972) at 40
    # digits (mpmath). Its condition number in float64 is about E|delta| / |E[delta]|, so
    # the answer may be off by a small multiple of u E|delta| / |E[delta]| and no more (the
    # form log sum_y p exp(beta delta) loses up to u Var[delta] / E[delta]^2: measured 1e-8
    # to 5e-4 relative on these problems).
    rng = np.random.default_rng(seed)
    m = 300
    base, z, env = rng.normal(size=m), rng.normal(size=m), rng.dirichlet(np.ones(m))
    z -= env @ z
    payoff = np.column_stack([base, base + z - mean_gap])
    delta = payoff[:, 1] - payoff[:, 0]
    beta = sl.first_critical_beta(payoff, env)
    with mpmath.workdps(40):
        probs = [mpmath.mpf(float(v)) for v in env]
        gaps = [mpmath.mpf(float(v)) for v in delta]
        root = mpmath.findroot(
            lambda t: mpmath.fsum(p * mpmath.expm1(t * d) for p, d in zip(probs, gaps)),
            (mpmath.mpf(beta) * (1 - 1e-6), mpmath.mpf(beta) * (1 + 1e-6)), solver="anderson",
        )
    condition = float(env @ np.abs(delta)) / abs(float(env @ delta))
    assert abs(beta - float(root)) <= 50 * np.finfo(float).eps * condition * float(root)


@pytest.mark.parametrize("eps", [1e-3, 5e-3])
def test_next_to_a_tie_in_the_means_a_solve_takes_the_second_phenotype(eps):
    # Mean payoffs 1e-6 apart on a spread of one: just past the first critical beta the
    # second phenotype's exact mass (the Kuhn–Tucker root at 40 digits) is 5e-4 to 2.5e-3;
    # the former test of the one-phenotype policy (1e-14 on log c) called it zero there. A
    # solve and a curve must both give the exact policy.
    rng = np.random.default_rng(0)
    m = 300
    base, z, env = rng.normal(size=m), rng.normal(size=m), rng.dirichlet(np.ones(m))
    z -= env @ z
    payoff = np.column_stack([base, base + z - 1e-6])
    beta = sl.first_critical_beta(payoff, env) * (1 + eps)
    mass, exact = kuhn_tucker_root(payoff, env, beta, 0, 1)
    policy = sl.solve(payoff, env, beta)
    assert policy.status == "converged"
    np.testing.assert_allclose(policy.probs, exact, rtol=1e-8, atol=0)
    curve = sl.tradeoff(payoff, env, [beta])
    assert curve.marginals[0][1] == pytest.approx(mass, rel=1e-8)


def test_critical_beta_does_not_depend_on_the_payoff_unit():
    # beta_c scales as 1 / unit (the objective depends on beta * u only), down to units of
    # 1e-300 and up to 1e300 (the search runs in a power-of-two unit of the differences).
    rng = np.random.default_rng(7)
    for _ in range(20):
        payoff, env = rng.normal(size=(50, 3)), rng.dirichlet(np.ones(50))
        reference = sl.first_critical_beta(payoff, env)
        for unit in (1e-300, 1e-200, 1e200, 1e300):
            assert sl.first_critical_beta(payoff * unit, env) * unit == pytest.approx(
                reference, rel=1e-12
            )


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


def transition_equations(payoff, env, support, x):
    """The Kuhn–Tucker system of a transition at 40 digits: ``c_j = 1`` for ``j`` in the
    support and for the phenotype ``x`` that enters or leaves there, in the masses on the
    support and beta (Blahut 1972; ``sum r = 1`` follows, as ``sum_j r_j c_j = 1``)."""
    gaps = payoff - payoff.max(axis=1, keepdims=True)  # the solver's float64 gaps, exactly
    columns = [*support, x]
    k = len(support)
    table = [[mpmath.mpf(float(gaps[y, j])) for j in columns] for y in range(gaps.shape[0])]
    probs = [mpmath.mpf(float(v)) for v in env]

    def equations(*unknowns):
        r, beta = unknowns[:k], unknowns[k]
        expo = [[mpmath.exp(beta * g) for g in row] for row in table]
        z = [sum(r[i] * row[i] for i in range(k)) for row in expo]
        return [
            sum(p * row[j] / zy for p, row, zy in zip(probs, expo, z)) - 1 for j in range(k + 1)
        ]

    return equations


def test_later_transitions_match_a_40_digit_kuhn_tucker_root():
    # Every transition past the first (one phenotype entering or leaving) against the root of
    # its Kuhn–Tucker system solved by mpmath's findroot at 40 digits from a start 1e-4 away.
    # Pairs of transitions closer than 1e-6 relative (a swap within a nearly flat objective)
    # are left out: between them the support itself is not resolved by float64.
    rng = np.random.default_rng(7)
    checked = 0
    while checked < 12:
        states, phenotypes = int(rng.integers(3, 10)), int(rng.integers(3, 6))
        payoff, env = rng.normal(size=(states, phenotypes)), rng.dirichlet(np.ones(states))
        found = sl.tradeoff(payoff, env, np.geomspace(0.05, 20, 9)).critical_betas
        for i, transition in enumerate(found[1:], start=1):
            others = [t.beta for j, t in enumerate(found) if j != i]
            if any(abs(b - transition.beta) < 1e-6 * transition.beta for b in others):
                continue
            if len(transition.entering) + len(transition.leaving) != 1:
                continue
            (x,) = transition.entering + transition.leaving
            side = -1e-7 if transition.entering else 1e-7
            smaller = sl.solve(payoff, env, transition.beta * (1 + side)).marginal
            support = [int(j) for j in np.flatnonzero(smaller > 1e-10) if j != x]
            with mpmath.workdps(40):
                start = [mpmath.mpf(float(v)) for v in smaller[support]]
                start.append(mpmath.mpf(transition.beta * (1 + 1e-4)))
                root = mpmath.findroot(transition_equations(payoff, env, support, x), start)
                exact = float(root[len(support)])
            assert transition.beta == pytest.approx(exact, rel=1e-12, abs=0)
            checked += 1


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


def test_plain_residual_bound_covers_its_rounding():
    # The warm path first forms c - 1 as w @ e - 1 from BLAS products (summation order
    # unknown) and certifies with a worst-case bound of that form (Higham 2002, §3.1, any
    # order of summation); against the residual in extended precision the actual error must
    # stay inside it: at small and large beta, next to a transition, up to 20000 states.
    from switchlaw.decision._marginal_newton import _plain_error, kkt_residual
    from switchlaw.decision._problem import Reduced, evaluate

    rng = np.random.default_rng(3)
    for states, phenotypes in [(3, 2), (50, 4), (2000, 6), (20000, 8)]:
        payoff = rng.normal(size=(states, phenotypes)) * 10 ** rng.uniform(-1, 1)
        env = rng.dirichlet(np.ones(states))
        beta_c = sl.first_critical_beta(payoff, env)
        for beta in [beta_c * (1 + 1e-6), 1.5 * beta_c, 3 * beta_c + 0.5, 40 * beta_c + 5]:
            marginal = sl.solve(payoff, env, beta).marginal
            problem = Reduced.build(payoff, env, beta)
            support = np.flatnonzero(marginal > 0)
            r = marginal[support] / marginal[support].sum()
            columns = problem.expo[:, support]
            z = columns @ r
            w = problem.p / z
            c = w @ columns
            residual = c - 1.0
            bound = _plain_error(c, residual, w, z, support.size)
            full = np.zeros(phenotypes)
            full[support] = r
            exact = kkt_residual(problem, evaluate(problem, full), full, columns=support,
                                 extended=True)
            assert np.all(np.abs(residual - exact) <= bound)
            assert np.all(bound < 1e-10)


def test_a_dominated_phenotype_leaves_exactly_and_the_policy_is_certified():
    # Found by Hypothesis: phenotype 1 is never better than phenotype 0 and phenotype 3 never
    # better than 2, so both leave at beta = 10 (their Kuhn–Tucker conditions fail; Blahut
    # 1972). The steps before the finish left phenotype 1 a mass of 7e-26, which the Newton
    # correction would have driven below zero, and the solve said "not-converged". The two
    # remaining masses must be the two-phenotype Kuhn–Tucker root (mpmath, 40 digits).
    payoff = np.array([[4.0, 1.0, 0.0, 0.0], [0.0, 0.0, 3.0, 0.0]])
    env = np.array([0.5, 0.5])
    policy = sl.solve(payoff, env, 10.0)
    assert policy.status == "converged"
    assert policy.marginal[1] == 0.0 and policy.marginal[3] == 0.0
    root, exact = kuhn_tucker_root(payoff[:, [0, 2]], env, 10.0, 0, 1)
    assert policy.marginal[2] == pytest.approx(root, rel=1e-10)
    np.testing.assert_allclose(policy.probs[:, [0, 2]], exact, rtol=1e-8, atol=0)


def test_a_mass_set_by_an_improbable_state_is_certified():
    # Found by Hypothesis: a state of probability 3e-114 makes phenotype 1 worth a mass of
    # 3e-114. Its curvature was lost to the cap on exp(beta u) / Z in the Newton system. With
    # two states the Kuhn–Tucker condition sum_y p(y) d(y) / (1 + t d(y)) = 0 (Blahut 1972) is
    # linear in t after clearing denominators: t = -(p0 d0 + p1 d1) / (d0 d1), evaluated
    # with mpmath at 50 digits.
    payoff = np.array([[1.0, 0.0], [0.0, 4.0]])
    env = np.array([1.0, 3.25030671e-114])
    env = env / env.sum()
    policy = sl.solve(payoff, env, 66.0)
    assert policy.status == "converged"
    with mpmath.workdps(50):
        d = [mpmath.expm1(66 * mpmath.mpf(g)) for g in payoff[:, 1] - payoff[:, 0]]
        p0, p1 = (mpmath.mpf(x) for x in env)
        t = -(p0 * d[0] + p1 * d[1]) / (d[0] * d[1])
        exact = [float(t * (1 + x) / (1 + t * x)) for x in d]  # q(1 | y)
    assert policy.marginal[1] == pytest.approx(float(t), rel=1e-10)
    np.testing.assert_allclose(policy.probs[:, 1], exact, rtol=1e-8, atol=0)


@pytest.mark.parametrize(
    "payoff, env, beta, kept",
    [
        # Found by Hypothesis (thorough profile): dominated phenotypes next to a nearly
        # singular Hessian (more phenotypes than states), which the finish left with masses of
        # 1e-30 or the general steps could not leave at all.
        ([[1.0, 0.0, 0.0, 0.0], [0.0, 3.0, 1.0, 0.0]], [0.5, 0.5], 39.0, (1, 0)),
        ([[-1.0, 0.0, 0.5, -1.0, 1.0], [0.0, -1.0, -1.0, -1.0, -1.0]], [0.5, 0.5], 16.0, (4, 0)),
    ],
)
def test_dominated_phenotypes_leave_next_to_a_singular_hessian(payoff, env, beta, kept):
    # The optimum uses the two phenotypes in `kept` (star first); every other one is dominated
    # (never better anywhere, so its Kuhn–Tucker condition fails; Blahut 1972). Masses against
    # the two-phenotype Kuhn–Tucker root at 40 digits.
    payoff, env = np.array(payoff), np.array(env)
    policy = sl.solve(payoff, env, beta)
    assert policy.status == "converged"
    others = [x for x in range(payoff.shape[1]) if x not in kept]
    assert (policy.marginal[others] == 0.0).all()
    star, other = kept
    root, exact = kuhn_tucker_root(payoff[:, [star, other]], env, beta, 0, 1)
    assert policy.marginal[other] == pytest.approx(root, rel=1e-8)
    np.testing.assert_allclose(policy.probs[:, [star, other]], exact, rtol=1e-8, atol=1e-300)


def test_a_phenotype_needed_only_by_an_improbable_state_gets_its_closed_form_mass():
    # Found by Hypothesis. Phenotype 0 is best in states A and C, phenotypes 1 and 2 share the
    # best payoff in state B (probability 8.5e-150). Kuhn–Tucker conditions (Blahut 1972),
    # worked by hand: with phenotype 2 alone beside 0, c(2) = p(C) + p(B) / r(2) = 1 gives
    # r(2) = p(B) / p(A); then c(1) = p(A) + p(A) < 1, so phenotype 1 stays out (the other way
    # round c(2) = 2 p(C) > 1 fails). Exponentials of -376 vanish against these masses.
    payoff = np.array([[4.0, 4, 0], [4, 4, 4], [0, 4, 4], [4, 0, 4]])
    env = np.array([4.8717948717948717e-001, 0.0, 8.5141187598154326e-150, 5.1282051282051277e-001])
    policy = sl.solve(payoff, env, 94.0)
    assert policy.status == "converged"
    assert policy.marginal[1] == 0.0
    assert policy.marginal[2] == pytest.approx(env[2] / env[0], rel=1e-10)


def test_a_flat_objective_at_tiny_beta_keeps_both_tied_phenotypes():
    # Found by Hypothesis. Phenotypes 0 and 1 tie on average and mirror each other across two
    # equally likely states, phenotype 2 is dominated: by symmetry the optimum is (1/2, 1/2, 0)
    # at every beta > 0 (Kuhn–Tucker: c(0) = c(1) = 1, c(2) = 2 / (1 + e^(beta/2)) < 1). At
    # beta = 1e-8 the one-phenotype policy misses the optimum by only beta^2/8 = 1.25e-17 nats,
    # inside the objective tolerance, but its masses are off by one half: the certificate must
    # not accept it.
    payoff = np.array([[0.0, -0.5, -0.5], [-0.5, 0.0, -0.5]])
    env = np.array([0.5, 0.5])
    for beta in [1e-8, 1e-4, 1.0]:
        policy = sl.solve(payoff, env, beta)
        assert policy.status == "converged"
        np.testing.assert_allclose(policy.marginal, [0.5, 0.5, 0.0], rtol=1e-10, atol=0)


@pytest.mark.parametrize("payoff, beta", [
    ([[-1.0, 5.8857277255511e-87, 0.0]], 1.401298464324817e-45),
    ([[-1.0, 3.00922448e-282, 0.0]], 1.3613336007147712e-110),
    ([[1.58820315e-230, 5.73027039e-169, 0.0]], 1.0),
])
def test_one_state_takes_the_best_phenotype_however_small_the_differences(payoff, beta):
    # Found by Hypothesis. With one state, I(X;Y) = 0 for every policy and the optimum puts all
    # mass on the best phenotype (Kuhn–Tucker conditions, Blahut 1972), for every beta > 0.
    # Here beta times the payoff differences underflows, so the objective cannot tell a spread
    # marginal from it, and the Hessian along the simplex is singular. Mean payoffs of 6e-87,
    # 3e-282 or 6e-169 against 0 are not ties (float64 resolves them exactly), so the best
    # phenotype is unique, the first critical beta is infinite, and the answer is exact.
    policy = sl.solve(np.array(payoff), [1.0], beta)
    assert policy.status == "closed-form"
    np.testing.assert_array_equal(policy.marginal, [0.0, 1.0, 0.0])
