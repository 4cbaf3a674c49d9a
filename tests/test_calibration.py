"""Calibration: fits checked against general-purpose statistics libraries and known truths."""

import math
import warnings

import numpy as np
import pytest
from scipy import stats
from scipy.optimize import minimize_scalar

import switchlaw
from switchlaw import InputError
from switchlaw.calibration import CUTOFF, Snapshot, calibrate, population_verdict
from switchlaw.calibration._demo import colony_environment, colony_payoff, invented_colony_data

SIGNAL = np.arange(7.0)  # occupied neighbours of 6


def _delta_table(delta):
    """Two phenotypes: payoff 0 and ``delta(y)``; max-entropy gives logistic(beta * delta)."""
    return np.column_stack([np.zeros_like(delta), delta])


def _simulate_states(rng, env_probs, q, cells):
    joint = env_probs[:, None] * q
    return rng.multinomial(cells, joint.ravel() / joint.sum()).reshape(q.shape).astype(float)


def _softmax(logits):
    z = np.exp(logits - logits.max(axis=-1, keepdims=True))
    return z / z.sum(axis=-1, keepdims=True)


# ----------------------------------------------------------------------------- Wilks' rule
def test_cutoff_is_half_the_chi_square_quantile():
    # Wilks 1938: 2 (l_max - l) ~ chi2(1); 95% quantile 3.841459 from scipy.stats.chi2.
    assert CUTOFF == pytest.approx(stats.chi2.ppf(0.95, 1) / 2.0, rel=1e-12)
    assert CUTOFF == pytest.approx(1.920729, abs=5e-7)


# ----------------------------------------------------------------------------- logistic oracle
def _logistic_data(rng, beta, cells=3000):
    env = switchlaw.occupancy(6, 0.45)
    delta = (SIGNAL - 2.7) / 3.0
    q = _softmax(beta * _delta_table(delta))
    return env, delta, _simulate_states(rng, env.probs, q, cells)


def test_beta_equals_logistic_regression_without_intercept(rng):
    # Domain notes §5: max-entropy with two phenotypes is a logistic regression in the payoff
    # difference with slope beta and no intercept. Reference: statsmodels GLM (Binomial family).
    sm = pytest.importorskip("statsmodels.api")
    env, delta, counts = _logistic_data(rng, beta=1.7)
    fit = calibrate(counts, _delta_table(delta), env, free={"beta": (0.01, 20.0)})
    glm = sm.GLM(
        np.r_[np.zeros(7), np.ones(7)], np.r_[delta, delta][:, None],
        family=sm.families.Binomial(), freq_weights=np.r_[counts[:, 0], counts[:, 1]],
    ).fit(tol=1e-14)
    assert fit.converged
    assert fit.estimates["beta"] == pytest.approx(glm.params[0], abs=1e-6)
    # The per-cell log-likelihood and the Wald standard error agree too (same likelihood).
    assert fit.log_likelihood == pytest.approx(glm.llf, abs=1e-6)
    assert fit.standard_errors["beta"] == pytest.approx(glm.bse[0], rel=1e-4)


def test_beta_equals_scipy_on_a_logistic_likelihood_written_here(rng):
    # Independent route: the Bernoulli log-likelihood written out, maximised by scipy.
    env, delta, counts = _logistic_data(rng, beta=0.8)

    def negative(b):
        p = 1.0 / (1.0 + np.exp(-b * delta))
        return -np.sum(counts[:, 1] * np.log(p) + counts[:, 0] * np.log1p(-p))

    reference = minimize_scalar(negative, bounds=(0.01, 20.0), method="bounded",
                                options={"xatol": 1e-12}).x
    fit = calibrate(counts, _delta_table(delta), env, free={"beta": (0.01, 20.0)})
    assert fit.estimates["beta"] == pytest.approx(reference, abs=1e-6)


