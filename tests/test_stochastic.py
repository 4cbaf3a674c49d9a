"""Stochastic populations: exact hitting probabilities, SSA and tau-leaping, lattice agents.

Every numeric check names its outside source. Statistical checks are z-tests at 4 standard
errors (false-alarm rate about 6e-5 per check) with fixed seeds, so they are repeatable.
"""

import math

import numpy as np
import pytest
from scipy import stats
from scipy.linalg import solve_banded

import switchlaw as sl
from switchlaw.stochastic import (
    BirthDeathSwitching,
    Lattice,
    LatticeModel,
    hitting_probability,
    simulate_hitting,
    wilson_interval,
)

Z = 4.0  # z-test threshold used throughout


def z_ok(estimate, expected, standard_error):
    return abs(estimate - expected) <= Z * standard_error


def binomial_se(p, n):
    return math.sqrt(max(p * (1 - p), 1e-12) / n)


def pooled(expected, per, least):
    """Merge neighbouring count bins from both tails until each expects >= `least` cells, so that
    the normal approximation behind the z-test holds (pooling sparse categories: common practice,
    as for chi-square tests). Returns pooled expected probabilities and per-replicate shares."""
    groups, current = [], []
    for k in range(expected.size):
        current.append(k)
        if expected[current].sum() >= least:
            groups.append(current)
            current = []
    if current:
        groups[-1] = groups[-1] + current if groups else current
    return (np.array([expected[g].sum() for g in groups]),
            np.stack([per[:, g].sum(axis=1) for g in groups], axis=1))


def first_step_reference(b, d, upper):
    """Solve h_n = p_n h_{n+1} + q_n h_{n-1}, h_0 = 1, h_M = 0 as a banded linear system.

    First-step analysis written out directly (Karlin & Taylor 1975, ch. 4) and solved with
    scipy.linalg.solve_banded: an independent route to the same probabilities.
    """
    n = np.arange(1, upper)
    p = b[n] / (b[n] + d[n])
    q = 1 - p
    size = upper - 1
    bands = np.zeros((3, size))
    bands[0, 1:] = -p[:-1]  # super-diagonal: coefficient of h_{n+1}
    bands[1, :] = 1.0
    bands[2, :-1] = -q[1:]  # sub-diagonal: coefficient of h_{n-1}
    rhs = np.zeros(size)
    rhs[0] = q[0]  # h_0 = 1 moves to the right-hand side
    return np.concatenate([[1.0], solve_banded((1, 1), bands, rhs), [0.0]])


# Invented go-or-grow scenario (demo values): divide when crowded, move when isolated.
GO_OR_GROW = {"divide": sl.Linear(1 / 4, 0.0), "move": sl.Linear(-1 / 4, 1.0)}


@pytest.fixture(scope="module")
def law():
    return sl.derive_law(GO_OR_GROW, lambda rho: sl.occupancy(4, rho),
                         densities=np.linspace(0, 1, 21), beta=3.0, objective="max-entropy")


# --------------------------------------------------------------------------- exact solver
@pytest.mark.parametrize("p, q", [(1.0, 0.5), (0.3, 0.7), (2.0, 2.0)])
def test_exact_solver_equals_gamblers_ruin(p, q):
    # Gambler's ruin with constant rates (Karlin & Taylor 1975, ch. 4):
    # P(hit 0 before M | n) = (r^n - r^M) / (1 - r^M), r = q / p; fair coin: 1 - n / M.
    upper = 25
    n = np.arange(upper + 1)
    r = q / p
    expected = 1 - n / upper if r == 1 else (r**n - r**upper) / (1 - r**upper)
    got = hitting_probability(p, q, n, upper)
    np.testing.assert_allclose(got, expected, rtol=1e-12, atol=1e-15)


def test_linear_birth_death_extinction_is_kendalls_power_law():
    # Linear birth-death, lambda > mu: extinction probability (mu / lambda)^n0 (Kendall 1948,
    # Ann. Math. Stat. 19:1). With a ceiling of 3000 the difference is below 1e-300.
    lam, mu = 1.3, 0.8
    n0 = np.array([1, 2, 5, 20, 60])
    got = hitting_probability(lambda n: lam * n, lambda n: mu * n, n0, 3000)
    np.testing.assert_allclose(got, (mu / lam) ** n0, rtol=1e-11)
    # lambda <= mu: extinction is certain (Kendall 1948).
    certain = hitting_probability(lambda n: 0.5 * n, lambda n: 0.9 * n, [1, 10, 50], 3000)
    np.testing.assert_allclose(certain, 1.0, rtol=0, atol=1e-12)


def test_exact_solver_matches_banded_first_step_system_for_a_nonlinear_chain():
    # Allee-type chain (invented demo rates): birth 1.2 n^2 / (n + 20), death 0.5 n + 0.002 n^2.
    upper = 300
    states = np.arange(upper + 1)
    b = 1.2 * states**2 / (states + 20.0)
    d = 0.5 * states + 0.002 * states**2
    reference = first_step_reference(b, d, upper)
    got = hitting_probability(b, d, states, upper)  # arrays indexed by n
    np.testing.assert_allclose(got, reference, rtol=1e-10, atol=1e-14)
    callables = hitting_probability(lambda n: 1.2 * n**2 / (n + 20.0),
                                    lambda n: 0.5 * n + 0.002 * n**2, states, upper)
    np.testing.assert_allclose(callables, got, rtol=1e-13)


def test_exact_solver_stays_accurate_where_products_underflow():
    # rho_k dips to ~1e-376, below the smallest float64, before climbing again; reference
    # computed in 60-digit decimal arithmetic (Python's decimal module, a general-purpose library).
    from decimal import Context, Decimal, localcontext

    upper = 2000
    b = lambda n: 10.0 * n  # noqa: E731
    d = lambda n: 0.3 * n + 0.01 * n**2  # noqa: E731
    with localcontext(Context(prec=60)):
        rho = [Decimal(1)]
        for i in range(1, upper):
            rho.append(rho[-1] * (Decimal("0.3") + Decimal("0.01") * i) / Decimal(10))  # d(i) / b(i)
        assert min(rho) < Decimal("1e-308")
        total = sum(rho, Decimal(0))
        expected = {n0: float(sum(rho[n0:], Decimal(0)) / total) for n0 in (1, 3, 10, 500, 1500)}
    for n0, value in expected.items():
        assert hitting_probability(b, d, n0, upper) == pytest.approx(value, rel=1e-10)


