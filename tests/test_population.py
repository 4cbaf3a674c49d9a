"""Mean-field population dynamics, equilibria, regimes and critical betas."""

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.optimize import brentq, minimize_scalar

import switchlaw as sl

# Invented go-or-grow scenario: dividing pays in crowded neighbourhoods, moving when isolated.
GROW_WHEN_CROWDED = {"divide": sl.Linear(1 / 6, 0.0), "move": sl.Linear(-1 / 6, 1.0)}
# The opposite rule: divide when isolated, move away from crowding.
MOVE_FROM_CROWDING = {"divide": sl.Linear(-1 / 6, 1.0), "move": sl.Linear(1 / 6, 0.0)}


def hexagonal(rho):
    return sl.occupancy(6, rho)


def model(payoff=GROW_WHEN_CROWDED, death=0.2, objective="max-entropy", tau=None):
    return sl.MeanField(payoff, hexagonal, division=[1.0, 0.0], death=[death, death],
                        objective=objective, tau=tau)


def test_strong_allee_equation_equilibria_and_eigenvalues():
    # r N (N/A - 1)(1 - N/K) (Courchamp, Berec & Gascoigne 2008, ch. 2): equilibria 0, A, K
    # with eigenvalues -r, r (1 - A/K) and -r (K/A - 1).
    r, a, k = 0.8, 0.15, 0.85
    found = sl.equilibria_of(lambda n: r * (n / a - 1) * (1 - n / k))
    assert [e.density for e in found] == pytest.approx([0.0, a, k], abs=1e-12)
    eigen = [float(e.eigenvalues[0]) for e in found]
    assert eigen == pytest.approx([-r, r * (1 - a / k), -r * (k / a - 1)], rel=1e-8)
    assert [e.stable for e in found] == [True, False, True]


def test_transcritical_point_matches_its_closed_form():
    # Max-entropy, two phenotypes: at zero density every neighbour site is empty (y = 0), so
    # q(divide | 0) = 1 / (1 + e^beta) and g(0) = q (b - d) - (1 - q) d vanishes where
    # q = d / b, i.e. beta_T = ln(b/d - 1) (derived here from domain notes §2 and §4).
    critical = model().critical_betas(0.05, 6.0)
    transcritical = [c for c in critical if c.kind == "transcritical"]
    assert len(transcritical) == 1
    assert transcritical[0].beta == pytest.approx(math.log(1.0 / 0.2 - 1.0), abs=1e-10)
    assert transcritical[0].density == 0.0


def test_fold_is_located_to_1e_8():
    # Independent check: at a fold the local extremum of g(rho) over rho crosses zero; find
    # that crossing in beta by Brent's method and compare.
    mf = model(death=0.27)
    folds = [c for c in mf.critical_betas(0.05, 20.0) if c.kind == "fold"]
    assert len(folds) == 2
    for fold in folds:
        def extreme(beta, rho=fold.density):
            lo, hi = max(rho - 0.05, 1e-6), min(rho + 0.05, 1.0)
            best = minimize_scalar(lambda r: -mf.growth(r, beta), bounds=(lo, hi),
                                   method="bounded", options={"xatol": 1e-12})
            return -best.fun

        independent = brentq(extreme, fold.beta - 0.05, fold.beta + 0.05, xtol=1e-13)
        assert fold.beta == pytest.approx(independent, abs=1e-8)
        below = len(mf.equilibria(fold.beta - 1e-3))
        above = len(mf.equilibria(fold.beta + 1e-3))
        assert abs(below - above) == 2