def test_profile_interval_matches_wald_for_a_large_sample(rng):
    # Large-sample theory (Wilks 1938; e.g. Pawitan, In All Likelihood, 2001, ch. 2-3): the
    # profile interval approaches est +- 1.959964 se. Reference se from statsmodels.
    sm = pytest.importorskip("statsmodels.api")
    env, delta, counts = _logistic_data(rng, beta=1.2, cells=200_000)
    fit = calibrate(counts, _delta_table(delta), env, free={"beta": (0.01, 20.0)})
    glm = sm.GLM(
        np.r_[np.zeros(7), np.ones(7)], np.r_[delta, delta][:, None],
        family=sm.families.Binomial(), freq_weights=np.r_[counts[:, 0], counts[:, 1]],
    ).fit(tol=1e-14)
    lo_wald, hi_wald = glm.conf_int(alpha=0.05)[0]
    lo, hi = fit.intervals["beta"]
    width = hi_wald - lo_wald
    assert lo == pytest.approx(lo_wald, abs=0.01 * width)
    assert hi == pytest.approx(hi_wald, abs=0.01 * width)
    assert fit.identifiable == {"beta": True}


def test_several_phenotypes_match_a_multinomial_logit(rng):
    # A payoff c_x + d_x * y (phenotype 0 the reference) at beta = 1 is a multinomial logit in
    # [1, y]; reference: statsmodels MNLogit on the same cells.
    sm = pytest.importorskip("statsmodels.api")
    env = switchlaw.occupancy(6, 0.5)
    truth = {"c1": 0.4, "d1": -0.3, "c2": -1.0, "d2": 0.5}

    def payoff(c1, d1, c2, d2):
        return np.column_stack([np.zeros(7), c1 + d1 * SIGNAL, c2 + d2 * SIGNAL])

    counts = _simulate_states(rng, env.probs, _softmax(payoff(**truth)), 6000)
    fit = calibrate(counts, payoff, env, free={k: (-5.0, 5.0) for k in truth}, fixed={"beta": 1.0})
    rows = [(y, x) for y in range(7) for x in range(3) for _ in range(int(counts[y, x]))]
    y, x = np.array(rows).T
    mn = sm.MNLogit(x, sm.add_constant(y.astype(float))).fit(method="newton", disp=False, tol=1e-12, maxiter=100)
    expected = {"c1": mn.params[0, 0], "d1": mn.params[1, 0], "c2": mn.params[0, 1], "d2": mn.params[1, 1]}
    for name, value in expected.items():
        assert fit.estimates[name] == pytest.approx(value, abs=1e-6), name
    assert fit.log_likelihood == pytest.approx(mn.llf, abs=1e-6)


# ----------------------------------------------------------------------------- other data forms
def test_fractions_only_matches_the_mixture_likelihood_written_here(rng):
    # f(x | rho) = sum_y p(y | rho) q(x | y) (domain notes §5); reference: scipy on that
    # likelihood written out here.
    delta = (SIGNAL - 3.0) / 3.0
    densities = np.linspace(0.1, 0.9, 9)
    probs = np.stack([switchlaw.occupancy(6, r).probs for r in densities])
    f1 = probs @ (1.0 / (1.0 + np.exp(-2.5 * delta)))
    ones = rng.binomial(500, f1)
    counts = np.column_stack([500 - ones, ones]).astype(float)

    def negative(b):
        f = probs @ (1.0 / (1.0 + np.exp(-b * delta)))
        return -np.sum(counts[:, 1] * np.log(f) + counts[:, 0] * np.log1p(-f))

    reference = minimize_scalar(negative, bounds=(0.01, 30.0), method="bounded", options={"xatol": 1e-12}).x
    fit = calibrate(counts, _delta_table(delta), lambda r: switchlaw.occupancy(6, r),
                    free={"beta": (0.01, 30.0)}, densities=densities)
    assert fit.estimates["beta"] == pytest.approx(reference, abs=1e-6)
    assert fit.log_likelihood == pytest.approx(-negative(reference), abs=1e-6)
    assert fit.law is not None and fit.law.densities.size == densities.size


