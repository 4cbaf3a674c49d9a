"""Long-run growth in fluctuating environments, against outside sources.

Sources named beside each check: Kelly 1956 (Bell Syst. Tech. J. 35:917); Cover & Thomas,
Elements of Information Theory, 2nd ed. (2006), ch. 6; Barron & Cover 1988 (IEEE Trans. Inf.
Theory 34:1097); Donaldson-Matasci, Bergstrom & Lachmann 2010 (Oikos 119:219); Lewontin &
Cohen 1969 (PNAS 62:1056); Kussell & Leibler 2005 (Science 309:2075); scipy (gmean, entropy,
optimize, integrate, linalg) as general-purpose references.
"""

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.integrate import quad, solve_ivp
from scipy.linalg import expm, null_space
from scipy.optimize import LinearConstraint as ScipyLinearConstraint
from scipy.optimize import minimize
from scipy.stats import entropy, gmean

import switchlaw.growth as gr
from switchlaw import InputError, mutual_information
from conftest import binary_entropy_bits

LN2 = math.log(2.0)


def random_problem(rng, m=3, n=3, k=3):
    """Random fitness, environment and cue (fixed seeds: reproducible)."""
    fitness = rng.gamma(1.0, size=(m, n))
    habitat = rng.dirichlet(np.ones(m))
    cue = rng.dirichlet(np.ones(k), size=m)
    return fitness, habitat, cue


def mutual_information_scipy(habitat, cue):
    """I(E;C) = H(C) - H(C|E) with scipy.stats.entropy (nats)."""
    return entropy(habitat @ cue) - float(habitat @ [entropy(row) for row in cue])


# --------------------------------------------------------------------------- growth_rate


def test_growth_rate_is_log_of_weighted_geometric_mean(rng):
    # Long-run growth is the log of the geometric mean of the per-generation growth factors
    # (Lewontin & Cohen 1969); scipy.stats.gmean with weights p(e) is the reference.
    fitness, habitat, _ = random_problem(rng)
    strategy = rng.dirichlet(np.ones(3))
    expected = math.log(gmean(fitness @ strategy, weights=habitat))
    assert gr.growth_rate(fitness, habitat, strategy) == pytest.approx(expected, abs=1e-13)


def test_growth_rate_with_cue_is_geometric_mean_over_environment_and_cue(rng):
    # Same reference over the pairs (e, c), weights p(e) P(c|e) (Donaldson-Matasci et al. 2010).
    fitness, habitat, cue = random_problem(rng)
    policy = rng.dirichlet(np.ones(3), size=3)
    factors = fitness @ policy.T
    expected = math.log(gmean(factors.ravel(), weights=(habitat[:, None] * cue).ravel()))
    assert gr.growth_rate(fitness, habitat, policy, cue=cue) == pytest.approx(expected, abs=1e-13)


def test_growth_rate_is_minus_infinity_when_a_strategy_leaves_no_offspring():
    # Diagonal fitness, all offspring in phenotype 0: environment 1 kills the lineage
    # (Kelly 1956: betting nothing on a horse that can win loses everything).
    assert gr.growth_rate(np.diag([2.0, 2.0]), [0.5, 0.5], [1.0, 0.0]) == -math.inf


def test_markov_environment_gives_stationary_growth_for_memoryless_strategies():
    # Ergodic theorem: a memoryless strategy's long-run growth only depends on the stationary
    # distribution; for a two-state chain it is (b, a) / (a + b) (textbook closed form).
    a, b = 0.1, 0.3
    chain = gr.MarkovHabitat([[1 - a, a], [b, 1 - b]])
    fitness = [[2.0, 0.5], [0.3, 1.5]]
    stationary = [b / (a + b), a / (a + b)]
    assert gr.growth_rate(fitness, chain, [0.6, 0.4]) == pytest.approx(
        gr.growth_rate(fitness, stationary, [0.6, 0.4]), abs=1e-14
    )


# --------------------------------------------------------------------------- Kelly


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_proportional_betting_is_optimal_with_diagonal_fitness(seed):
    # Kelly 1956; Cover & Thomas §6.1 (theorem number from memory: 6.1.2): with odds o_e on a
    # diagonal, the optimal bet is b = p and W* = sum p log o - H(p).
    rng = np.random.default_rng(seed)
    p = rng.dirichlet(np.ones(4))
    odds = rng.uniform(1.0, 6.0, size=4)
    result = gr.bet_hedging(np.diag(odds), p)
    np.testing.assert_allclose(result.strategy, p, atol=1e-9)
    expected = float(p @ np.log(odds) - entropy(p))
    assert result.growth_rate == pytest.approx(expected, abs=1e-12)
    assert result.converged and result.gap_nats <= 1e-9


