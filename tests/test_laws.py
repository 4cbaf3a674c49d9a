"""Switching laws: environments against scipy.stats, and the law's mean-field quantities."""

import math

import numpy as np
import pytest
from scipy import linalg, stats
from scipy.special import expit

import switchlaw as sl

DIVIDE_OR_MOVE = {"divide": sl.Linear(-1 / 6, 1.0), "move": sl.Linear(0.1, 0.15)}


def hexagonal(rho):
    return sl.occupancy(6, rho)


# --------------------------------------------------------------------------- environments
@pytest.mark.parametrize("neighbours", [4, 6, 8, 3])
@pytest.mark.parametrize("density", [0.0, 0.13, 0.5, 0.97, 1.0])
def test_mean_field_occupancy_is_binomial(neighbours, density):
    # Domain notes §3: in mean field the occupied-neighbour count is Binomial(N, rho).
    env = sl.occupancy(neighbours, density)
    np.testing.assert_allclose(
        env.probs, stats.binom.pmf(np.arange(neighbours + 1), neighbours, density), atol=1e-15
    )


def test_finite_lattice_occupancy_is_hypergeometric():
    # A focal cell's N neighbours drawn without replacement from the other M - 1 sites, K - 1
    # of them occupied (domain notes §3; scipy.stats.hypergeom as the reference).
    env = sl.occupancy(8, 0.3, lattice_sites=100)
    np.testing.assert_allclose(env.probs, stats.hypergeom.pmf(np.arange(9), 99, 29, 8), atol=1e-15)
    # A large lattice approaches the Binomial.
    big = sl.occupancy(8, 0.3, lattice_sites=10**6)
    np.testing.assert_allclose(big.probs, stats.binom.pmf(np.arange(9), 8, 0.3), atol=1e-5)


def test_signal_bins_are_exact_cdf_differences():
    dist = stats.gamma(a=2.0, scale=1.5)
    edges = np.array([0.0, 1.0, 2.5, 4.0, np.inf])
    env = sl.continuous_signal(dist, edges)
    np.testing.assert_allclose(env.probs, np.diff(dist.cdf(edges)), atol=1e-15)
    np.testing.assert_allclose(env.values, [0.5, 1.75, 3.25, 4.0])


def test_gaussian_receptor_channel_rows_are_normal_cdf_differences():
    dist = stats.norm(0.0, 1.0)
    edges = np.array([-np.inf, -1.0, 0.0, 1.0, np.inf])
    env = sl.continuous_signal(dist, edges, receptor=sl.GaussianReceptor(0.5))
    centre = env.values[1]  # -0.5
    expected = np.diff(np.r_[0.0, stats.norm.cdf([-1.0, 0.0, 1.0], loc=centre, scale=0.5), 1.0])
    np.testing.assert_allclose(env.channel[1], expected, atol=1e-15)
    np.testing.assert_allclose(env.probs, env.true_probs @ env.channel, atol=1e-15)


def test_poisson_receptor_counts():
    dist = stats.uniform(0.0, 4.0)
    env = sl.continuous_signal(dist, np.linspace(0, 4, 5), receptor=sl.PoissonReceptor(2.0, max_count=30))
    np.testing.assert_allclose(env.channel[2, :5], stats.poisson.pmf(np.arange(5), 2.0 * 2.5), atol=1e-15)
    np.testing.assert_allclose(env.channel.sum(axis=1), 1.0, atol=1e-14)


def test_empirical_histogram_uses_the_stated_rule(rng):
    samples = rng.beta(2.0, 5.0, size=2000)
    env = sl.empirical(samples, bins="sturges")
    counts, edges = np.histogram(samples, bins="sturges")
    np.testing.assert_allclose(env.probs, counts / counts.sum())
    np.testing.assert_allclose(env.edges, edges)
    assert "sturges" in env.description


def test_product_environment_multiplies_independent_signals():
    a, b = sl.occupancy(2, 0.3), sl.occupancy(1, 0.6)
    both = sl.product_environment(a, b)
    np.testing.assert_allclose(both.probs, np.outer(a.probs, b.probs).ravel())
    assert both.values.shape == (6, 2)
    np.testing.assert_array_equal(both.values[3], [1.0, 1.0])