def _neighbours_by_rolling(labels, offsets):
    occupied = (labels > 0).astype(int)
    return sum(np.roll(np.roll(occupied, -dr, axis=0), -dc, axis=1) for dr, dc in offsets)


def test_snapshot_counts_match_a_direct_count(rng):
    # Occupied von Neumann / Moore neighbours on a torus counted with numpy.roll (written
    # here), and with zero padding for closed edges (no sites beyond the edge).
    labels = rng.integers(0, 3, size=(12, 10))
    von_neumann = [(-1, 0), (1, 0), (0, -1), (0, 1)]
    moore = von_neumann + [(-1, -1), (-1, 1), (1, -1), (1, 1)]
    for name, offsets in (("von-neumann", von_neumann), ("moore", moore)):
        neighbours = _neighbours_by_rolling(labels, offsets)
        expected = np.zeros((len(offsets) + 1, 2))
        for (r, c), label in np.ndenumerate(labels):
            if label:
                expected[neighbours[r, c], label - 1] += 1
        counts, density = Snapshot(labels, name, "periodic").counts(2)
        np.testing.assert_array_equal(counts, expected)
        assert density == pytest.approx((labels > 0).mean())
    padded = np.pad((labels > 0).astype(int), 1)
    closed = sum(padded[1 + dr:13 + dr, 1 + dc:11 + dc] for dr, dc in von_neumann)
    expected = np.zeros((5, 2))
    for (r, c), label in np.ndenumerate(labels):
        if label:
            expected[closed[r, c], label - 1] += 1
    np.testing.assert_array_equal(Snapshot(labels, "von-neumann", "closed").counts(2)[0], expected)


def test_snapshots_fit_like_their_counts(rng):
    # Several snapshots at different densities: the fit equals the fit of the counts taken
    # from them (same likelihood, independent count above).
    snapshots = []
    for rho in (0.3, 0.6):
        layout = rng.random((20, 20)) < rho
        crowd = _neighbours_by_rolling(layout, [(-1, 0), (1, 0), (0, -1), (0, 1)])
        second = rng.random((20, 20)) < 1.0 / (1.0 + np.exp(-2.0 * (crowd - 2.0) / 2.0))
        labels = np.where(layout, 1 + second, 0)
        snapshots.append(Snapshot(labels, "von-neumann"))
    payoff = _delta_table((np.arange(5.0) - 2.0) / 2.0)
    env = lambda r: switchlaw.occupancy(4, r)  # noqa: E731
    fit = calibrate(snapshots, payoff, env, free={"beta": (0.0, 10.0)})
    stacked = np.stack([s.counts(2)[0] for s in snapshots])
    densities = [s.counts(2)[1] for s in snapshots]
    again = calibrate(stacked, payoff, env, free={"beta": (0.0, 10.0)}, densities=densities)
    assert fit.estimates["beta"] == pytest.approx(again.estimates["beta"], abs=1e-9)


def test_tidy_table_and_csv_equal_the_array_form(tmp_path):
    pd = pytest.importorskip("pandas")
    data = invented_colony_data(seed=3, densities=[0.2, 0.5, 0.8], cells=300)
    frame = pd.DataFrame(data.rows())
    path = tmp_path / "cells.csv"
    frame.to_csv(path, index=False)
    free = {"beta": (0.1, 30.0), "roam_value": (0.0, 1.0)}

    def payoff(roam_value):
        return colony_payoff(2.0, roam_value)

    base = calibrate(data.counts, payoff, colony_environment, free=free, densities=data.densities, starts=1)
    for source in (frame, str(path)):
        fit = calibrate(source, payoff, colony_environment, free=free, phenotypes=data.phenotypes, starts=1)
        assert fit.estimates == pytest.approx(base.estimates, abs=1e-8)