def test_zero_birth_rate_caps_the_chain():
    # Birth zero from n = 6 up: the chain can never climb past 6, so it hits 0 with
    # probability one from anywhere (first-step analysis, Karlin & Taylor 1975).
    upper = 12
    states = np.arange(upper + 1)
    b = np.where(states < 6, 1.0, 0.0)
    d = np.full(upper + 1, 0.7)
    got = hitting_probability(b, d, np.arange(1, upper), upper)
    np.testing.assert_allclose(got, 1.0, atol=1e-15)
    # Birth zero only at n = 4: from above 4 the chain is a ruin problem on [4, 12] (r = 0.7),
    # and reaching 4 means reaching 0.
    b = np.where(states == 4, 0.0, 1.0)
    got = hitting_probability(b, d, np.array([3, 4, 8]), upper)
    r = 0.7
    ruin = (r ** (8 - 4) - r ** (upper - 4)) / (1 - r ** (upper - 4))
    np.testing.assert_allclose(got, [1.0, 1.0, ruin], rtol=1e-12)


# ------------------------------------------------------------------------ simulated chain
def test_simulated_hitting_matches_exact_nonlinear_chain():
    # Exact SSA jump chain against first-step analysis (Karlin & Taylor 1975), z-test at 4 s.e.
    b = lambda n: 1.2 * n**2 / (n + 20.0)  # noqa: E731
    d = lambda n: 0.5 * n  # noqa: E731
    for n0 in (10, 15, 20):
        exact = hitting_probability(b, d, n0, 60)
        result = simulate_hitting(b, d, n0, 60, replicates=20000, seed=n0)
        assert z_ok(result.estimate, exact, binomial_se(exact, 20000)), (n0, result, exact)
        lo, hi = result.interval
        assert lo < result.estimate < hi
        assert result.converged and result.unfinished == 0 and result.leaps == 0


def test_simulated_hitting_reproduces_kendall_extinction():
    # (mu/lambda)^n0 (Kendall 1948); the ceiling 200 changes it by less than 1e-30.
    lam, mu, n0 = 1.0, 0.6, 3
    result = simulate_hitting(lambda n: lam * n, lambda n: mu * n, n0, 200, replicates=20000, seed=4)
    expected = (mu / lam) ** n0
    assert z_ok(result.estimate, expected, binomial_se(expected, 20000))


def test_starting_on_a_boundary_is_certain():
    # n0 = 0 is already extinct and n0 = upper already safe (definitions).
    for method in ("exact", "tau-leap"):
        assert simulate_hitting(1.0, 1.0, 0, 5, replicates=10, seed=1, method=method).estimate == 1.0
        assert simulate_hitting(1.0, 1.0, 5, 5, replicates=10, seed=1, method=method).estimate == 0.0
    assert hitting_probability(1.0, 1.0, [0, 5], 5).tolist() == [1.0, 0.0]


def test_tau_leaping_hits_the_martingale_value():
    # Critical linear chain (birth = death = n): n is a martingale, so P(hit 0 before M | n0)
    # = 1 - n0 / M (Karlin & Taylor 1975, gambler's ruin with a fair coin). Leaps keep the mean
    # exact here whatever epsilon, and do not jump over the ceiling, so a coarse epsilon makes
    # leaps happen at these small sizes without biasing the answer.
    result = simulate_hitting(lambda n: 1.0 * n, lambda n: 1.0 * n, 30, 60, replicates=4000,
                              seed=3, method="tau-leap", epsilon=0.3)
    assert result.leaps > 0
    assert z_ok(result.estimate, 0.5, binomial_se(0.5, 4000)), result


def test_wilson_interval_matches_scipy_and_newcombe():
    # scipy.stats.binomtest(...).proportion_ci(method="wilson") is the reference; 81/263 gives
    # 0.2553–0.3662 (Newcombe 1998, Stat. Med. 17:857, from memory).
    for hits, trials in [(0, 10), (1, 10), (81, 263), (500, 1000), (999, 1000), (20, 20)]:
        ci = stats.binomtest(hits, trials).proportion_ci(confidence_level=0.95, method="wilson")
        np.testing.assert_allclose(wilson_interval(hits, trials), [ci.low, ci.high], rtol=1e-10, atol=1e-14)
    np.testing.assert_allclose(wilson_interval(81, 263), [0.2553, 0.3662], atol=5e-5)


# ------------------------------------------------------------------- well-mixed process
def kendall_moments(n0, lam, mu, t):
    """Mean, variance and P(extinct by t) of the linear birth-death process (Kendall 1948)."""
    g = math.exp((lam - mu) * t)
    mean = n0 * g
    variance = n0 * (lam + mu) / (lam - mu) * g * (g - 1)
    p0 = (mu * (g - 1) / (lam * g - mu)) ** n0
    return mean, variance, p0


def variance_se(x):
    """Standard error of the sample variance from the sample fourth central moment."""
    centred = x - x.mean()
    m2, m4 = (centred**2).mean(), (centred**4).mean()
    return math.sqrt((m4 - m2**2) / x.size)


def test_gillespie_linear_birth_death_mean_variance_and_extinction():
    # Kendall (1948): mean n0 e^{(l-m)t}, variance n0 (l+m)/(l-m) e^{(l-m)t}(e^{(l-m)t} - 1),
    # P(extinct by t) = (m (e^{(l-m)t} - 1) / (l e^{(l-m)t} - m))^{n0}.
    lam, mu, n0, replicates = 1.0, 0.5, 5, 20000
    run = BirthDeathSwitching(division=[lam], death=[mu]).simulate(
        [n0], t_end=2.0, times=[0.0, 1.0, 2.0], replicates=replicates, seed=11)
    assert run.method == "exact" and run.leaps == 0
    for k, t in enumerate(run.times):
        sizes = run.total[:, k].astype(float)
        if t == 0:
            assert (sizes == n0).all()
            continue
        mean, variance, p0 = kendall_moments(n0, lam, mu, t)
        assert z_ok(sizes.mean(), mean, math.sqrt(variance / replicates))
        assert z_ok(sizes.var(ddof=1), variance, variance_se(sizes))
        assert z_ok((sizes == 0).mean(), p0, binomial_se(p0, replicates))
    # Extinction times are recorded exactly for the replicates that died out.
    assert np.isfinite(run.extinction_time[run.extinct]).all()
    assert (run.extinction_time[run.extinct] <= 2.0).all()