@pytest.mark.parametrize("seed", [4, 5, 6])
def test_cue_raises_growth_by_exactly_the_mutual_information_with_diagonal_fitness(seed):
    # Kelly 1956; Cover & Thomas §6.2 (ΔW = I(X;Y), from memory: Thm 6.2.1);
    # Donaldson-Matasci, Bergstrom & Lachmann 2010. The optimal policy is the posterior.
    rng = np.random.default_rng(seed)
    p = rng.dirichlet(np.ones(3))
    odds = rng.uniform(1.5, 4.0, size=3)
    cue = rng.dirichlet(np.ones(4), size=3)
    value = gr.cue_value(np.diag(odds), p, cue)
    information = mutual_information_scipy(p, cue)
    assert value.value_nats == pytest.approx(information, abs=1e-9)
    assert value.information_bits == pytest.approx(information / LN2, abs=1e-12)
    posterior = (p[:, None] * cue / (p @ cue)).T
    np.testing.assert_allclose(value.with_cue.strategy, posterior, atol=1e-8)


def test_noisy_binary_cue_is_worth_one_minus_binary_entropy():
    # Fair coin seen through a binary symmetric channel: I = 1 - H_b(eps) bits
    # (Cover & Thomas §7.1.4), and with diagonal fitness the gain equals it (Kelly 1956).
    value = gr.cue_value(np.diag([2.0, 2.0]), [0.5, 0.5], gr.symmetric_cue(2, 0.2))
    assert value.value_bits == pytest.approx(1 - binary_entropy_bits(0.2), abs=1e-9)


@pytest.mark.parametrize("seed", range(7, 12))
def test_cue_is_worth_at_most_its_mutual_information(seed):
    # Barron & Cover 1988: side information raises the optimal growth of any market by at
    # most I(E;C); and never lowers it (the optimum may ignore the cue).
    fitness, habitat, cue = random_problem(np.random.default_rng(seed), m=4, n=3, k=3)
    value = gr.cue_value(fitness, habitat, cue)
    assert -1e-10 <= value.value_nats <= mutual_information_scipy(habitat, cue) + 1e-10


def test_symmetric_cue_information():
    # m-ary symmetric channel with uniform input: log2 m - H_b(e) - e log2(m - 1)
    # (Cover & Thomas §7.1; also the uniform-source R(D) of ch. 10).
    m, error = 4, 0.3
    expected = math.log2(m) - binary_entropy_bits(error) - error * math.log2(m - 1)
    cue = gr.symmetric_cue(m, error)
    assert mutual_information(np.full(m, 1 / m), cue, unit="bits") == pytest.approx(expected, abs=1e-12)


# --------------------------------------------------------------------------- bet hedging


def test_two_by_two_bet_hedging_matches_first_order_condition():
    # Hand derivation: maximise p log(a pi + b (1-pi)) + (1-p) log(c pi + d (1-pi)).
    # Setting the derivative to zero gives pi* = -(p A d + (1-p) C b) / (A C) with
    # A = a - b, C = c - d (clipped to [0, 1]); common practice, no source.
    p, (a, b), (c, d) = 0.6, (3.0, 0.5), (0.2, 1.4)
    A, C = a - b, c - d
    pi = -(p * A * d + (1 - p) * C * b) / (A * C)
    assert 0 < pi < 1
    result = gr.bet_hedging([[a, b], [c, d]], [p, 1 - p])
    assert result.strategy[0] == pytest.approx(pi, abs=1e-10)


@pytest.mark.parametrize("seed", [13, 14, 15])
def test_bet_hedging_beats_scipy_slsqp(seed):
    # General-purpose reference: scipy.optimize.minimize (trust-constr / SLSQP) on the simplex.
    fitness, habitat, _ = random_problem(np.random.default_rng(seed), m=5, n=4)
    result = gr.bet_hedging(fitness, habitat)

    def negative_growth(pi):
        return -float(habitat @ np.log(fitness @ pi))

    reference = minimize(
        negative_growth, np.full(4, 0.25), method="SLSQP", bounds=[(1e-12, 1.0)] * 4,
        constraints=[ScipyLinearConstraint(np.ones((1, 4)), 1.0, 1.0)],
        options={"ftol": 1e-14, "maxiter": 1000},
    )
    assert result.growth_rate >= -reference.fun - 1e-12
    assert result.growth_rate == pytest.approx(-reference.fun, abs=1e-8)
    # Kuhn–Tucker conditions (Cover 1984): c(x) = E[f(E,x) / f(E).pi] <= 1, = 1 where used.
    c = habitat @ (fitness / (fitness @ result.strategy)[:, None])
    assert c.max() <= 1 + 1e-9
    np.testing.assert_allclose(c[result.strategy > 1e-9], 1.0, atol=1e-9)