# ------------------------------------------------------------------------------- the law
def test_law_is_exact_at_grid_points_and_interpolates_between():
    law = sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=np.linspace(0.1, 0.9, 9), beta=8.0)
    for rho in (0.1, 0.4, 0.9):
        env = sl.occupancy(6, rho)
        table = np.column_stack([1 - env.values / 6, 0.15 + 0.1 * env.values])
        direct = sl.solve(table, env, 8.0)
        np.testing.assert_allclose(law.probs(rho), direct.probs, atol=1e-10)
    mid = law.probs(0.45)
    np.testing.assert_allclose(mid, 0.5 * (law.probs(0.4) + law.probs(0.5)), atol=1e-14)


def test_fractions_average_over_states_not_the_law_at_the_mean_state():
    # f_x(rho) = sum_y p(y|rho) q(x|y,rho) (domain notes §3); by Jensen's inequality the law
    # evaluated at the mean neighbour count differs.
    law = sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=np.linspace(0.0, 1.0, 21), beta=10.0)
    rho = 0.45
    env = sl.occupancy(6, rho)
    expected = env.probs @ law.probs(rho)
    np.testing.assert_allclose(law.fractions(rho), expected, atol=1e-14)
    at_mean = np.interp(6 * rho, law.state_values, law.probs(rho)[:, 1])
    assert abs(at_mean - law.fractions(rho)[1]) > 0.1
    np.testing.assert_allclose(law.fractions([0.2, rho])[1], expected, atol=1e-14)


def test_rates_have_the_law_as_stationary_distribution():
    # A continuous-time chain with rates q(j|y)/tau has stationary distribution q(.|y)
    # (domain notes §3): pi Q = 0 for the generator Q, checked with scipy.linalg.null_space.
    law = sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=np.linspace(0.0, 1.0, 11), beta=6.0)
    rates = law.rates(2.5, 0.6)
    q = law.probs(0.6)
    for y in range(rates.shape[0]):
        generator = rates[y] - np.diag(rates[y].sum(axis=1))
        stationary = linalg.null_space(generator.T)[:, 0]
        np.testing.assert_allclose(stationary / stationary.sum(), q[y], atol=1e-12)
    assert np.all(np.diagonal(rates, axis1=1, axis2=2) == 0)


def test_step_probabilities_match_the_matrix_exponential():
    # With re-decision at rate 1/tau, the transition matrix over dt is expm(Q dt), which for
    # this rank-one generator is (1 - e^{-dt/tau}) q + e^{-dt/tau} I (common practice, no
    # source; checked against scipy.linalg.expm).
    law = sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=np.linspace(0.0, 1.0, 11), beta=6.0)
    dt, tau = 0.3, 1.7
    steps = law.step_probabilities(dt, tau, 0.4)
    rates = law.rates(tau, 0.4)
    for y in range(steps.shape[0]):
        generator = rates[y] - np.diag(rates[y].sum(axis=1))
        np.testing.assert_allclose(steps[y], linalg.expm(generator * dt), atol=1e-12)


def test_two_phenotype_max_entropy_law_is_logistic():
    # Jaynes 1957; domain notes §2: q = 1 / (1 + exp(-beta * Δu(y))).
    law = sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=[0.3, 0.7], beta=4.0,
                        objective="max-entropy")
    delta = (0.15 + 0.1 * np.arange(7)) - (1 - np.arange(7) / 6)
    np.testing.assert_allclose(law.probs(0.3)[:, 1], expit(4.0 * delta), rtol=1e-13)


def test_cost_budget_and_beta_routes_give_the_same_law():
    # beta = ln 2 / cost (domain notes §2.4); a budget met exactly at each density has the
    # multiplier of the law at that information level (domain notes §2.3).
    grid = np.linspace(0.3, 0.8, 6)
    by_beta = sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=grid, beta=12.0)
    by_cost = sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=grid, cost_per_bit=math.log(2) / 12.0)
    np.testing.assert_allclose(by_cost.table, by_beta.table, atol=1e-12)
    budget = 0.25
    by_bits = sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=grid, bits=budget)
    np.testing.assert_allclose(by_bits.information_bits, budget, atol=1e-9)
    for i, rho in enumerate(grid):
        again = sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=[rho], beta=by_bits.betas[i])
        np.testing.assert_allclose(again.table[0], by_bits.table[i], atol=1e-8)
        conic = sl.solve_budget(
            np.column_stack([1 - np.arange(7) / 6, 0.15 + 0.1 * np.arange(7)]),
            sl.occupancy(6, rho), bits=budget,
        )
        assert conic.beta == pytest.approx(by_bits.betas[i], rel=1e-4)