def test_tau_leaping_mean_within_its_error_control():
    # Leaping a linear process multiplies the mean by (1 + r tau) per leap instead of
    # e^{r tau}: relative bias about r^2 t tau / 2 <= |r| t epsilon / 2, since the leap
    # condition (Cao, Gillespie & Petzold 2006) keeps tau <= epsilon / |r| here. The exact mean
    # is Kendall's n0 e^{rt}.
    lam, mu, n0, replicates, t, eps = 1.0, 0.5, 2000, 1000, 1.0, 0.03
    run = BirthDeathSwitching(division=[lam], death=[mu]).simulate(
        [n0], t_end=t, times=[t], replicates=replicates, seed=12, method="tau-leap", epsilon=eps)
    assert run.leaps > 0
    mean, variance, _ = kendall_moments(n0, lam, mu, t)
    bias_bound = abs(lam - mu) * t * eps / 2 * mean
    assert abs(run.total[:, 0].mean() - mean) <= bias_bound + Z * math.sqrt(variance / replicates)


def test_switching_by_the_law_relaxes_to_its_fractions(law):
    # No division or death: each cell is an independent two-state Markov chain that re-decides
    # at rate 1/tau and takes "divide" with probability f = f_divide(n/K). P(divide at t) =
    # f + (p0 - f) e^{-t/tau}, and the count is Binomial(n, that) (common practice: independent
    # two-state chains).
    capacity, n, tau = 100, 40, 0.5
    f = law.fractions(n / capacity)[0]
    model = BirthDeathSwitching(division=[0.0, 0.0], death=[0.0, 0.0], carrying_capacity=capacity, law=law, tau=tau)
    times = np.array([0.0, 0.25, 0.5, 1.0, 3.0])
    replicates = 4000
    run = model.simulate([0, n], t_end=3.0, times=times, replicates=replicates, seed=5)
    assert (run.total == n).all()
    for k, t in enumerate(times):
        p = f + (0.0 - f) * math.exp(-t / tau)
        dividers = run.counts[:, k, 0]
        assert z_ok(dividers.mean(), n * p, math.sqrt(n * p * (1 - p) / replicates))
    # At the last time the chains have mixed: variance n f (1 - f) of the binomial.
    last = run.counts[:, -1, 0].astype(float)
    p = f + (0.0 - f) * math.exp(-3.0 / tau)
    assert z_ok(last.var(ddof=1), n * p * (1 - p), variance_se(last))


def test_extinction_curve_of_a_logistic_chain_matches_first_step_analysis():
    # One phenotype with capacity K: birth b n (1 - n/K), death d n — a one-type chain whose
    # exact extinction-before-`upper` probabilities come from first-step analysis.
    b, d, capacity, upper = 1.0, 0.8, 100, 30
    model = BirthDeathSwitching(division=[b], death=[d], carrying_capacity=capacity)
    sizes = np.array([1, 2, 3, 5, 8, 12])
    replicates = 3000
    curve = model.extinction_curve(sizes, upper=upper, replicates=replicates, seed=8)
    exact = hitting_probability(lambda n: b * n * (1 - n / capacity), lambda n: d * n, sizes, upper)
    for got, want in zip(curve.probability, exact):
        assert z_ok(got, want, binomial_se(want, replicates))
    # The half-way size interpolated from the exact curve lies in the reported range.
    cross = next(i for i in range(sizes.size - 1) if exact[i] >= 0.5 > exact[i + 1])
    exact_threshold = sizes[cross] + (exact[cross] - 0.5) / (exact[cross] - exact[cross + 1]) * (
        sizes[cross + 1] - sizes[cross])
    lo, hi = curve.threshold_range
    assert lo <= exact_threshold <= hi
    assert abs(curve.threshold - exact_threshold) < 1.0
    # The same model with tau-leaping (exact steps below 10 cells) agrees as well.
    leaped = model.extinction_curve(sizes, upper=upper, replicates=replicates, seed=8, method="tau-leap")
    for got, want in zip(leaped.probability, exact):
        assert z_ok(got, want, binomial_se(want, replicates))


def test_extinction_curve_with_a_time_horizon_matches_kendall():
    # P(extinct by t_max) for the linear process (Kendall 1948), no ceiling.
    lam, mu, t_max = 1.0, 0.8, 3.0
    curve = BirthDeathSwitching(division=[lam], death=[mu]).extinction_curve(
        [1, 2, 4], t_max=t_max, replicates=5000, seed=2)
    for n0, got in zip(curve.sizes, curve.probability):
        expected = kendall_moments(int(n0), lam, mu, t_max)[2]
        assert z_ok(got, expected, binomial_se(expected, 5000))


# ------------------------------------------------------------------------- reproducibility
def test_same_seed_same_numbers_and_replicates_do_not_depend_on_batch_size(law):
    model = BirthDeathSwitching(division=[1.0, 0.2], death=[0.4, 0.4], carrying_capacity=60, law=law, tau=1.0)
    a = model.simulate([3, 3], t_end=5.0, replicates=150, seed=9)
    b = model.simulate([3, 3], t_end=5.0, replicates=150, seed=9)
    c = model.simulate([3, 3], t_end=5.0, replicates=150, seed=10)
    small = model.simulate([3, 3], t_end=5.0, replicates=7, seed=9)
    np.testing.assert_array_equal(a.counts, b.counts)
    assert not np.array_equal(a.counts, c.counts)
    np.testing.assert_array_equal(small.counts, a.counts[:7])
    lattice = Lattice((12, 12))
    agents = LatticeModel(lattice, division=[1.0, 0.0], death=[0.3, 0.3], motility=[0.0, 1.0], law=law, tau=0.5)
    for engine in ("sweep", "exact"):
        runs = [agents.simulate(lattice.colony(8), t_end=3.0, replicates=5, seed=s, engine=engine,
                                snapshots=[3.0]) for s in (1, 1, 2)]
        np.testing.assert_array_equal(runs[0].counts, runs[1].counts)
        np.testing.assert_array_equal(runs[0].snapshots, runs[1].snapshots)
        assert not np.array_equal(runs[0].snapshots, runs[2].snapshots)
        alone = agents.simulate(lattice.colony(8), t_end=3.0, replicates=2, seed=1, engine=engine)
        np.testing.assert_array_equal(alone.counts, runs[0].counts[:2])