@given(st.integers(min_value=0, max_value=2**32 - 1))
def test_optimal_growth_is_never_beaten_by_a_random_strategy(seed):
    # Property: the optimum of a concave problem (Cover & Thomas §16.2, from memory) is at
    # least the value of any feasible strategy.
    rng = np.random.default_rng(seed)
    fitness, habitat, cue = random_problem(rng)
    best = gr.bet_hedging(fitness, habitat, cue=cue)
    other = rng.dirichlet(np.ones(3), size=3)
    assert best.growth_rate >= gr.growth_rate(fitness, habitat, other, cue=cue) - 1e-12


# --------------------------------------------------------------------------- generations


def test_memoryless_simulation_agrees_with_formula_and_its_error_bar_is_honest():
    # Per-generation log growth is i.i.d. for a memoryless strategy in independent
    # environments, so the standard error of the mean is sd / sqrt(T) (central limit theorem).
    fitness = np.array([[2.5, 0.4], [0.3, 1.8], [1.0, 1.0]])
    habitat = np.array([0.5, 0.3, 0.2])
    strategy = np.array([0.7, 0.3])
    exact = gr.growth_rate(fitness, habitat, strategy)
    generations = 40_000
    estimate = gr.generation_growth(
        fitness, habitat, strategy, method="simulation", generations=generations, seed=11
    )
    logs = np.log(fitness @ strategy)
    sd = math.sqrt(float(habitat @ (logs - exact) ** 2))
    assert abs(estimate.rate - exact) <= 4 * estimate.standard_error
    # 20 batch means: the estimated standard error is itself uncertain by ~1/sqrt(38) ≈ 16 %.
    assert estimate.standard_error == pytest.approx(sd / math.sqrt(generations), rel=0.5)
    assert gr.generation_growth(fitness, habitat, strategy).method == "closed form"


def test_lyapunov_estimate_without_switching_is_best_geometric_mean_fitness():
    # Without switching each phenotype's lineage grows at its own geometric mean fitness and
    # the population at the best of them (Lewontin & Cohen 1969), here under a Markov chain
    # whose stationary distribution is (b, a) / (a + b).
    a, b = 0.05, 0.15
    chain = gr.MarkovHabitat([[1 - a, a], [b, 1 - b]])
    fitness = np.array([[2.0, 0.6], [0.4, 1.5]])
    stationary = np.array([b, a]) / (a + b)
    expected = float((stationary @ np.log(fitness)).max())
    estimate = gr.generation_growth(fitness, chain, np.eye(2), generations=40_000, seed=3)
    assert estimate.method == "simulation"
    assert abs(estimate.rate - expected) <= 4 * estimate.standard_error
    assert estimate.standard_error < 0.02


def test_periodic_generations_spectral_radius_against_quadratic_formula():
    # One generation per period: Lambda = log of the Perron root of the 2x2 matrix
    # M = diag(f) S^T, i.e. tr/2 + sqrt(tr^2/4 - det) (quadratic formula).
    fitness = np.array([[1.8, 0.7]])
    switching = np.array([[0.9, 0.1], [0.2, 0.8]])
    m = np.diag(fitness[0]) @ switching.T
    tr, det = np.trace(m), np.linalg.det(m)
    expected = math.log(tr / 2 + math.sqrt(tr**2 / 4 - det))
    estimate = gr.generation_growth(fitness, gr.PeriodicHabitat([0], [1]), switching)
    assert estimate.method == "spectral radius"
    assert estimate.rate == pytest.approx(expected, abs=1e-13)


def test_periodic_generations_without_switching_is_best_time_average():
    # Lewontin & Cohen 1969 applied to a deterministic sequence: the best phenotype's
    # time-averaged log fitness.
    fitness = np.array([[2.0, 0.5], [0.25, 3.0]])
    habitat = gr.PeriodicHabitat([0, 1, 0], [3, 2, 1])
    expected = float((np.array([4, 2]) @ np.log(fitness)).max() / 6)
    assert gr.generation_growth(fitness, habitat, np.eye(2)).rate == pytest.approx(expected, abs=1e-13)


def test_cue_with_inheritance_reduces_to_formula_when_rows_agree():
    # A per-cue switching matrix whose rows are equal is memoryless, so the exact formula
    # applies; the simulated Lyapunov exponent must agree within 4 standard errors.
    fitness, habitat, cue = random_problem(np.random.default_rng(21), m=3, n=2, k=2)
    policy = np.array([[0.8, 0.2], [0.3, 0.7]])
    stacked = np.repeat(policy[:, None, :], 2, axis=1)
    exact = gr.growth_rate(fitness, habitat, policy, cue=cue)
    estimate = gr.generation_growth(
        fitness, habitat, stacked, cue=cue, method="simulation", generations=30_000, seed=5
    )
    assert gr.generation_growth(fitness, habitat, stacked, cue=cue).rate == pytest.approx(exact, abs=1e-14)
    assert abs(estimate.rate - exact) <= 4 * estimate.standard_error


# --------------------------------------------------------------------------- continuous time