def test_noisy_sensing_never_raises_information_and_capacity_caps_it():
    # Data-processing inequality (Cover & Thomas Thm 2.8.1): for Y -> S -> X,
    # I(X;Y) <= I(X;S) and I(X;Y) <= I(S;Y) <= C(W) (Cover & Thomas ch. 7).
    dist = stats.norm(0.0, 1.0)
    edges = np.r_[-np.inf, np.linspace(-2, 2, 9), np.inf]
    receptor = sl.GaussianReceptor(0.7)
    noisy_env = sl.continuous_signal(dist, edges, receptor=receptor)
    clean_env = sl.continuous_signal(dist, edges)
    payoff = {"rest": sl.Linear(0.0, 0.0), "grow": sl.Linear(1.0, 0.0)}
    for beta in (1.0, 5.0, 50.0):
        noisy = sl.derive_law(payoff, noisy_env, densities=[0.5], beta=beta)
        clean = sl.derive_law(payoff, clean_env, densities=[0.5], beta=beta)
        policy = noisy.table[0]
        composed = noisy_env.channel @ policy  # q(x | true y)
        i_xy = sl.mutual_information(noisy_env.true_probs, composed, unit="bits")
        i_xs = noisy.information_bits[0]
        i_sy = sl.mutual_information(noisy_env.true_probs, noisy_env.channel, unit="bits")
        capacity = sl.capacity(noisy_env.channel).bits
        assert i_xy <= i_xs + 1e-12
        assert i_xy <= i_sy + 1e-12 <= capacity + 1e-9
        # Sensing through noise cannot earn more than sensing the true state.
        assert noisy.expected_payoff[0] <= clean.expected_payoff[0] + 1e-12


def test_logistic_formula_is_exact_for_a_linear_payoff_difference():
    # Two phenotypes, min-information: q(move|y) = 1/(1 + (r_d/r_m) exp(-beta Δu(y))), a
    # logistic in y with slope beta * Δslope when Δu is linear (domain notes §2).
    beta = 9.0
    law = sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=np.linspace(0.35, 0.75, 5), beta=beta)
    fit = sl.fit_formula(law, "move", per_density=True)
    assert fit.max_abs_error < 1e-8
    np.testing.assert_allclose(fit.parameters["b"], beta * (0.1 + 1 / 6), rtol=1e-6)
    single = sl.fit_formula(law, "move")
    assert single.max_abs_error > fit.max_abs_error
    code = single.expression()
    assert "np." not in code and "exp(" in code
    value = eval(code, {"exp": math.exp, "v": 3.0})  # the pasted formula runs as Python
    assert value == pytest.approx(float(single.evaluate(3.0)))


def test_labelled_output_and_summary():
    law = sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=np.linspace(0, 1, 5), beta=5.0)
    data = law.to_xarray()
    assert data["probability"].dims == ("density", "state", "phenotype")
    assert list(data["phenotype"].values) == ["divide", "move"]
    assert data["information"].attrs["units"] == "bit"
    np.testing.assert_allclose(data["fraction"].sel(density=0.5).values, law.fractions(0.5))
    assert "divide, move" in law.summary()


def test_plot_helper_draws_both_panels():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    law = sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=np.linspace(0, 1, 11), beta=5.0)
    heat, lines = sl.plot_law(law)
    assert len(lines.get_lines()) == 2
    assert heat.get_xlabel() == "density"
    plt.close("all")