def test_continuation_agrees_with_brute_force_roots():
    mf = model(death=0.27)
    diagram = mf.continuation(0.05, 20.0)
    for branch in diagram.branches:
        residual = [abs(mf.growth(r, b)) for r, b in zip(branch.densities, branch.betas)]
        assert max(residual) < 1e-8
    for beta in np.linspace(0.5, 19.5, 12):
        brute = sorted(e.density for e in mf.equilibria(beta, points=801)[1:])
        traced = []
        for branch in diagram.branches:
            b = branch.betas
            for j in range(b.size - 1):
                if (b[j] - beta) * (b[j + 1] - beta) <= 0 and b[j] != b[j + 1]:
                    w = (beta - b[j]) / (b[j + 1] - b[j])
                    traced.append(branch.densities[j] + w * (branch.densities[j + 1] - branch.densities[j]))
        assert sorted(traced) == pytest.approx(brute, abs=5e-3)


def test_strong_allee_appears_above_a_critical_sensitivity():
    # Fact of the trade (common practice, no source): cells that keep dividing in crowded
    # neighbourhoods and move when isolated give a strong Allee effect above a critical
    # sensitivity; cells that move away from crowding give a monostable population.
    mf = model()
    beta_t = math.log(4.0)
    assert mf.regime(0.5 * beta_t) in ("monostable", "weak-allee")
    assert mf.regime(2.0 * beta_t) == "strong-allee"
    threshold = mf.allee_threshold(2.0 * beta_t)
    assert 0 < threshold < 0.5
    assert mf.growth(0.5 * threshold, 2 * beta_t) < 0 < mf.growth(1.5 * threshold, 2 * beta_t)
    away = model(payoff=MOVE_FROM_CROWDING)
    assert {away.regime(b) for b in (0.3, 1.0, 3.0, 10.0)} == {"monostable"}


def test_min_information_law_also_gives_a_strong_allee_effect():
    mf = model(objective="min-information")
    assert mf.regime(5.0) == "strong-allee"
    assert mf.low_density_growth(5.0) == pytest.approx(-0.2, abs=1e-9)  # isolated cells move


def test_trajectories_settle_on_the_stable_equilibria():
    mf = model()
    beta = 3.0
    found = mf.equilibria(beta)
    threshold = mf.allee_threshold(beta)
    upper = [e.density for e in found if e.stable and e.density > 0][0]
    rises = mf.trajectory(beta, threshold + 0.05, 200.0)
    dies = mf.trajectory(beta, threshold - 0.05, 200.0)
    assert rises.density[-1] == pytest.approx(upper, abs=1e-5)
    assert dies.density[-1] < 1e-4
    # The fast-switching right-hand side against scipy's integrator on rho * g(rho) directly.
    direct = solve_ivp(lambda t, z: [z[0] * mf.growth(z[0], beta)], (0, 50), [0.6],
                       rtol=1e-10, atol=1e-12)
    assert mf.trajectory(beta, 0.6, 50.0).density[-1] == pytest.approx(direct.y[0, -1], abs=1e-6)


def test_finite_tau_approaches_the_fast_switching_limit():
    beta = 3.0
    fast = [e.density for e in model().equilibria(beta)]
    slow = model(tau=1e-4).equilibria(beta)
    assert [e.density for e in slow] == pytest.approx(fast, abs=1e-3)
    assert [e.stable for e in slow] == [e.stable for e in model().equilibria(beta)]
    moderate = model(tau=2.0)
    for eq in moderate.equilibria(beta)[1:]:
        assert np.abs(moderate.rhs(eq.compartments, beta)).max() < 1e-9


@pytest.mark.parametrize(
    "call, pattern",
    [
        (lambda: sl.MeanField(GROW_WHEN_CROWDED, hexagonal, division=[1.0, -0.1], death=[0.2, 0.2]), r"`division` rates must be >= 0; entry 1 is -0\.1"),
        (lambda: sl.MeanField(GROW_WHEN_CROWDED, hexagonal, division=[1.0, 0.0], death=[0.2]), r"`death` must have one rate per phenotype \(2\) \(got 1\)"),
        (lambda: sl.MeanField(GROW_WHEN_CROWDED, hexagonal, division=[1.0, 0.0], death=[0.2, 0.2], tau=0.0), r"`tau` must be > 0"),
        (lambda: model().critical_betas(3.0, 1.0), r"`beta_max` must exceed `beta_min`"),
        (lambda: model().equilibria(-1.0), r"`beta` must be finite and >= 0"),
        (lambda: model().trajectory(1.0, 1.5, 10.0), r"`initial` must be non-negative with total density <= 1"),
        (lambda: sl.MeanField(GROW_WHEN_CROWDED, hexagonal, division=[1.0, 0.0, 0.5], death=[0.2, 0.2, 0.2]).regime(1.0), r"`division` must have one rate per phenotype \(2\) \(got 3\)"),
    ],
)
def test_bad_input(call, pattern):
    with pytest.raises(sl.InputError, match=pattern):
        call()