# ----------------------------------------------------------------------------- goodness of fit
def test_deviance_aic_bic_against_formulas(rng):
    # Saturated model: a free q(x | y) per state (domain notes §5); AIC 2k - 2l (Akaike
    # 1974), BIC k ln N - 2l (Schwarz 1978); p-value from scipy.stats.chi2.
    env, delta, counts = _logistic_data(rng, beta=1.0, cells=2000)
    fit = calibrate(counts, _delta_table(delta), env, free={"beta": (0.01, 20.0)})
    shares = counts / counts.sum(axis=1, keepdims=True)
    saturated = float(np.sum(counts[counts > 0] * np.log(shares[counts > 0])))
    rows = int((counts.sum(axis=1) > 0).sum())
    assert fit.saturated_log_likelihood == pytest.approx(saturated, rel=1e-12)
    assert fit.deviance == pytest.approx(2 * (saturated - fit.log_likelihood), rel=1e-9)
    assert fit.deviance_df == rows - 1
    assert fit.deviance_p_value == pytest.approx(stats.chi2.sf(fit.deviance, rows - 1), rel=1e-9)
    assert fit.aic == pytest.approx(2 - 2 * fit.log_likelihood)
    assert fit.bic == pytest.approx(math.log(2000) - 2 * fit.log_likelihood)
    # The free logistic a + b y nests the law here (intercept free): its likelihood is higher
    # and statsmodels' Logit with a constant gives the same value.
    sm = pytest.importorskip("statsmodels.api")
    glm = sm.GLM(
        np.r_[np.zeros(7), np.ones(7)], sm.add_constant(np.r_[SIGNAL, SIGNAL]),
        family=sm.families.Binomial(), freq_weights=np.r_[counts[:, 0], counts[:, 1]],
    ).fit(tol=1e-14)
    assert fit.alternative["log_likelihood"] == pytest.approx(glm.llf, abs=1e-5)
    assert "explains the data better" in fit.verdict or "Neither" in fit.verdict


# ----------------------------------------------------------------------------- identifiability
def test_beta_and_a_payoff_scale_are_flagged_not_identifiable(rng):
    # Only beta * u enters a max-entropy law (domain notes §5): the profiles are flat.
    env, delta, counts = _logistic_data(rng, beta=1.5, cells=1000)

    def payoff(scale):
        return scale * _delta_table(delta)

    with pytest.warns(UserWarning, match="not identifiable from these data: beta, scale"):
        fit = calibrate(counts, payoff, env, free={"beta": (0.1, 10.0), "scale": (0.1, 10.0)}, starts=2)
    assert fit.identifiable == {"beta": False, "scale": False}
    for lo, hi in fit.intervals.values():
        assert not (np.isfinite(lo) and np.isfinite(hi))
    # The product is still determined: beta * scale equals the one-parameter fit.
    single = calibrate(counts, _delta_table(delta), env, free={"beta": (0.01, 100.0)})
    assert fit.estimates["beta"] * fit.estimates["scale"] == pytest.approx(single.estimates["beta"], rel=1e-5)


# ----------------------------------------------------------------------------- min-information
def test_min_information_gradient_matches_finite_differences(rng):
    # Implicit differentiation of the self-consistent marginal, checked against a central
    # difference of the likelihood itself (scipy's central differences as the reference).
    from switchlaw.calibration._fit import _Problem
    from switchlaw.calibration._data import Data

    densities = np.array([0.4, 0.5, 0.6])
    env = lambda r: switchlaw.occupancy(6, r)  # noqa: E731

    def payoff(bias):
        return np.column_stack([SIGNAL / 6.0, 1.0 - SIGNAL / 6.0 + bias])

    counts = np.stack([_simulate_states(rng, env(r).probs, np.full((7, 2), 1 / 2), 500) for r in densities])
    problem = _Problem(payoff, env, Data("states", counts, densities), ("beta", "bias"), {},
                       "min-information", None, has_params=True)
    theta = np.array([8.0, 0.05])
    # Both phenotypes are adopted at every density here (the marginal is interior).
    assert (problem.probabilities(theta)[1] > 0.05).all()
    _, grad = problem.log_likelihood(theta, with_gradient=True)
    # Central differences via scipy's approx_derivative ('3-point'): truncation error O(h^2).
    from scipy.optimize._numdiff import approx_derivative

    reference = approx_derivative(lambda t: problem.log_likelihood(t, with_gradient=False)[0], theta,
                                  method="3-point", rel_step=1e-5)
    np.testing.assert_allclose(grad, reference, rtol=1e-5)