def ode_growth_rate(matrices, states, durations, periods=40):
    """Reference: integrate n' = A(t) n with scipy's solve_ivp (DOP853), renormalising the
    population after each segment, and return log growth over the last period / period."""
    n = np.full(matrices.shape[1], 1.0 / matrices.shape[1])
    last = 0.0
    for period in range(periods):
        total = 0.0
        for e, duration in zip(states, durations):
            solution = solve_ivp(
                lambda t, y, a=matrices[e]: a @ y, (0.0, duration), n, method="DOP853",
                rtol=1e-12, atol=1e-14,
            )
            n = solution.y[:, -1]
            total += math.log(n.sum())
            n = n / n.sum()
        last = total
    return last / float(np.sum(durations))


def test_periodic_growth_rate_against_ode_integration():
    # Floquet theory: the exact rate from the spectral radius of the product of matrix
    # exponentials must match direct ODE integration (scipy.integrate.solve_ivp).
    rates = np.array([[0.9, -0.4, 0.1], [-0.6, 0.5, 0.0], [0.2, 0.1, 0.3]])
    switching = np.array([[0.0, 0.05, 0.02], [0.1, 0.0, 0.03], [0.01, 0.04, 0.0]])
    habitat = gr.PeriodicHabitat([0, 1, 2, 1], [4.0, 2.5, 1.0, 3.0])
    exact = gr.continuous_growth(rates, switching, habitat)
    k = switching - np.diag(switching.sum(axis=1))
    matrices = np.array([np.diag(g) + k.T for g in rates])
    assert exact.method == "spectral radius"
    assert exact.rate == pytest.approx(ode_growth_rate(matrices, habitat.states, habitat.durations), abs=1e-8)


def test_responsive_law_periodic_growth_against_ode_integration():
    # Switching rates from a law (q(j|e) / tau, one generator per environment), same reference.
    rates = np.array([[1.0, -0.5], [-0.8, 0.4]])
    law = np.array([[0.9, 0.1], [0.2, 0.8]])
    generators = gr.switching_generator(law, tau=2.0)
    habitat = gr.PeriodicHabitat([0, 1], [6.0, 4.0])
    matrices = np.array([np.diag(g) + k.T for g, k in zip(rates, generators)])
    exact = gr.continuous_growth(rates, generators, habitat).rate
    assert exact == pytest.approx(ode_growth_rate(matrices, habitat.states, habitat.durations), abs=1e-8)


def test_switching_generator_relaxes_to_the_law():
    # Domain notes §3: with k_ij = q(j|y) / tau the stationary distribution in each state is
    # q(.|y); scipy.linalg.null_space of K^T is the reference.
    law = np.array([[0.7, 0.2, 0.1], [0.05, 0.05, 0.9]])
    for k, q in zip(gr.switching_generator(law, tau=3.0), law):
        stationary = null_space(k.T)[:, 0]
        np.testing.assert_allclose(stationary / stationary.sum(), q, atol=1e-12)
        np.testing.assert_allclose(k.sum(axis=1), 0.0, atol=1e-15)


def test_periodic_growth_with_environment_independent_switching_shift():
    # If A(e) = A + c_e I, all A(e) commute and Lambda = lambda_max(A) + time average of c_e;
    # lambda_max of a 2x2 matrix by the quadratic formula (closed form).
    base_rates = np.array([0.3, -0.2])
    shifts = np.array([1.0, -2.0, 0.5])
    rates = base_rates[None, :] + shifts[:, None]
    switching = np.array([[0.0, 0.4], [0.7, 0.0]])
    a = np.diag(base_rates) + (switching - np.diag(switching.sum(axis=1))).T
    lam = np.trace(a) / 2 + math.sqrt(np.trace(a) ** 2 / 4 - np.linalg.det(a))
    habitat = gr.PeriodicHabitat([0, 1, 2], [2.0, 1.0, 3.0])
    expected = lam + (shifts @ [2.0, 1.0, 3.0]) / 6.0
    assert gr.continuous_growth(rates, switching, habitat).rate == pytest.approx(expected, abs=1e-12)
    # Same closed form in a switching environment, with its stationary time fractions.
    markov = gr.SwitchingHabitat([[0.0, 0.3, 0.2], [0.5, 0.0, 0.5], [0.1, 0.4, 0.0]])
    estimate = gr.continuous_growth(rates, switching, markov, epochs=4000, seed=8)
    expected = lam + float(markov.probs @ shifts)
    assert abs(estimate.rate - expected) <= 4 * estimate.standard_error


def test_defective_growth_matrix_in_a_switching_environment():
    # Equal growth rates and one-way switching make A = [[r, 0], [k, r]] a Jordan block (no
    # eigenvector basis: the exponentials come from scipy.linalg.expm). With A(e) = A + c_e I,
    # Lambda = r + sum_e s(e) c_e exactly (commuting matrices; closed form).
    r, k = 0.2, 0.5
    shifts = np.array([0.4, -1.0])
    rates = np.full((2, 2), r) + shifts[:, None]
    habitat = gr.SwitchingHabitat([[0.0, 0.3], [0.6, 0.0]])
    estimate = gr.continuous_growth(rates, [[0.0, k], [0.0, 0.0]], habitat, epochs=3000, seed=6)
    expected = r + float(habitat.probs @ shifts)
    assert abs(estimate.rate - expected) <= 4 * estimate.standard_error