# ----------------------------------------------------------------------------- bad input
@pytest.mark.parametrize(
    "call, pattern",
    [
        (lambda: sl.occupancy(6, 1.2), r"`density` must be in \[0, 1\] \(got 1\.2\)"),
        (lambda: sl.occupancy(0, 0.5), r"`neighbours` must be an integer >= 1 \(got 0\)"),
        (lambda: sl.occupancy(6, 0.5, lattice_sites=5), r"`lattice_sites` must exceed"),
        (lambda: sl.continuous_signal(stats.norm(0, 1), [-1.0, 0.0, 1.0]), r"`edges` must cover the distribution's support"),
        (lambda: sl.continuous_signal(stats.norm(0, 1), [-np.inf, 1.0, 0.0, np.inf]), r"`edges` must be strictly increasing"),
        (lambda: sl.empirical([0.1, 0.5], bins=[0.2, 1.0]), r"`bins` edges .* must cover every sample"),
        (lambda: sl.empirical([0.1, 0.5], bins="magic"), r"`bins` must be one of"),
        (lambda: sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=[0.1, 1.5], beta=1.0), r"`densities` must lie in \[0, 1\] \(got 1\.5\)"),
        (lambda: sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=[0.5, 0.1], beta=1.0), r"`densities` must be strictly increasing"),
        (lambda: sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=[0.5], beta=1.0, bits=0.1), r"give exactly one of `beta`, `cost_per_bit`, `bits` \(got beta, bits\)"),
        (lambda: sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=[0.5]), r"\(got none\)"),
        (lambda: sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=[0.5], beta=1.0, phenotypes=["divide", "rest"]), r"`payoff` names unknown phenotypes \['move'\]"),
        (lambda: sl.derive_law(lambda env: np.full((7, 2), np.nan), hexagonal, densities=[0.5], beta=1.0), r"`payoff` must be finite at density 0\.5; state 0, phenotype 0 is nan"),
        (lambda: sl.derive_law(np.ones((3, 2)), hexagonal, densities=[0.5], beta=1.0), r"`payoff` must give a \[state, phenotype\] table with 7 rows at density 0\.5"),
        (lambda: sl.derive_law(DIVIDE_OR_MOVE, lambda r: sl.occupancy(1 + int(4 * r), r), densities=[0.1, 0.6], beta=1.0), r"`environment` must give the same states at every density"),
        (lambda: sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=[0.5], cost_per_bit=-1.0), r"`cost_per_bit` must be finite and >= 0"),
        (lambda: sl.GaussianReceptor(0.0).channel(np.zeros(2), np.array([-1.0, 0.0, 1.0])), r"`receptor.sd` must be > 0"),
    ],
)
def test_bad_input_is_named(call, pattern):
    with pytest.raises(sl.InputError, match=pattern) as info:
        call()
    assert "\n" not in str(info.value)


def test_law_lookup_outside_its_grid_and_bad_channel():
    law = sl.derive_law(DIVIDE_OR_MOVE, hexagonal, densities=[0.2, 0.4], beta=1.0)
    with pytest.raises(sl.InputError, match=r"`density` must lie in the law's grid \[0\.2, 0\.4\] \(got 0\.5\)"):
        law.probs(0.5)
    with pytest.raises(sl.InputError, match="`tau` must be > 0"):
        law.rates(0.0, 0.3)

    class LeakyReceptor:
        def channel(self, values, edges):
            return np.full((values.size, values.size), 0.4)

        def sensed_values(self, values, edges):
            return values

    with pytest.raises(sl.InputError, match="`receptor channel` rows must sum to 1"):
        sl.continuous_signal(stats.uniform(0, 1), [0.0, 0.5, 1.0], receptor=LeakyReceptor())