# ----------------------------------------------------------------------------- recovery, coverage
def _coverage(rng, datasets, cells, objective):
    """Share of data sets whose 95% profile interval of beta covers the truth."""
    env = switchlaw.occupancy(6, 0.5)
    delta = (SIGNAL - 3.0) / 3.0
    table = np.column_stack([np.zeros(7), delta, 0.5 - delta])
    truth = 2.0
    if objective == "max-entropy":
        q = _softmax(truth * table)
    else:
        q = switchlaw.solve(table, env, truth).probs
    hits = 0
    for _ in range(datasets):
        counts = _simulate_states(rng, env.probs, q, cells)
        fit = calibrate(counts, table, env, free={"beta": (0.01, 20.0)}, objective=objective, starts=1)
        lo, hi = fit.intervals["beta"]
        hits += lo <= truth <= hi
    return hits


@pytest.mark.parametrize("objective", ["max-entropy", "min-information"])
def test_profile_intervals_cover_the_truth(objective):
    # Coverage of 95% profile intervals (Wilks 1938); the nominal rate must lie in the
    # Clopper-Pearson 99% interval of the observed rate (scipy.stats.binomtest).
    rng = np.random.default_rng(11)
    datasets = 40
    hits = _coverage(rng, datasets, 400, objective)
    ci = stats.binomtest(hits, datasets).proportion_ci(0.99, method="exact")
    print(f"{objective}: coverage {hits}/{datasets} = {hits / datasets:.3f}, 99% CI [{ci.low:.3f}, {ci.high:.3f}]")
    assert ci.low <= 0.95 <= ci.high


@pytest.mark.slow
@pytest.mark.parametrize("objective", ["max-entropy", "min-information"])
def test_profile_intervals_cover_the_truth_large_study(objective):
    rng = np.random.default_rng(12)
    datasets = 400
    hits = _coverage(rng, datasets, 400, objective)
    ci = stats.binomtest(hits, datasets).proportion_ci(0.99, method="exact")
    print(f"{objective}: coverage {hits}/{datasets} = {hits / datasets:.3f}, 99% CI [{ci.low:.3f}, {ci.high:.3f}]")
    assert ci.low <= 0.95 <= ci.high


def test_invented_colony_data_recover_their_parameters():
    # The demo's generator simulates from known parameters; each lies in its 95% interval.
    data = invented_colony_data(seed=1)
    fit = calibrate(data.counts, colony_payoff, colony_environment,
                    free={"beta": (0.1, 30.0), "half": (0.1, 10.0), "roam_value": (0.0, 1.0)},
                    densities=data.densities, starts=2)
    assert fit.converged
    for name, value in data.truth.items():
        lo, hi = fit.intervals[name]
        assert lo <= value <= hi, name
        assert fit.identifiable[name]
    assert "max-entropy law" in fit.verdict


def test_bootstrap_standard_error_matches_wald(rng):
    # Parametric bootstrap (Efron & Tibshirani 1993, ch. 6): its standard deviation
    # approximates the asymptotic (Wald) standard error; seeded, so repeatable.
    env, delta, counts = _logistic_data(rng, beta=1.0, cells=2000)
    fit = calibrate(counts, _delta_table(delta), env, free={"beta": (0.01, 20.0)}, bootstrap=150, seed=4)
    spread = fit.bootstrap_estimates[:, 0].std(ddof=1)
    assert spread == pytest.approx(fit.standard_errors["beta"], rel=0.2)
    again = calibrate(counts, _delta_table(delta), env, free={"beta": (0.01, 20.0)}, bootstrap=150, seed=4)
    np.testing.assert_array_equal(fit.bootstrap_estimates, again.bootstrap_estimates)