def test_constant_environment_is_principal_eigenvalue():
    # One environment state: Lambda = largest eigenvalue of A (quadratic formula for 2x2).
    rates, switching = [[0.5, 0.1]], [[0.0, 0.2], [0.3, 0.0]]
    a = np.array([[0.5 - 0.2, 0.3], [0.2, 0.1 - 0.3]])
    lam = np.trace(a) / 2 + math.sqrt(np.trace(a) ** 2 / 4 - np.linalg.det(a))
    single = gr.SwitchingHabitat([[0.0]])
    assert gr.continuous_growth(rates, switching, single).rate == pytest.approx(lam, abs=1e-13)
    periodic = gr.PeriodicHabitat([0], [7.0])
    assert gr.continuous_growth(rates, switching, periodic).rate == pytest.approx(lam, abs=1e-12)


def telegraph_growth_rate(g, k01, k10, a, b):
    """Reference growth rate for two phenotypes in a two-state Markov environment.

    The fraction f of phenotype 0 follows f' = v_e(f) = (g_e0 - g_e1) f (1 - f) - k01 f
    + k10 (1 - f), the log population grows at h_e(f) = g_e0 f + g_e1 (1 - f), and the
    environment jumps 0 -> 1 at rate a, 1 -> 0 at rate b. The stationary densities p_e(f) of
    this piecewise-deterministic process satisfy (v_0 p_0)' = -a p_0 + b p_1 and
    (v_1 p_1)' = a p_0 - b p_1 with zero total flux, so v_0 p_0 = -v_1 p_1 = w with
    w = exp(-int (a / v_0 + b / v_1) df) between the two stable fixed points (dichotomous
    noise; cf. Horsthemke & Lefever 1984, Noise-Induced Transitions, cited from memory).
    Lambda = sum_e int h_e p_e df, by scipy quadrature.
    """
    g = np.asarray(g, dtype=float)

    def v(e, f):
        return (g[e, 0] - g[e, 1]) * f * (1 - f) - k01 * f + k10 * (1 - f)

    def fixed_point(e):
        roots = np.roots([-(g[e, 0] - g[e, 1]), g[e, 0] - g[e, 1] - k01 - k10, k10]).real
        return float(roots[(roots >= 0) & (roots <= 1)][0])

    lo, hi = sorted((fixed_point(0), fixed_point(1)))
    mid = 0.5 * (lo + hi)

    def w(f):
        return math.exp(-quad(lambda s: a / v(0, s) + b / v(1, s), mid, f, limit=200)[0])

    def density(f):
        return w(f) / v(0, f), -w(f) / v(1, f)

    def integrand(f, weighted):
        p0, p1 = density(f)
        return (g[0, 0] * f + g[0, 1] * (1 - f)) * p0 + (g[1, 0] * f + g[1, 1] * (1 - f)) * p1 \
            if weighted else p0 + p1

    total = quad(integrand, lo, hi, args=(False,), limit=200)[0]
    return quad(integrand, lo, hi, args=(True,), limit=200)[0] / total


def test_markov_environment_simulation_against_telegraph_density():
    # Reference: the stationary density of the two-state piecewise-deterministic process
    # (see telegraph_growth_rate); the simulation must agree within 4 standard errors.
    g, k01, k10, a, b = [[1.0, -0.5], [-0.2, 0.6]], 0.2, 0.05, 0.5, 0.8
    expected = telegraph_growth_rate(g, k01, k10, a, b)
    habitat = gr.SwitchingHabitat([[0.0, a], [b, 0.0]])
    estimate = gr.continuous_growth(g, [[0.0, k01], [k10, 0.0]], habitat, epochs=20_000, seed=2)
    assert estimate.method == "simulation"
    assert abs(estimate.rate - expected) <= 4 * estimate.standard_error
    assert estimate.standard_error < 0.005


# --------------------------------------------------------------------------- Kussell & Leibler


def kl_relative_errors(growth_difference, durations):
    rates = [[growth_difference / 2, -growth_difference / 2],
             [-growth_difference / 2, growth_difference / 2]]
    best = gr.optimal_switching(rates, gr.PeriodicHabitat([0, 1], durations))
    assert best.converged
    return np.array([best.rates[0, 1] * durations[0] - 1, best.rates[1, 0] * durations[1] - 1])