# --------------------------------------------------------------------------------- lattice
@pytest.mark.parametrize("neighbourhood, size", [("von-neumann", 4), ("moore", 8), ("hexagonal", 6)])
def test_lattice_neighbourhoods_and_classes(neighbourhood, size):
    lattice = Lattice((12, 10), neighbourhood, "periodic")
    nb = lattice.neighbours
    assert nb.shape == (120, size)
    # Periodic: every site has `size` distinct neighbours, and neighbourhood is symmetric.
    assert all(len(set(row)) == size for row in nb.tolist())
    pairs = {(s, t) for s, row in enumerate(nb.tolist()) for t in row}
    assert all((t, s) in pairs for s, t in pairs)
    # Unit spacing (common practice): neighbours at Cartesian distance 1 (Moore diagonals sqrt 2).
    delta = np.linalg.norm(lattice.displacement(np.repeat(np.arange(120), size), nb.ravel()), axis=1)
    allowed = {1.0, math.sqrt(2.0)} if neighbourhood == "moore" else {1.0}
    assert all(any(abs(x - a) < 1e-12 for a in allowed) for x in delta)
    # Classes: a partition in which sites are at graph distance >= 3 (checked by breadth-first search).
    members = np.concatenate(lattice.classes)
    assert np.array_equal(np.sort(members), np.arange(120))
    for group in lattice.classes:
        chosen = set(group.tolist())
        for s in group.tolist():
            near = set(nb[s].tolist())
            near |= {u for t in nb[s].tolist() for u in nb[t].tolist()}
            near.discard(s)
            assert not (near & chosen)
    # Closed boundaries: a corner of the square lattices has 2 (von Neumann) or 3 (Moore) neighbours.
    closed = Lattice((5, 6), neighbourhood, "closed")
    inside = (closed.neighbours < closed.sites).sum(axis=1)
    if neighbourhood != "hexagonal":
        assert inside[0] == {"von-neumann": 2, "moore": 3}[neighbourhood]
    assert inside.max() == size


def test_colonies_are_compact_and_nested():
    lattice = Lattice((9, 9))
    assert lattice.colony(1)[4, 4]
    assert lattice.colony(5).sum() == 5
    # Five cells: the centre and its von Neumann neighbours (the smallest Euclidean disc).
    assert set(map(tuple, np.argwhere(lattice.colony(5)))) == {(4, 4), (3, 4), (5, 4), (4, 3), (4, 5)}
    for k in range(1, 20):
        assert (lattice.colony(k) <= lattice.colony(k + 1)).all()


@pytest.mark.parametrize("neighbourhood, engine", [
    ("von-neumann", "exact"), ("moore", "exact"), ("hexagonal", "exact"), ("von-neumann", "sweep"),
])
def test_exclusion_motion_mixes_to_hypergeometric_occupancy(neighbourhood, engine):
    # Motion only: the symmetric exclusion process is reversible for the uniform measure on
    # configurations with K particles (Liggett 1985), so once mixed, the number of occupied
    # neighbours of a cell is Hypergeometric(M - 1, K - 1, N) (domain notes §3; scipy.stats).
    # Start from a compact colony, far from uniform; t = 120 is many relaxation times of a
    # 12 x 12 torus. z-test per count, standard errors from replicate-to-replicate spread.
    lattice = Lattice((12, 12), neighbourhood)
    cells, replicates, n = 48, 300, lattice.size
    model = LatticeModel(lattice, division=[0.0], death=[0.0], motility=[1.0])
    run = model.simulate(lattice.colony(cells).astype(np.int8), t_end=120.0, times=[120.0],
                         snapshots=[120.0], replicates=replicates, seed=5, engine=engine)
    layouts = run.snapshots[0]
    counts = lattice.occupied_neighbours(layouts)
    per = np.stack([np.bincount(counts[r][layouts[r] != 0], minlength=n + 1) / cells
                    for r in range(replicates)])
    expected = stats.hypergeom.pmf(np.arange(n + 1), lattice.sites - 1, cells - 1, n)
    expected, per = pooled(expected, per, least=100 / (cells * replicates))
    se = per.std(axis=0, ddof=1) / math.sqrt(replicates)
    for k in range(expected.size):
        assert abs(per[:, k].mean() - expected[k]) <= Z * se[k], (k, per[:, k].mean(), expected[k])


def test_closed_boundary_occupancy_is_a_mixture_over_site_degrees():
    # With closed edges, each occupied site is uniform among the M sites and its count is
    # Hypergeometric(M - 1, K - 1, N_s), N_s its number of in-lattice neighbours (Liggett 1985
    # reversibility; scipy.stats.hypergeom). Start from the uniform layouts of Lattice.scatter.
    lattice = Lattice((10, 10), "von-neumann", "closed")
    cells, replicates = 40, 400
    degrees = (lattice.neighbours < lattice.sites).sum(axis=1)
    expected = np.mean([stats.hypergeom.pmf(np.arange(5), lattice.sites - 1, cells - 1, k) for k in degrees], axis=0)
    start = lattice.scatter(cells / lattice.sites, seed=2, replicates=replicates).astype(np.int8)
    model = LatticeModel(lattice, division=[0.0], death=[0.0], motility=[1.0])
    run = model.simulate(start, t_end=20.0, times=[20.0], snapshots=[0.0, 20.0], replicates=replicates,
                         seed=6, engine="exact")
    for layouts in run.snapshots:
        counts = lattice.occupied_neighbours(layouts)
        per = np.stack([np.bincount(counts[r][layouts[r] != 0], minlength=5) / cells for r in range(replicates)])
        want, shares = pooled(expected, per, least=100 / (cells * replicates))
        se = shares.std(axis=0, ddof=1) / math.sqrt(replicates)
        assert (np.abs(shares.mean(axis=0) - want) <= Z * se).all()