# ----------------------------------------------------------------------------- population
def test_population_verdict_follows_the_sign_of_growth_at_zero():
    # At density 0 every neighbour site is empty (y = 0), so the divide fraction is
    # logistic(beta * Δu(0)) and g(0) = f_divide(0) * b - d (domain notes §4): a closed form
    # for the sign of low-density growth at each beta across the interval.
    data = invented_colony_data(seed=1)
    fit = calibrate(data.counts, colony_payoff, colony_environment,
                    free={"beta": (0.1, 30.0), "half": (0.1, 10.0), "roam_value": (0.0, 1.0)},
                    densities=data.densities, starts=1)
    division, death = [1.0, 0.0], [0.04, 0.04]
    verdict = population_verdict(fit, division=division, death=death, samples=3)
    delta0 = 0.0 - fit.estimates["roam_value"]
    for beta, regime in zip(verdict.betas, verdict.regimes):
        g0 = 1.0 / (1.0 + math.exp(-beta * delta0)) * 1.0 - 0.04
        assert (regime == "strong-allee" or regime == "extinction") == (g0 < 0), (beta, regime)
    assert verdict.sentence.startswith(f"At the fitted beta = {fit.estimates['beta']:.4g}")


# ----------------------------------------------------------------------------- plots
def test_plots_draw_the_fit_and_the_profiles():
    matplotlib = pytest.importorskip("matplotlib")
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    data = invented_colony_data(seed=2, densities=[0.2, 0.5, 0.8], cells=300)
    fit = calibrate(data.counts, colony_payoff(2.0, 0.45), colony_environment,
                    free={"beta": (0.1, 30.0)}, densities=data.densities, starts=1)
    ax = switchlaw.plot_calibration(fit)
    assert len(ax.lines) == 4  # fitted and observed per phenotype
    ax = switchlaw.plot_profiles(fit, "beta")
    assert ax.lines[1].get_ydata()[0] == pytest.approx(CUTOFF)
    plt.close("all")


# ----------------------------------------------------------------------------- bad input
@pytest.mark.parametrize(
    "change, match",
    [
        ({"observations": -1}, "non-negative counts"),
        ({"observations": 0.5}, "whole-number counts"),
        ({"observations": np.nan}, "must not contain NaN"),
        ({"observations": "zeros"}, "at least one cell"),
        ({"free": {"beta": (0.1, 5.0), "gain": (0, 1)}}, "'gain', a parameter the payoff does not take"),
        ({"start": {"beta": 50.0}}, r"`start\['beta'\]` = 50.0 lies outside its bounds"),
        ({"free": {"beta": (5.0, 1.0)}}, "low < high"),
        ({"objective": "fastest"}, "objective"),
    ],
)
def test_bad_input_gets_one_line_naming_the_argument(change, match):
    env = switchlaw.occupancy(6, 0.5)
    counts = np.ones((7, 2))
    payoff = _delta_table(SIGNAL / 6.0 - 0.5)
    if "free" in change and "gain" in change["free"]:
        def payoff(bias=0.0):
            return _delta_table(SIGNAL / 6.0 - 0.5 + bias)
    if "observations" in change:
        value = change.pop("observations")
        if value == "zeros":
            counts = np.zeros((7, 2))
        else:
            counts[2, 1] = value
    options = {"free": {"beta": (0.1, 5.0)}, **change}
    with pytest.raises(InputError, match=match) as caught:
        calibrate(counts, payoff, env, **options)
    assert "\n" not in str(caught.value)


def test_bad_table_columns_are_named(tmp_path):
    pd = pytest.importorskip("pandas")
    env = lambda r: switchlaw.continuous_signal(stats.uniform(-3, 6), np.linspace(-3, 3, 7))  # noqa: E731
    payoff = {"a": lambda v: 0 * v, "b": lambda v: v}
    frame = pd.DataFrame({"phenotype": ["a", "c"], "signal": [0.1, 0.2], "density": [0.5, 0.5]})
    with pytest.raises(InputError, match="column 'phenotype' names unknown phenotype 'c'"):
        calibrate(frame, payoff, env, free={"beta": (0.1, 5.0)})
    frame = pd.DataFrame({"phenotype": ["a", "b"], "signal": [0.1, 7.5], "density": [0.5, 0.5]})
    with pytest.raises(InputError, match="column 'signal' holds 7.5, outside every bin"):
        calibrate(frame, payoff, env, free={"beta": (0.1, 5.0)})
    frame = pd.DataFrame({"phenotype": ["a", "b"], "signal": [0.1, 0.2], "colour": [1, 2]})
    with pytest.raises(InputError, match="column 'colour' is not one of"):
        calibrate(frame, payoff, env, free={"beta": (0.1, 5.0)})