@pytest.mark.parametrize("durations", [(20.0, 50.0), (10.0, 10.0)])
def test_optimal_switching_rate_tracks_environment_duration(durations):
    # Kussell & Leibler 2005: with large growth-rate differences, the optimal rate of
    # switching out of a phenotype is about 1 / (duration of the environment it is fit in).
    # That law is the leading term of an expansion in 1 / (Δg T): the population lags by
    # ~log(Δg / k) / Δg after each change, a fraction of order 1 / (Δg T) of the epoch. We
    # therefore allow a relative error of 3 / (Δg min T) (measured: 1.5–2.2 / (Δg min T)) and
    # require the error to fall roughly in proportion to 1 / Δg.
    errors = {dg: kl_relative_errors(dg, durations) for dg in (2.0, 4.0, 8.0)}
    for dg, error in errors.items():
        assert np.abs(error).max() <= 3.0 / (dg * min(durations))
    assert np.abs(errors[8.0]).max() < np.abs(errors[2.0]).max() / 3


def test_optimal_switching_rate_doubles_when_environment_changes_twice_as_often():
    # Kussell & Leibler 2005, "tracking": halving how long environment 0 lasts doubles the
    # optimal rate out of phenotype 0 (within the 3 / (Δg min T) tolerance above).
    dg = 8.0
    rates = [[dg / 2, -dg / 2], [-dg / 2, dg / 2]]
    slow = gr.optimal_switching(rates, gr.PeriodicHabitat([0, 1], [40.0, 30.0]))
    fast = gr.optimal_switching(rates, gr.PeriodicHabitat([0, 1], [20.0, 30.0]))
    assert fast.rates[0, 1] / slow.rates[0, 1] == pytest.approx(2.0, rel=3.0 / (dg * 20.0))


def test_optimal_switching_in_a_markov_environment():
    # Kussell & Leibler 2005 state the same law for Markov environments (mean durations
    # 1/a and 1/b). Tolerance 15 %: the objective is simulated (4000 epochs, common random
    # numbers), so the optimum moves with the history (measured over seeds 0-7: 0.92 to 1.00
    # times the law), and with Δg = 16 the finite-Δg correction is a few per cent.
    dg, a, b = 16.0, 1 / 20, 1 / 50
    habitat = gr.SwitchingHabitat([[0.0, a], [b, 0.0]])
    best = gr.optimal_switching([[dg / 2, -dg / 2], [-dg / 2, dg / 2]], habitat, epochs=4000, seed=4)
    assert best.rates[0, 1] == pytest.approx(a, rel=0.15)
    assert best.rates[1, 0] == pytest.approx(b, rel=0.15)
    assert best.growth_rate.standard_error > 0


def test_break_even_sensing_cost():
    # A perfectly sensing population takes the best phenotype at once: its growth is the
    # time average of max_x g(e, x) (Kussell & Leibler 2005); the break-even cost is that minus
    # the optimal switching growth, which must itself lie below it.
    rates = np.array([[1.0, -1.0], [-0.5, 0.5]])
    habitat = gr.PeriodicHabitat([0, 1], [10.0, 30.0])
    best = gr.optimal_switching(rates, habitat)
    sensing = (10.0 * 1.0 + 30.0 * 0.5) / 40.0
    assert best.sensing_growth_rate == pytest.approx(sensing, abs=1e-14)
    assert best.break_even_cost == pytest.approx(sensing - best.growth_rate.rate, abs=1e-14)
    assert 0 < best.break_even_cost < sensing


# --------------------------------------------------------------------------- sensing cost


def test_sensing_tradeoff_endpoints_by_hand():
    # At beta = 0 the law ignores the cue and takes the phenotype of best mean payoff
    # (domain notes §2): growth = sum_e p(e) log f(e, x*). At large beta it takes
    # argmax_x E[f(E, x) | c] in each cue state. Both by hand; common practice, no source.
    fitness = np.array([[3.0, 0.5], [0.4, 2.0]])
    habitat = np.array([0.6, 0.4])
    cue = gr.symmetric_cue(2, 0.2)
    scan = gr.sensing_tradeoff(fitness, habitat, cue, [0.0, 200.0])
    mean = habitat @ fitness
    assert scan.growth_rate[0] == pytest.approx(float(habitat @ np.log(fitness[:, np.argmax(mean)])), abs=1e-12)
    assert scan.information_bits[0] == pytest.approx(0.0, abs=1e-12)
    joint = habitat[:, None] * cue
    choice = np.argmax(joint.T @ fitness, axis=1)  # best phenotype per cue state
    by_hand = float(np.sum(joint * np.log(fitness[:, choice])))
    assert scan.growth_rate[1] == pytest.approx(by_hand, abs=1e-9)