def test_density_dependent_payoff_against_hand_computed_law():
    # Maximum entropy with two phenotypes is logistic in the payoff difference (Jaynes 1957):
    # q(divide | y, rho) = 1 / (1 + exp(-beta (u_divide - u_move))). With
    # u_divide = (1 - rho) y / 4, u_move = 0, beta = 2, by hand: at rho = 0.5, y = 2 the
    # difference is 0.25 and q = 1 / (1 + e^-0.5) = 0.6224593312018546; at rho = 0.25, y = 4
    # it is 0.75 and q = 1 / (1 + e^-1.5) = 0.8175744761936437.
    payoff = {"divide": sl.DensityDependent(lambda v, rho: (1 - rho) * v / 4), "move": sl.Linear(slope=0.0)}
    law = sl.derive_law(payoff, lambda rho: sl.occupancy(4, rho), densities=[0.0, 0.25, 0.5, 1.0],
                        beta=2.0, objective="max-entropy")
    assert law.probs(0.5)[2, 0] == pytest.approx(0.6224593312018546, rel=1e-12)
    assert law.probs(0.25)[4, 0] == pytest.approx(0.8175744761936437, rel=1e-12)
    # The mean-field fraction averages over Binomial(4, rho) neighbour counts (scipy.stats).
    from scipy import stats

    y = np.arange(5)
    expected = stats.binom.pmf(y, 4, 0.25) @ (1 / (1 + np.exp(-2.0 * 0.75 * y / 4)))
    assert law.fractions(0.25)[0] == pytest.approx(expected, rel=1e-12)
    # A fixed environment (no density of its own) is evaluated at each density of the grid.
    fixed = sl.occupancy(4, 0.5)
    law_fixed = sl.derive_law(payoff, sl.Environment(states=fixed.states, probs=fixed.probs, values=fixed.values),
                              densities=[0.0, 1.0], beta=2.0, objective="max-entropy")
    assert law_fixed.probs(0.0)[4, 0] == pytest.approx(1 / (1 + np.exp(-2.0)), rel=1e-12)
    assert law_fixed.probs(1.0)[4, 0] == pytest.approx(0.5, rel=1e-12)
    with pytest.raises(sl.InputError, match=r"payoff\['divide'\]` depends on density"):
        sl.solve(sl.laws._payoffs.payoff_table(payoff, fixed.__class__(states=fixed.states, probs=fixed.probs,
                                                                       values=fixed.values))[0], fixed, beta=1.0)
    with pytest.raises(sl.InputError, match="`function` must be callable"):
        sl.DensityDependent(3.0)


def test_empirical_with_a_receptor_against_an_independent_computation():
    # Noisy sensing of a measured signal distribution. Independent computation: the histogram
    # from numpy.histogram (edges 0, 1, 2, 3, 4), the Gaussian channel from scipy.stats.norm
    # (the noisy reading of a bin centre falls in sensed bin s; readings beyond the outer edges
    # count as the end bins), the Poisson channel from scipy.stats.poisson (last state collects
    # the upper tail), then p(s) = sum_y p(y) W(s | y) (law of total probability).
    from scipy import stats

    samples = np.array([0.2, 0.7, 1.1, 1.4, 1.9, 2.2, 2.5, 2.6, 3.3, 3.9])
    edges = np.arange(5.0)
    p_true = np.histogram(samples, bins=edges)[0] / samples.size
    centres = np.array([0.5, 1.5, 2.5, 3.5])
    env = sl.empirical(samples, bins=edges, receptor=sl.GaussianReceptor(sd=0.8))
    upper = stats.norm.cdf((edges[1:, None] - centres[None, :]) / 0.8)  # P(reading < edge k+1 | y)
    w = np.empty((4, 4))
    for y in range(4):
        below = np.concatenate([[0.0], upper[:-1, y], [1.0]])
        w[y] = np.diff(below)
    assert np.allclose(env.true_probs, p_true, atol=1e-15)
    assert np.allclose(env.channel, w, atol=1e-14)
    assert np.allclose(env.probs, p_true @ w, atol=1e-14)
    poisson = sl.empirical(samples, bins=edges, receptor=sl.PoissonReceptor(gain=2.0, max_count=6))
    k = np.arange(7)
    wp = stats.poisson.pmf(k[None, :], 2.0 * centres[:, None])
    wp[:, -1] = stats.poisson.sf(5, 2.0 * centres)
    assert np.allclose(poisson.probs, p_true @ wp, atol=1e-14)
    assert np.allclose(poisson.decision_values, k / 2.0)
    # A law derived on it weighs the posterior payoff: with payoff equal to the true bin centre
    # for "high" (0 for "low"), E[u | s] = sum_y p(y) W(s|y) v_y / p(s) (Bayes).
    payoff = {"low": sl.Linear(slope=0.0), "high": sl.Linear(slope=1.0)}
    law = sl.derive_law(payoff, env, densities=[0.5], beta=1.0, objective="max-entropy")
    posterior = (p_true[:, None] * w * centres[:, None]).sum(axis=0) / (p_true @ w)
    assert np.allclose(law.probs(0.5)[:, 1], 1 / (1 + np.exp(-posterior)), atol=1e-10)
    with pytest.raises(sl.InputError, match="`receptor` must be"):
        sl.empirical(samples, bins=edges, receptor="gaussian")