def test_public_names():
    assert switchlaw.calibrate is calibrate
    assert "Calibration" in switchlaw.__all__ and "calibrate" in switchlaw.__all__


def test_study_section_helper_fits_the_invented_csv(tmp_path):
    # The helper a [calibration] study-file section calls: invented data written as a tidy CSV
    # next to the study, read back, fitted; the known parameters lie in their intervals.
    pd = pytest.importorskip("pandas")
    matplotlib = pytest.importorskip("matplotlib")
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from switchlaw.calibration import run_calibration_section

    data = invented_colony_data(seed=5)
    pd.DataFrame(data.rows()).to_csv(tmp_path / "cells.csv", index=False)
    section = {"data": "cells.csv", "free": {"beta": [0.1, 30.0], "half": [0.1, 10.0], "roam_value": [0.0, 1.0]},
               "starts": 2}
    out = run_calibration_section(section, payoff=colony_payoff, environment=colony_environment,
                                  phenotypes=data.phenotypes, base_dir=tmp_path,
                                  division=[1.0, 0.0], death=[0.27, 0.27])
    fit = out["calibration"]
    for name, value in data.truth.items():
        assert fit.intervals[name][0] <= value <= fit.intervals[name][1], name
    assert set(out["figures"]) == {"calibration_fit", "calibration_profiles"}
    assert out["population"].regime in switchlaw.REGIMES
    assert [row["parameter"] for row in out["table"]] == ["beta", "half", "roam_value"]
    with pytest.raises(InputError, match=r"`calibration.colour` is not a known key"):
        run_calibration_section({**section, "colour": 1}, payoff=colony_payoff, environment=colony_environment,
                                phenotypes=data.phenotypes, base_dir=tmp_path)
    with pytest.raises(InputError, match=r"`calibration.data` names no readable file"):
        run_calibration_section({**section, "data": "missing.csv"}, payoff=colony_payoff,
                                environment=colony_environment, phenotypes=data.phenotypes, base_dir=tmp_path)
    plt.close("all")


@pytest.mark.parametrize("draws", [pytest.param(600, marks=pytest.mark.slow), 150])
def test_posterior_agrees_with_the_large_sample_theory(rng, draws):
    # Bernstein-von Mises (e.g. van der Vaart 1998, Asymptotic Statistics, ch. 10): with many
    # cells and a flat prior the posterior is close to Normal(MLE, Wald se^2). Reference se
    # from statsmodels' GLM.
    sm = pytest.importorskip("statsmodels.api")
    env, delta, counts = _logistic_data(rng, beta=1.3, cells=20_000)
    fit = calibrate(counts, _delta_table(delta), env, free={"beta": (0.01, 20.0)}, posterior=draws, seed=3)
    glm = sm.GLM(
        np.r_[np.zeros(7), np.ones(7)], np.r_[delta, delta][:, None],
        family=sm.families.Binomial(), freq_weights=np.r_[counts[:, 0], counts[:, 1]],
    ).fit(tol=1e-14)
    sample = fit.posterior["beta"]
    assert sample.shape == (draws,)
    # Monte Carlo error shrinks with the draws: tolerances for 150 draws, tighter for 600.
    tolerance = 0.2 if draws >= 600 else 0.35
    assert sample.mean() == pytest.approx(glm.params[0], abs=tolerance * glm.bse[0])
    assert sample.std(ddof=1) == pytest.approx(glm.bse[0], rel=tolerance)