def test_sensing_tradeoff_optimum_is_consistent_and_bounded():
    # The best law never beats the optimal bet-hedging policy with the same cue (definition
    # of the optimum), and its reported figures match switchlaw's own public measures.
    fitness = np.array([[3.0, 0.6, 0.1], [0.4, 2.5, 0.5], [0.2, 0.8, 2.0]])
    habitat = np.array([0.5, 0.3, 0.2])
    cue = gr.symmetric_cue(3, 0.2)
    scan = gr.sensing_tradeoff(fitness, habitat, cue, np.geomspace(0.01, 100, 60), cost_per_bit=0.05)
    assert scan.best_net_growth >= scan.net_growth.max() - 1e-15
    assert scan.best_growth_rate <= gr.bet_hedging(fitness, habitat, cue=cue).growth_rate + 1e-12
    cue_probs = habitat @ cue
    assert scan.best_information_bits == pytest.approx(
        mutual_information(cue_probs, scan.best_policy, unit="bits"), abs=1e-12)
    assert scan.best_growth_rate == pytest.approx(
        gr.growth_rate(fitness, habitat, scan.best_policy, cue=cue), abs=1e-14)
    assert scan.best_net_growth == pytest.approx(
        scan.best_growth_rate - 0.05 * scan.best_information_bits, abs=1e-14)


def test_expensive_sensing_makes_the_cue_worthless():
    # When a bit costs more than any growth it could buy (I(E;C) nats is the most a cue can
    # add: Barron & Cover 1988), the best law uses no information.
    fitness = np.array([[3.0, 0.5], [0.4, 2.0]])
    scan = gr.sensing_tradeoff(fitness, [0.6, 0.4], gr.symmetric_cue(2, 0.2),
                               np.geomspace(0.01, 100, 40), cost_per_bit=5.0)
    assert scan.best_information_bits < 1e-6


# --------------------------------------------------------------------------- environments


def test_environment_objects():
    # Two-state chains: stationary (b, a) / (a + b); mean holding time 1 / rate
    # (textbook facts about Markov chains; common practice, no source).
    chain = gr.MarkovHabitat([[0.8, 0.2], [0.6, 0.4]])
    np.testing.assert_allclose(chain.probs, [0.75, 0.25], atol=1e-14)
    path = chain.sample(20_000, seed=1)
    assert np.mean(path == 0) == pytest.approx(0.75, abs=0.02)
    switching = gr.SwitchingHabitat([[0.0, 0.5], [2.0, 0.0]])
    np.testing.assert_allclose(switching.probs, [0.8, 0.2], atol=1e-14)
    states, durations = switching.sample(20_000, seed=2)
    assert durations[states == 0].mean() == pytest.approx(2.0, rel=0.05)
    assert np.all(states[1:] != states[:-1])
    assert "stationary" in repr(chain) and "durations" in repr(switching)


def test_results_print_a_short_summary():
    result = gr.bet_hedging(np.diag([2.0, 2.0]), [0.5, 0.5])
    strategy, rate = result  # unpacks as (strategy, growth rate)
    # Kelly 1956: even odds 2 on a fair coin, proportional betting: log 2 - log 2 = 0.
    np.testing.assert_allclose(strategy, [0.5, 0.5], atol=1e-12)
    assert rate == pytest.approx(0.0, abs=1e-14)
    text = repr(result)
    assert "nats/generation" in text and "\n" not in text
    assert "±" in repr(gr.continuous_growth(
        [[1.0], [-1.0]], [[0.0]], gr.SwitchingHabitat([[0, 1.0], [1.0, 0]]), epochs=200, seed=0))


def test_same_seed_same_numbers():
    fitness, habitat = np.array([[2.0, 0.5], [0.5, 2.0]]), [0.5, 0.5]
    s = [[0.9, 0.1], [0.1, 0.9]]
    first = gr.generation_growth(fitness, habitat, s, generations=2000, seed=9)
    second = gr.generation_growth(fitness, habitat, s, generations=2000, seed=np.random.default_rng(9))
    assert first.rate == second.rate and first.standard_error == second.standard_error


# --------------------------------------------------------------------------- bad input

DIAG = np.diag([2.0, 2.0])