@pytest.mark.parametrize("neighbourhood, hop2", [("von-neumann", 1.0), ("moore", 1.5), ("hexagonal", 1.0)])
def test_tagged_particle_spreads_at_the_lattice_diffusion_rate(neighbourhood, hop2):
    # A lone particle hopping at rate m to a uniformly chosen neighbour: MSD(t) = m t <h^2> =
    # 2 d D t with d = 2 and D = m <h^2> / 4 (lattice random walk; common practice, no source).
    # <h^2> is 1, except Moore: (4 * 1 + 4 * 2) / 8 = 1.5.
    lattice = Lattice((24, 24), neighbourhood)
    m, t, replicates = 2.0, 4.0, 2000
    start = np.zeros(lattice.shape, dtype=np.int8)
    start[12, 12] = 1
    model = LatticeModel(lattice, division=[0.0], death=[0.0], motility=[m])
    run = model.simulate(start, t_end=t, times=[t], snapshots=[t], replicates=replicates, seed=7, engine="exact")
    origin = 12 * 24 + 12
    ends = np.argmax(run.snapshots[0].reshape(replicates, -1) != 0, axis=1)
    squared = (lattice.displacement(np.full(replicates, origin), ends) ** 2).sum(axis=1)
    assert z_ok(squared.mean(), m * t * hop2, squared.std(ddof=1) / math.sqrt(replicates))
    if neighbourhood == "von-neumann":
        # The sweep engine: each sweep the particle hops with probability 1 - exp(-m dt), so after
        # t / dt sweeps MSD = (t / dt)(1 - exp(-m dt)) <h^2> (the same random-walk argument).
        dt = 0.05
        run = model.simulate(start, t_end=t, times=[t], snapshots=[t], replicates=replicates, seed=7, dt=dt)
        ends = np.argmax(run.snapshots[0].reshape(replicates, -1) != 0, axis=1)
        squared = (lattice.displacement(np.full(replicates, origin), ends) ** 2).sum(axis=1)
        expected = round(t / dt) * -math.expm1(-m * dt) * hop2
        assert z_ok(squared.mean(), expected, squared.std(ddof=1) / math.sqrt(replicates))


def test_lattice_pure_death_and_first_division_extinction():
    # Pure death: each cell dies by t with probability 1 - e^{-d t}, independently, so the colony
    # is extinct by t with probability (1 - e^{-d t})^{n0} (Kendall 1948 with lambda = 0).
    lattice = Lattice((16, 16))
    d, t_max = 0.5, 2.0
    model = LatticeModel(lattice, division=[0.0], death=[d], motility=[0.3])
    curve = model.extinction_curve([1, 2, 3], t_max=t_max, replicates=4000, seed=3, phenotype=0)
    for n0, got in zip(curve.sizes, curve.probability):
        expected = (-math.expm1(-d * t_max)) ** int(n0)
        assert z_ok(got, expected, binomial_se(expected, 4000))
    # A lone cell's first division always finds a free neighbour, so it reaches 2 cells before
    # dying with probability b / (b + d) (first-step analysis, Karlin & Taylor 1975).
    b = 1.0
    model = LatticeModel(lattice, division=[b], death=[d], motility=[0.3])
    curve = model.extinction_curve([1], upper=2, replicates=4000, seed=4, phenotype=0)
    expected = d / (b + d)
    assert z_ok(curve.probability[0], expected, binomial_se(expected, 4000))
    # The sweep engine, with a time horizon, on the pure-death case.
    model = LatticeModel(lattice, division=[0.0], death=[d], motility=[0.3])
    curve = model.extinction_curve([1, 2], t_max=t_max, replicates=1000, seed=3, phenotype=0,
                                   engine="sweep", dt=0.01)
    for n0, got in zip(curve.sizes, curve.probability):
        expected = (-math.expm1(-d * t_max)) ** int(n0)
        assert z_ok(got, expected, binomial_se(expected, 1000))


def test_sweep_engine_agrees_with_the_exact_engine(law):
    # Fast path against the exact path on the same model (agreement check): mean density and
    # mean fraction of dividers at t = 3, small sweeps (bias of order R dt ~ 1 %).
    lattice = Lattice((16, 16))
    model = LatticeModel(lattice, division=[1.0, 0.0], death=[0.1, 0.1], motility=[0.0, 1.0], law=law, tau=0.5)
    start = lattice.scatter(0.2, seed=1, replicates=200)
    runs = {e: model.simulate(start, t_end=3.0, times=[3.0], replicates=200, seed=3, engine=e,
                              dt=0.003 if e == "sweep" else None) for e in ("exact", "sweep")}
    a, b = runs["exact"].density[:, 0], runs["sweep"].density[:, 0]
    se = math.hypot(a.std(ddof=1), b.std(ddof=1)) / math.sqrt(200)
    assert abs(a.mean() - b.mean()) <= Z * se + 0.01 * a.mean()


def test_first_decisions_follow_the_law_on_actual_neighbour_counts(law):
    # A boolean layout: each cell's first phenotype is drawn from q(. | y, rho) with y its
    # actual number of occupied neighbours. Pool cells by y and compare with the law's table
    # (binomial z-test per y).
    lattice = Lattice((20, 20))
    model = LatticeModel(lattice, division=[1.0, 0.0], death=[0.1, 0.1], motility=[0.0, 1.0], law=law, tau=0.5)
    start = lattice.scatter(0.5, seed=8, replicates=50)
    run = model.simulate(start, t_end=1.0, times=[0.0], snapshots=[0.0], replicates=50, seed=8)
    layouts = run.snapshots[0]
    counts = lattice.occupied_neighbours(layouts)
    q = law.probs(0.5)
    for y in range(5):
        chosen = layouts[(layouts != 0) & (counts == y)]
        if chosen.size < 100:
            continue
        share = (chosen == 1).mean()
        assert z_ok(share, q[y, 0], binomial_se(q[y, 0], chosen.size))


