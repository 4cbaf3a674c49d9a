"""Regression checks for defects found in review (each with its independent reference)."""

import math
import os
import stat

import numpy as np
import pytest
from scipy import stats

import switchlaw as sl


def test_three_transitions_inside_one_grid_interval_are_located():
    # Reference: supports from Blahut–Arimoto cold solves on a fine grid (the method of
    # Blahut 1972), which bracket three transitions in [0, 4].
    u = np.array([[2.0, 3.0, 1.0], [2.0, 0.0, 2.0], [0.0, 2.0, 2.0]])
    p = np.array([0.5, 0.3, 0.2])
    coarse = sl.tradeoff(u, p, [0.0, 4.0]).critical_betas
    assert [c.beta for c in coarse] == pytest.approx([0.2340934742, 0.3491653463, 0.881373587], abs=1e-8)
    assert coarse[0].exact and coarse[0].beta == sl.first_critical_beta(u, p)
    fine = np.linspace(0.0, 4.0, 401)
    supports = [frozenset(np.flatnonzero(sl.solve(u, p, b, method="blahut-arimoto",
                                                   max_iter=400_000).marginal > 1e-7)) for b in fine]
    changes = [0.5 * (fine[i] + fine[i + 1]) for i in range(fine.size - 1) if supports[i] != supports[i + 1]]
    assert [c.beta for c in coarse] == pytest.approx(changes, abs=0.011)


def test_phenotypes_equal_on_every_occurring_state_are_one_phenotype():
    u = np.array([[1.0, 0.0, 0.0], [0.0, 1.0, 1.0], [5.0, 5.0, 7.0]])
    p = np.array([0.6, 0.4, 0.0])
    (only,) = sl.tradeoff(u, p, np.linspace(0, 10, 41)).critical_betas
    assert only.beta == pytest.approx(math.log(0.6 / 0.4), abs=1e-12)  # Kuhn–Tucker, Blahut 1972


def test_information_stays_finite_when_a_marginal_underflows():
    u = np.array([[1, -2, 1, -1, -3], [-2, 1, 0, 3, 2], [2, 2, -1, 0, 4], [2, 0, 4, 3, 5]], float)
    p = np.array([2.8e-3, 1e-20, 4.2e-12, 1 - 2.8e-3 - 1e-20 - 4.2e-12])
    values = [sl.solve(u, p, b).information_bits for b in (150.0, 181.0, 200.0)]
    assert all(math.isfinite(v) for v in values)
    assert values[1] == pytest.approx(values[0], abs=1e-3)


def test_a_constant_added_to_every_payoff_changes_nothing():
    # Only payoff differences within a state matter (the Gibbs form q ∝ r exp(beta u), Blahut 1972).
    rng = np.random.default_rng(5)
    u = rng.normal(size=(6, 3))
    p = rng.dirichlet(np.ones(6))
    base = sl.solve(u, p, 20.0)
    shifted = sl.solve(u + 1e6, p, 20.0)  # 1e6 + u keeps u to ~1e-10 in float64
    np.testing.assert_allclose(shifted.probs, base.probs, rtol=1e-7, atol=1e-12)


def test_conic_budget_does_not_depend_on_payoff_units():
    # Bernoulli(0.2), Hamming: R(D) = H_b(0.2) - H_b(D) with slope beta = ln((1-D)/D)
    # (Cover & Thomas Thm 10.3.1); payoffs in units of `scale` make beta 1/scale as large.
    from scipy.optimize import brentq

    def h(x):
        return -(x * math.log2(x) + (1 - x) * math.log2(1 - x))

    distortion = brentq(lambda d: h(0.2) - h(d) - 0.1, 1e-9, 0.2)
    expected = math.log((1 - distortion) / distortion)
    for scale in (1.0, 1e-5, 1e-9):
        policy = sl.solve_budget(np.array([[0.0, -1.0], [-1.0, 0.0]]) * scale, [0.8, 0.2], bits=0.1)
        assert policy.information_bits == pytest.approx(0.1, abs=1e-6)
        assert policy.beta * scale == pytest.approx(expected, rel=1e-4)


def test_budget_with_a_dominant_phenotype_is_slack():
    policy = sl.solve_budget([[1.0, 1.0], [1.0, 0.0]], [0.5, 0.5], bits=0.1, method="bisection")
    assert policy.status == "budget-slack" and policy.information_bits == 0.0


def test_product_of_receptor_signals_keeps_sensed_values():
    noisy = sl.continuous_signal(stats.uniform(0, 2), [0.0, 1.0, 2.0], receptor=sl.PoissonReceptor(2.0, max_count=5))
    clean = sl.occupancy(1, 0.5)
    both = sl.product_environment(noisy, clean)
    assert both.decision_values.shape == (both.probs.size, 2)


def test_expression_errors_are_input_errors():
    from switchlaw.cli._expressions import ExpressionError, evaluate, parse

    for text in ("exp(y, y)", "y + exp", "max(y, 0, y)"):
        with pytest.raises(ExpressionError):
            parse(text, ("y", "density"))
    with pytest.raises(sl.InputError):
        parse("+".join(["y"] * 3000), ("y", "density"))
    assert evaluate(parse("10 ** 400", ("y",)), {"y": 1.0}) == np.inf


def test_force_never_replaces_a_folder_switchlaw_did_not_write(tmp_path, monkeypatch):
    from switchlaw.cli._main import main

    work = tmp_path / "work"
    work.mkdir()
    (work / "thesis.txt").write_text("keep")
    monkeypatch.chdir(work)
    assert main(["demo", "colony", "--out", ".", "--force", "--quiet"]) == 2
    assert main(["demo", "colony", "--out", str(work), "--force", "--quiet"]) == 2
    assert (work / "thesis.txt").read_text(encoding="utf-8") == "keep"
    out = tmp_path / "out"
    old = os.umask(0o022)
    try:
        assert main(["demo", "dormancy", "--out", str(out), "--quiet"]) == 0
    finally:
        os.umask(old)
    assert stat.S_IMODE(out.stat().st_mode) == 0o755
    assert stat.S_IMODE((out / "law.csv").stat().st_mode) == 0o644
    assert main(["demo", "dormancy", "--out", str(out), "--quiet", "--force"]) == 0


def test_poisson_receptor_refuses_an_unbounded_count_space():
    with pytest.raises(sl.InputError, match="count states"):
        sl.continuous_signal(stats.uniform(0, 1e9), [0.0, 1e9], receptor=sl.PoissonReceptor(1.0))


def test_finite_tau_ignores_phenotypes_nobody_adopts():
    # With f_x = 0 a phenotype's fast growth cannot make equilibria disappear: the reduced
    # equation sum_x f_x / (1 - tau a_x) = 1 only involves adopted phenotypes (domain notes §4).
    payoff = {"divide": sl.Linear(0.0, 1.0), "burst": sl.Linear(0.0, -50.0)}
    model = sl.MeanField(payoff, lambda rho: sl.occupancy(4, rho), division=[1.0, 30.0],
                         death=[0.2, 0.0], tau=1.0, objective="min-information")
    found = model.equilibria(2.0)
    assert [round(e.density, 8) for e in found] == [0.0, 0.8]  # logistic: 1 - d/b for "divide"