@pytest.mark.parametrize(
    "call, pattern",
    [
        (lambda: gr.growth_rate([[2.0, 1.0], [0.0, 0.0]], [0.5, 0.5], [0.5, 0.5]),
         r"`fitness` must be positive for some phenotype in every environment that occurs; "
         r"row 1 is \[0\., 0\.\], so long-run growth is minus infinity"),
        (lambda: gr.bet_hedging([[2.0, 1.0], [0.0, 0.0]], [0.5, 0.5]), r"minus infinity"),
        (lambda: gr.growth_rate([[2.0, -1.0], [1.0, 1.0]], [0.5, 0.5], [0.5, 0.5]),
         r"`fitness` must be non-negative; entry \(0, 1\) is -1\.0"),
        (lambda: gr.growth_rate(DIAG, [0.5, 0.5], [0.5, 0.6]), r"`strategy` must sum to 1"),
        (lambda: gr.growth_rate(DIAG, [0.5, 0.5], [1.0]), r"`strategy` must have one entry per phenotype \(2\)"),
        (lambda: gr.growth_rate(DIAG, [0.5, 0.5], [[1.0, 0.0]], cue=np.eye(2)),
         r"`strategy` must have one row per cue state \(2\)"),
        (lambda: gr.growth_rate(DIAG, [0.5, 0.5], [0.5, 0.5], cue=[[0.5, 0.6], [0.5, 0.5]]),
         r"`cue` rows must sum to 1 within 1e-09; row 0 sums to 1\.1"),
        (lambda: gr.growth_rate(np.eye(3), [0.5, 0.5], [0.5, 0.5]),
         r"`fitness` must have one row per environment state \(2\) \(got shape \(3, 3\)\)"),
        (lambda: gr.MarkovHabitat([[0.9, 0.2], [0.5, 0.5]]),
         r"`transition` rows must sum to 1 within 1e-09; row 0 sums to 1\.1"),
        (lambda: gr.MarkovHabitat([[1.0, 0.0], [0.5, 0.5]]),
         r"`transition` must describe an irreducible chain .* \(got 2 communicating classes\)"),
        (lambda: gr.SwitchingHabitat([[0.0, -1.0], [1.0, 0.0]]),
         r"`rates` off-diagonal rates must be >= 0; entry \(0, 1\) is -1\.0"),
        (lambda: gr.PeriodicHabitat([0, 1], [5.0, 0.0]),
         r"`durations` must be > 0; entry 1 is 0\.0"),
        (lambda: gr.PeriodicHabitat([0, 1], [-2.0, 1.0]),
         r"`durations` must be > 0; entry 0 is -2\.0"),
        (lambda: gr.PeriodicHabitat([0, 1], [1.0]),
         r"`states` and `durations` must have the same length \(got 2 and 1\)"),
        (lambda: gr.generation_growth(DIAG, gr.PeriodicHabitat([0, 1], [1.5, 1.0]), np.eye(2)),
         r"`habitat.durations` must be whole numbers of generations; entry 0 is 1\.5"),
        (lambda: gr.generation_growth(DIAG, [0.5, 0.5], [[0.9, 0.1], [0.1, 0.9]]),
         r"`seed` must be given \(an int or numpy Generator\) when the growth rate is "
         r"estimated by simulation \(got None\)"),
        (lambda: gr.generation_growth(DIAG, [0.5, 0.5], [0.5, 0.5], method="exact"),
         r"`method` must be one of 'auto', 'simulation' \(got 'exact'\)"),
        (lambda: gr.generation_growth(DIAG, [0.5, 0.5], np.ones((2, 2, 2))),
         r"`strategy` must have shape \(phenotypes,\) or \(phenotypes, phenotypes\), here "
         r"\(2,\) or \(2, 2\) \(got shape \(2, 2, 2\)\)"),
        (lambda: gr.generation_growth(DIAG, [0.5, 0.5], [[0.9, 0.1], [0.1, 0.9]], seed=1, batches=1),
         r"`batches` must be an integer >= 2 \(got 1\)"),
        (lambda: gr.continuous_growth([[1.0]], [[0.0]], [0.5, 0.5]),
         r"`habitat` must be a PeriodicHabitat or a SwitchingHabitat"),
        (lambda: gr.continuous_growth([[1.0, 0.0]], [[0.0, 0.1], [-0.1, 0.0]], gr.PeriodicHabitat([0], [1.0])),
         r"`switching` off-diagonal rates must be >= 0; entry \(1, 0\) is -0\.1"),
        (lambda: gr.continuous_growth([[1.0, 0.0]], [[0.5, 0.1], [0.1, 0.0]], gr.PeriodicHabitat([0], [1.0])),
         r"`switching` diagonal must be 0 or minus the row's total switching rate; entry \(0, 0\) is 0\.5"),
        (lambda: gr.continuous_growth([[1.0, 0.0]], np.zeros((2, 2)), gr.PeriodicHabitat([1], [1.0])),
         r"`habitat.states` must index the rows of `rates` \(0 to 0\) \(got state 1\)"),
        (lambda: gr.switching_generator([[0.5, 0.5]], tau=0.0), r"`tau` must be > 0 \(got 0\.0\)"),
        (lambda: gr.symmetric_cue(3, 1.5), r"`error` must be a probability in \[0, 1\] \(got 1\.5\)"),
        (lambda: gr.sensing_tradeoff(DIAG, [0.5, 0.5], np.eye(2), [1.0], cost_per_bit=-1.0),
         r"`cost_per_bit` must be finite and >= 0 \(got -1\.0\)"),
        (lambda: gr.optimal_switching([[1.0, 0.0]], gr.PeriodicHabitat([0], [1.0]), bounds=(2.0, 1.0)),
         r"`bounds` must be \(low, high\) with 0 < low < high"),
    ],
)
def test_bad_input_messages(call, pattern):
    with pytest.raises(InputError, match=pattern) as info:
        call()
    assert "\n" not in str(info.value)
    assert isinstance(info.value, ValueError)