def test_sense_maps_neighbour_counts_to_the_laws_states():
    # A law on two sensed states (a crowding cue: 0 = fewer than 2 occupied neighbours, 1 = at
    # least 2), built on one-neighbour occupancy (2 states), and a `sense` that maps counts to it.
    # First decisions must follow q(. | sense(y)) (binomial z-test per state).
    cue_payoff = {"divide": sl.Linear(1.0, 0.0), "move": sl.Linear(-1.0, 0.5)}  # invented demo values
    two_state = sl.derive_law(cue_payoff, lambda rho: sl.occupancy(1, rho), densities=np.linspace(0, 1, 11),
                              beta=4.0, objective="max-entropy")
    lattice = Lattice((20, 20))
    model = LatticeModel(lattice, division=[1.0, 0.0], death=[0.1, 0.1], motility=[0.0, 1.0], law=two_state,
                         tau=0.5, sense=lambda counts: (counts >= 2).astype(np.int64))
    start = lattice.scatter(0.5, seed=4, replicates=40)
    run = model.simulate(start, t_end=1.0, times=[0.0], snapshots=[0.0], replicates=40, seed=4)
    layouts = run.snapshots[0]
    counts = lattice.occupied_neighbours(layouts)
    q = two_state.probs(0.5)
    for state, chosen in ((0, (layouts != 0) & (counts < 2)), (1, (layouts != 0) & (counts >= 2))):
        share = (layouts[chosen] == 1).mean()
        assert z_ok(share, q[state, 0], binomial_se(q[state, 0], int(chosen.sum())))
    assert abs(q[0, 0] - q[1, 0]) > 0.5  # the two states lead to clearly different choices


def test_mean_field_comparison_reports_the_discrepancy(law):
    # Without switching the compartment equation is logistic: rho' = b rho (1 - rho) - d rho,
    # solved in closed form by rho(t) = K rho0 e^{rt} / (K + rho0 (e^{rt} - 1)) with r = b - d,
    # K = 1 - d / b (Verhulst 1838).
    lattice = Lattice((20, 20))
    b, d = 1.0, 0.2
    model = LatticeModel(lattice, division=[b], death=[d], motility=[5.0])
    start = lattice.scatter(0.1, seed=2, replicates=20).astype(np.int8)
    run = model.simulate(start, t_end=6.0, times=np.linspace(0, 6, 13), replicates=20, seed=2, engine="sweep")
    comparison = model.mean_field(run)
    r, k = b - d, 1 - d / b
    rho0 = run.density[:, 0].mean()
    growth = np.exp(r * run.times)
    np.testing.assert_allclose(comparison.predicted, k * rho0 * growth / (k + rho0 * (growth - 1)), rtol=1e-6)
    np.testing.assert_allclose(comparison.discrepancy, run.density.mean(axis=0) - comparison.predicted)
    assert comparison.largest == pytest.approx(np.abs(comparison.discrepancy).max())
    assert comparison.significant == bool((np.abs(comparison.discrepancy) > 3 * comparison.standard_error).any())
    # With the law, the switchlaw.MeanField route gives the same prediction as the law's own
    # compartment equations (agreement of two implementations of domain notes §4).
    agents = LatticeModel(lattice, division=[1.0, 0.0], death=[0.2, 0.2], motility=[0.0, 1.0], law=law, tau=0.5)
    run = agents.simulate(lattice.scatter(0.3, seed=1)[0], t_end=4.0, times=np.linspace(0, 4, 9),
                          replicates=4, seed=4)
    own = agents.mean_field(run)
    field = sl.MeanField(GO_OR_GROW, lambda rho: sl.occupancy(4, rho), division=[1.0, 0.0],
                         death=[0.2, 0.2], tau=0.5, objective="max-entropy")
    other = agents.mean_field(run, mean_field=field, beta=3.0)
    np.testing.assert_allclose(other.predicted, own.predicted, rtol=2e-3, atol=1e-4)
    assert "discrepancy" in own.summary()