def test_continuation_in_cost_per_bit_and_death_rate_match_closed_forms():
    # beta = ln 2 / cost (domain notes §2.4), so beta_T = ln 4 is cost_T = ln 2 / ln 4 = 1/2.
    diagram = model().continuation(0.1, 2.0, parameter="cost_per_bit")
    (point,) = [c for c in diagram.critical_points if c.kind == "transcritical"]
    assert point.value == pytest.approx(0.5, abs=1e-10)
    assert point.beta == pytest.approx(math.log(4), abs=1e-9)
    # Scaling death by s at fixed beta: g(0) = q b - s d with q = 1/(1 + e^beta) (derived as in
    # the transcritical test above), so s_T = q b / d.
    beta = 1.0
    diagram = model().continuation(0.2, 3.0, parameter="death_scale", beta=beta)
    (point,) = [c for c in diagram.critical_points if c.kind == "transcritical"]
    assert point.value == pytest.approx((1 / (1 + math.e)) * 1.0 / 0.2, abs=1e-10)


def test_regime_map_matches_pointwise_classification():
    mf = model()
    betas = np.linspace(0.2, 8.0, 9)
    scales = np.array([0.7, 1.0, 1.3])
    regime_map = mf.regime_map(betas, "death_scale", scales)
    for i, scale in enumerate(scales):
        variant = sl.MeanField(GROW_WHEN_CROWDED, hexagonal, division=[1.0, 0.0],
                               death=[0.2 * scale, 0.2 * scale], objective="max-entropy")
        direct = [variant.regime(b) for b in betas]
        assert list(regime_map.regimes[i]) == direct
    assert "strong-allee" in regime_map.regimes and "extinction" in regime_map.regimes


def test_tau_continuation_needs_a_finite_tau():
    with pytest.raises(sl.InputError, match="needs a model with a finite `tau`"):
        model().continuation(0.5, 2.0, parameter="tau", beta=1.0)
    with pytest.raises(sl.InputError, match="`beta` must be given to continue in 'death_scale'"):
        model().continuation(0.5, 2.0, parameter="death_scale")
    with pytest.raises(sl.InputError, match="`parameter` must be one of"):
        model().continuation(0.5, 2.0, parameter="rho")


def test_every_branch_says_how_it_ended():
    diagram = model(death=0.27).continuation(0.05, 20.0)
    assert diagram.complete
    for branch in diagram.branches:
        assert branch.ended in ("left the parameter range", "reached zero density")
        assert not branch.failed


def test_a_fold_at_a_kink_of_the_law_is_still_found():
    # Min-information laws switch phenotypes at densities where the support of the marginal
    # changes, so g(rho) has kinks; a fold there is non-smooth and continuation stops at it.
    # It must still be reported, located by counting equilibria on both sides.
    mf = model(objective="min-information", death=0.4)
    (fold,) = mf.critical_betas(0.1, 20.0)
    assert fold.kind == "fold"
    # Near a non-smooth fold the two merging roots are within ~1e-6 of each other for betas
    # within ~1e-5 of it, so the counts are compared 1e-3 away.
    assert len(mf.equilibria(fold.beta - 1e-3)) == 3
    assert len(mf.equilibria(fold.beta + 1e-3)) == 1
    assert fold.density == pytest.approx(0.6, abs=1e-3)  # where every cell divides: 1 - d/b