# -------------------------------------------------------------------------------- bad input
@pytest.mark.parametrize("call, pattern", [
    (lambda: hitting_probability(1.0, 1.0, 2.5, 10), r"`n0` must be non-negative integers; got 2\.5"),
    (lambda: hitting_probability(1.0, 1.0, -1, 10), r"`n0` must be non-negative integers; got -1\.0"),
    (lambda: hitting_probability(1.0, 1.0, 11, 10), r"`n0` must be <= `upper` \(10\) \(got 11\)"),
    (lambda: hitting_probability(1.0, 1.0, 0, 0), r"`upper` must be an integer >= 1 \(got 0\)"),
    (lambda: hitting_probability(1.0, lambda n: 1.0 - 0.5 * n, 1, 10),
     r"`death` must be finite and >= 0 at every state; at n=3 it is -0\.5"),
    (lambda: hitting_probability([0, 1, 0, 1], [0, 1, 0, 1], 1, 4),
     r"`birth` and `death` are both 0 at state n=2"),
    (lambda: hitting_probability([1.0, 1.0], 1.0, 1, 5), r"`birth` must give a rate for every state n = 0\.\.4"),
    (lambda: simulate_hitting(1.0, 1.0, 2, 5, replicates=0, seed=1), r"`replicates` must be an integer >= 1 \(got 0\)"),
    (lambda: simulate_hitting(1.0, 1.0, 2, 5, replicates=10, seed=None), r"`seed` must be given"),
    (lambda: simulate_hitting(1.0, 1.0, 2, 5, replicates=10, seed=1, method="ode"),
     r"`method` must be one of 'exact', 'tau-leap' \(got 'ode'\)"),
    (lambda: BirthDeathSwitching(division=[1.0], death=[-0.1]),
     r"`death` rates must be finite and >= 0; phenotype 0 has -0\.1"),
    (lambda: BirthDeathSwitching(division=[1.0], death=[0.1]).simulate([2.5], t_end=1, replicates=2, seed=1),
     r"`initial` must be non-negative integers; entry 0 is 2\.5"),
    (lambda: BirthDeathSwitching(division=[1.0], death=[0.1]).simulate([-3], t_end=1, replicates=2, seed=1),
     r"`initial` must be non-negative integers; entry 0 is -3\.0"),
    (lambda: BirthDeathSwitching(division=[1.0], death=[0.1], carrying_capacity=10).simulate([11], t_end=1, replicates=2, seed=1),
     r"`initial` must total at most `carrying_capacity` \(10\) \(got 11\)"),
    (lambda: BirthDeathSwitching(division=[1.0], death=[0.1]).simulate([2], t_end=1, replicates=0, seed=1),
     r"`replicates` must be an integer >= 1 \(got 0\)"),
    (lambda: BirthDeathSwitching(division=[1.0], death=[0.1]).extinction_curve([0, 2], upper=5, replicates=2, seed=1),
     r"`sizes` must be integers >= 1 \(got \[0, 2\]\)"),
    (lambda: BirthDeathSwitching(division=[1.0], death=[0.1]).extinction_curve([1, 2], replicates=2, seed=1),
     r"give `upper` \(a size\), `t_max` \(a time\) or both"),
    (lambda: BirthDeathSwitching(division=[1.0, 1.0], death=[0.1, 0.1],
                                 switching=lambda x: np.where(x[:, :, None] > 2, -1.0, 1.0) * np.ones((1, 1, 2))
                                 ).simulate([3, 1], t_end=1, replicates=1, seed=1),
     r"`switching` rates must be finite and >= 0; at state \(3, 1\) the rate 0 -> 1 is -1\.0"),
    (lambda: Lattice((8, 8)).colony(65),
     r"`size` must be at most the number of sites \(64 on a 8 x 8 lattice\) \(got 65\): the lattice is too small"),
    (lambda: Lattice((2, 8)), r"`shape\[0\]` must be an integer >= 3 \(got 2\)"),
    (lambda: Lattice((7, 8), "hexagonal"), r"even number of rows for a periodic hexagonal lattice \(got 7\)"),
    (lambda: Lattice((8, 8), "triangular"), r"`neighbourhood` must be one of 'von-neumann', 'moore', 'hexagonal'"),
    (lambda: LatticeModel(Lattice((8, 8)), division=[1.0], death=[0.1], motility=[0.0]).extinction_curve(
        [10, 70], upper=80, replicates=2, seed=1), r"`size` must be at most the number of sites \(64"),
    (lambda: LatticeModel(Lattice((8, 8)), division=[1.0], death=[0.1], motility=[0.0]).simulate(
        Lattice((8, 8)).colony(3), t_end=1.0, seed=1), r"`initial` must give phenotype codes"),
    (lambda: LatticeModel(Lattice((8, 8)), division=[1.0], death=[0.1], motility=[0.0]).simulate(
        np.full((8, 8), 2), t_end=1.0, seed=1), r"`initial` codes must be 0 \(empty\) or 1\.\.1"),
    (lambda: LatticeModel(Lattice((8, 8)), division=[1.0], death=[0.1], motility=[0.0]).simulate(
        Lattice((8, 8)).colony(3).astype(np.int8), t_end=1.0, replicates=0, seed=1),
     r"`replicates` must be an integer >= 1 \(got 0\)"),
])
def test_bad_input_messages(call, pattern):
    with pytest.raises(sl.InputError, match=pattern) as info:
        call()
    assert "\n" not in str(info.value)


def test_law_must_fit_the_lattice(law):
    with pytest.raises(sl.InputError, match=r"`law` decides on 5 states but a moore cell has 0\.\.8"):
        LatticeModel(Lattice((8, 8), "moore"), division=[1.0, 0.0], death=[0.1, 0.1], motility=[0.0, 1.0],
                     law=law, tau=1.0)
    partial = sl.derive_law(GO_OR_GROW, lambda rho: sl.occupancy(4, rho), densities=[0.1, 0.5],
                            beta=1.0, objective="max-entropy")
    with pytest.raises(sl.InputError, match=r"`law` must be derived on densities covering \[0, 1\]"):
        BirthDeathSwitching(division=[1.0, 0.0], death=[0.1, 0.1], carrying_capacity=10, law=partial, tau=1.0)
    with pytest.raises(sl.InputError, match=r"`tau` must be given with a law"):
        BirthDeathSwitching(division=[1.0, 0.0], death=[0.1, 0.1], carrying_capacity=10, law=law)


def test_results_print_short_summaries(law):
    estimate = simulate_hitting(1.0, 1.0, 3, 10, replicates=100, seed=1)
    assert repr(estimate).startswith("HittingEstimate(P(hit 0 before 10 | n0=3) = ")
    curve = BirthDeathSwitching(division=[1.0], death=[0.5]).extinction_curve([1, 2], upper=10, replicates=50, seed=1)
    assert "ExtinctionCurve(2 sizes 1..2" in repr(curve)
    assert "\n" not in repr(curve) and "\n" not in repr(estimate)


@pytest.mark.parametrize("width", [None, 8])
def test_sweep_candidate_turns_are_independent_bernoulli_trials(width):
    # The sweep engine draws the gaps between the turns whose uniform falls below `top` instead
    # of one uniform per site (geometric gaps, Devroye 1986, Non-Uniform Random Variate
    # Generation, ch. X.2). Reference: every site is a candidate independently with probability
    # `top` (Bernoulli / binomial closed forms), and a candidate's u is uniform on [0, top)
    # (Kolmogorov-Smirnov test from scipy.stats). width=8 forces every replicate to continue its
    # run of gaps past the first batch.
    from switchlaw.stochastic._streams import Streams
    from switchlaw.stochastic._sweep import _SweepDraws

    replicates, sites, classes, top = 2000, 100, 5, 0.3

    def draw(seed):
        draws = _SweepDraws(Streams(np.random.SeedSequence(seed), replicates), replicates, classes, sites, top,
                            width=width)
        rank, rr, ss, u = draws.sweep(np.ones(replicates, dtype=bool))
        return rank.copy(), rr, ss, u

    rank, rr, ss, u = draw(21)
    again = draw(21)
    assert all(np.array_equal(a, b) for a, b in zip((rank, rr, ss, u), again))  # same seed, same numbers
    assert np.array_equal(np.sort(rank, axis=1), np.tile(np.arange(classes), (replicates, 1)))
    assert ss.min() >= 0 and ss.max() < sites
    assert np.unique(rr * sites + ss).size == rr.size  # each turn at most once
    trials = replicates * sites
    assert z_ok(rr.size / trials, top, binomial_se(top, trials))
    hits = np.bincount(ss, minlength=sites)
    for edge in (slice(0, 10), slice(sites - 10, sites)):  # both ends of a run of gaps
        n = replicates * 10
        assert z_ok(hits[edge].sum() / n, top, binomial_se(top, n))
    per_replicate = np.bincount(rr, minlength=replicates)
    assert z_ok(per_replicate.var(ddof=1), trials / replicates * top * (1 - top),
                # standard error of a sample variance, normal approximation: sigma^2 sqrt(2 / (n - 1))
                sites * top * (1 - top) * math.sqrt(2 / (replicates - 1)))
    assert u.min() >= 0 and u.max() < top
    assert stats.kstest(u / top, "uniform").pvalue > 1e-4
    # A replicate's numbers come from its own stream only: with every other replicate idle
    # (frozen or extinct), the others draw exactly what they drew before, and the idle draw none.
    draws = _SweepDraws(Streams(np.random.SeedSequence(21), replicates), replicates, classes, sites, top, width=width)
    active = np.arange(replicates) % 2 == 0
    rank_half, rr_half, ss_half, u_half = draws.sweep(active)
    assert np.array_equal(rank_half[active], rank[active])
    assert np.all(active[rr_half])
    mine = active[rr]
    order = np.lexsort((ss_half, rr_half))
    reference = np.lexsort((ss[mine], rr[mine]))
    assert np.array_equal(rr_half[order], rr[mine][reference])
    assert np.array_equal(ss_half[order], ss[mine][reference])
    assert np.array_equal(u_half[order], u[mine][reference])


@pytest.mark.parametrize("neighbourhood, boundary, replicates", [
    ("von-neumann", "periodic", 6), ("moore", "closed", 6), ("hexagonal", "periodic", 6), ("hexagonal", "closed", 6),
    ("von-neumann", "periodic", 1), ("moore", "closed", 1)])
def test_sweep_resolved_at_once_equals_class_by_class(neighbourhood, boundary, replicates):
    # The sweep engine resolves all classes of a sweep at once (fixed-point iteration over the
    # turns). Reference: the definition, taking the classes one after another (the engine's
    # by_class path, which the statistical checks above and the benchmark's per-cell loop also
    # follow); from the same random numbers the layouts must agree exactly, with one lattice
    # (whose random numbers are drawn several sweeps at once) and several replicates, closed edges (targets beyond the edge) and crowding (failed claims, movers
    # vacating sites that later turns fill).
    from switchlaw.stochastic._streams import Streams
    from switchlaw.stochastic._sweep import run_sweeps

    lattice = Lattice((12, 14), neighbourhood=neighbourhood, boundary=boundary)
    law = sl.derive_law(GO_OR_GROW, lambda rho: sl.occupancy(lattice.size, rho),
                        densities=np.linspace(0, 1, 21), beta=3.0, objective="max-entropy")
    model = LatticeModel(lattice, division=[1.0, 0.3], death=[0.2, 0.4], motility=[0.5, 1.0], law=law, tau=0.5)
    outcomes = []
    for by_class in (True, False):
        streams = Streams(np.random.SeedSequence(5), replicates)
        codes = model._codes(lattice.scatter(0.6, seed=1, replicates=replicates), replicates, streams)
        recorded, layouts, turns, cells = run_sweeps(model.rules, lattice, codes, streams, times=np.array([1.0, 4.0]),
                                                     snap=np.array([True, True]), dt_max=0.25, by_class=by_class)
        outcomes.append((recorded, *layouts, turns, cells))
    assert all(np.array_equal(a, b) for a, b in zip(*outcomes))
    assert outcomes[0][-1].min() > 0  # the colonies lived: the comparison saw every kind of event


@pytest.mark.parametrize("width", [None, 8])
def test_batched_sweep_draws_are_independent_bernoulli_trials(width):
    # Several sweeps' draws at once (_SweepDraws.batch), as the engine takes them without
    # `upper`. References as for one sweep: each site of each sweep is a candidate
    # independently with probability `top` (binomial closed forms), a candidate's u is uniform
    # on [0, top) (scipy.stats.kstest), the class ranks are permutations; and a batch returns
    # exactly what the same sweeps drawn one by one return (width=8 makes every row continue
    # its run of gaps, where the batch rewinds the streams and draws sweep by sweep).
    from switchlaw.stochastic._streams import Streams
    from switchlaw.stochastic._sweep import _SweepDraws

    replicates, sites, classes, top, count = 400, 100, 5, 0.3, 6
    draws = _SweepDraws(Streams(np.random.SeedSequence(8), replicates), replicates, classes, sites, top, width=width)
    batch = draws.batch(np.ones(replicates, dtype=bool), count)
    assert len(batch) == count
    total = 0
    for rank, rr, ss, u in batch:
        assert np.array_equal(np.sort(rank, axis=1), np.tile(np.arange(classes), (replicates, 1)))
        assert np.unique(rr * sites + ss).size == rr.size and ss.min() >= 0 and ss.max() < sites
        assert u.min() >= 0 and u.max() < top
        total += rr.size
    trials = count * replicates * sites
    assert z_ok(total / trials, top, binomial_se(top, trials))
    u_all = np.concatenate([b[3] for b in batch])
    assert stats.kstest(u_all / top, "uniform").pvalue > 1e-4
    one_by_one = _SweepDraws(Streams(np.random.SeedSequence(8), replicates), replicates, classes, sites, top,
                             width=width)
    for rank, rr, ss, u in batch + draws.batch(np.ones(replicates, dtype=bool), 2):
        rank1, rr1, ss1, u1 = one_by_one.sweep(np.ones(replicates, dtype=bool))
        order, order1 = np.lexsort((ss, rr)), np.lexsort((ss1, rr1))
        assert np.array_equal(rank, rank1)
        assert np.array_equal(rr[order], rr1[order1]) and np.array_equal(ss[order], ss1[order1])
        assert np.array_equal(u[order], u1[order1])


def test_old_capacity_keyword_still_works_with_a_deprecation_warning():
    # "capacity" is the channel capacity (bits); the stochastic model's K is the carrying
    # capacity. The old keyword keeps working for one release (common practice, no source).
    with pytest.warns(DeprecationWarning, match=r"`capacity=` is deprecated.*`carrying_capacity=`"):
        old = BirthDeathSwitching(division=[1.0], death=[0.5], capacity=10)
    assert old.carrying_capacity == 10
