"""Sensitivity: Sobol' indices on the Ishigami function, and local derivatives of equilibria
and critical betas (implicit function theorem) against closed forms and finite differences."""

import math

import numpy as np
import pytest
from scipy.optimize import brentq, minimize_scalar

import switchlaw as sl
from switchlaw import analysis as sa

# Ishigami & Homma (1990), the standard test of global sensitivity methods.
A, B = 7.0, 0.1
BOUNDS = {"x1": (-math.pi, math.pi), "x2": (-math.pi, math.pi), "x3": (-math.pi, math.pi)}


def ishigami(x):
    return np.sin(x[..., 0]) + A * np.sin(x[..., 1]) ** 2 + B * x[..., 2] ** 4 * np.sin(x[..., 0])


def ishigami_point(point, rng):
    return {"y": float(ishigami(np.array([point["x1"], point["x2"], point["x3"]])))}


def ishigami_indices():
    """Closed-form first- and total-order indices (Ishigami & Homma 1990; Sobol' & Levitan
    1999): partial variances V1 = (1 + b pi^4 / 5)^2 / 2, V2 = a^2 / 8,
    V13 = 8 b^2 pi^8 / 225, V3 = 0, and V = a^2/8 + b pi^4/5 + b^2 pi^8/18 + 1/2."""
    v1 = 0.5 * (1 + B * math.pi**4 / 5) ** 2
    v2 = A**2 / 8
    v13 = 8 * B**2 * math.pi**8 / 225
    v = A**2 / 8 + B * math.pi**4 / 5 + B**2 * math.pi**8 / 18 + 0.5
    return np.array([v1, v2, 0.0]) / v, np.array([v1 + v13, v2, v13]) / v


def test_sobol_indices_of_the_ishigami_function():
    first, total = ishigami_indices()
    # The four-digit values usually quoted (Ishigami & Homma 1990; quoted from memory):
    # S = 0.3139, 0.4424, 0 and ST = 0.5576, 0.4424, 0.2437.
    assert first == pytest.approx([0.3139, 0.4424, 0.0], abs=1e-4)
    assert total == pytest.approx([0.5576, 0.4424, 0.2437], abs=1e-4)
    design = sa.saltelli_design(BOUNDS, 2**14, seed=1)
    result = sa.sobol_indices(ishigami(design.values), design, seed=2)
    # Tolerance: 3 bootstrap standard errors. These are Monte Carlo errors (order 1/sqrt(N),
    # about 0.01 at N = 2^14), conservative for quasi-random points, whose error falls faster.
    assert result.first_order_error.max() < 0.02 and result.total_order_error.max() < 0.02
    assert (np.abs(result.first_order - first) < 3 * result.first_order_error).all()
    assert (np.abs(result.total_order - total) < 3 * result.total_order_error).all()
    assert result.names == ("x1", "x2", "x3")
    labelled = result.to_xarray()
    assert labelled["total_order"].sel(parameter="x3") == pytest.approx(total[2], abs=0.03)


def test_sobol_indices_over_a_scan_of_the_design():
    design = sa.saltelli_design(BOUNDS, 2**8, seed=4)
    ds = sa.scan(ishigami_point, design, progress=False)
    assert ds.attrs["design"] == "saltelli" and ds.attrs["base_samples"] == 2**8
    np.testing.assert_allclose(ds["y"].values, ishigami(design.values), rtol=0, atol=1e-12)
    from_scan = sa.sobol_indices(ds["y"], design)
    direct = sa.sobol_indices(ishigami(design.values), design)
    np.testing.assert_allclose(from_scan.first_order, direct.first_order, rtol=0, atol=1e-12)
    np.testing.assert_allclose(from_scan.total_order, direct.total_order, rtol=0, atol=1e-12)


# ------------------------------------------------------------------ local derivatives
PAYOFF = {"divide": sl.Linear(1 / 6, 0.0), "move": sl.Linear(-1 / 6, 1.0)}  # invented scenario


def hexagonal(rho):
    return sl.occupancy(6, rho)


def table_payoff(bump=None, step=0.0):
    """PAYOFF as a callable table, optionally with ``step * bump`` added at every density."""
    def payoff(env):
        k = env.values
        table = np.column_stack([k / 6, 1 - k / 6])
        return table if bump is None else table + step * bump
    return payoff


def model(death=(0.27, 0.27), division=(1.0, 0.0), tau=None, objective="max-entropy", payoff=PAYOFF):
    return sl.MeanField(payoff, hexagonal, division=list(division), death=list(death),
                        objective=objective, tau=tau)


def root_near(mf, beta, rho, width=0.02):
    width = min(width, rho / 2)
    return brentq(lambda r: mf.reduced(r, beta), rho - width, min(rho + width, 1.0), xtol=1e-14)


def central(f, h):
    return (f(h) - f(-h)) / (2 * h)


@pytest.mark.parametrize(
    "objective, beta, tau",
    [("max-entropy", 1.0, None), ("min-information", 3.0, None), ("max-entropy", 1.0, 0.5),
     ("min-information", 3.0, 0.5)],
)
def test_equilibrium_derivatives_match_finite_differences(objective, beta, tau):
    base = dict(objective=objective, tau=tau)
    mf = model(**base)
    h = 1e-5
    interior = [e.density for e in mf.equilibria(beta)[1:] if e.density < 0.7]
    assert interior
    bump = np.zeros((7, 2))
    bump[3, 0] = 1.0
    for rho in interior:
        result = sa.equilibrium_sensitivity(mf, beta, rho)
        checks = {
            "beta": (result.d_density_d_beta, lambda t: root_near(model(**base), beta + t, rho)),
            "death of dividers": (result.d_density_d_death[0],
                                  lambda t: root_near(model(death=(0.27 + t, 0.27), **base), beta, rho)),
            "division of dividers": (result.d_density_d_division[0],
                                     lambda t: root_near(model(division=(1.0 + t, 0.0), **base), beta, rho)),
            "payoff u(3, divide)": (result.d_density_d_payoff[3, 0],
                                    lambda t: root_near(model(payoff=table_payoff(bump, t), **base), beta, rho)),
        }
        if tau is not None:
            checks["tau"] = (result.d_density_d_tau,
                             lambda t: root_near(model(objective=objective, tau=tau + t), beta, rho))
        for name, (value, equilibrium) in checks.items():
            assert value == pytest.approx(central(equilibrium, h), rel=1e-6, abs=1e-8), name
    if tau is None:
        assert math.isnan(result.d_density_d_tau)


def test_transcritical_beta_derivatives_match_the_closed_form():
    # Max-entropy law at zero density: q(divide) = 1 / (1 + e^beta) (no occupied neighbours),
    # g(0) = q (b - d1) - (1 - q) d2 = 0 gives beta_T = ln((b - d1) / d2) (derived from domain
    # notes §2 and §4), so d beta_T / d d1 = -1/(b - d1), d/d d2 = -1/d2, d/d b = 1/(b - d1);
    # and beta_T Du(0) is fixed, with Du(0) = u(0, divide) - u(0, move) = -1, so
    # d beta_T / d u(0, divide) = beta_T and d / d u(0, move) = -beta_T.
    b, d1, d2 = 1.0, 0.2, 0.3
    mf = model(death=(d1, d2))
    (point,) = [c for c in mf.critical_betas(0.05, 6.0) if c.kind == "transcritical"]
    beta_t = math.log((b - d1) / d2)
    assert point.beta == pytest.approx(beta_t, abs=1e-9)
    result = sa.critical_sensitivity(mf, point)
    assert result.d_beta_d_death == pytest.approx([-1 / (b - d1), -1 / d2], rel=1e-9)
    assert result.d_beta_d_division[0] == pytest.approx(1 / (b - d1), rel=1e-9)
    assert result.d_beta_d_payoff[0] == pytest.approx([beta_t, -beta_t], rel=1e-9)
    assert np.abs(result.d_beta_d_payoff[1:]).max() == 0.0


def test_fold_beta_derivative_matches_finite_differences():
    # Independent fold location: the maximum of g over density crosses zero (as in the
    # population tests), found by Brent's method for perturbed death rates.
    mf = model(death=(0.27, 0.27))
    fold = [c for c in mf.critical_betas(0.05, 20.0) if c.kind == "fold"][0]
    result = sa.critical_sensitivity(mf, fold)

    def fold_beta(t):
        perturbed = model(death=(0.27 + t, 0.27))

        def peak(beta):
            lo, hi = max(fold.density - 0.05, 1e-6), fold.density + 0.05
            best = minimize_scalar(lambda r: -perturbed.growth(r, beta), bounds=(lo, hi),
                                   method="bounded", options={"xatol": 1e-12})
            return -best.fun

        return brentq(peak, fold.beta - 0.05, fold.beta + 0.05, xtol=1e-13)

    assert result.d_beta_d_death[0] == pytest.approx(central(fold_beta, 1e-4), rel=1e-4)


@pytest.mark.parametrize(
    "call, pattern",
    [
        (lambda: sa.equilibrium_sensitivity(model(), 1.0, 0.2), r"`density` 0\.2 is not an equilibrium at beta 1\.0"),
        (lambda: sa.equilibrium_sensitivity(model(), 1.0, 0.0), r"`density` must be a positive equilibrium in \(0, 1\]"),
        (lambda: sa.equilibrium_sensitivity("model", 1.0, 0.5), r"`model` must be a MeanField \(got str\)"),
        (lambda: sa.critical_sensitivity(model(), 1.2), r"`point` must be a transcritical point or fold located in beta"),
        (lambda: sa.sobol_indices(np.zeros(5), sa.saltelli_design(BOUNDS, 4)), r"`values` must hold one scalar per design point \(20\) \(got shape \(5,\)\)"),
        (lambda: sa.sobol_indices(np.zeros(8), sa.sobol_points(BOUNDS, 8)), r"`design` must be the Design from saltelli_design"),
        (lambda: sa.sobol_indices(np.ones(20), sa.saltelli_design(BOUNDS, 4)), r"`values` do not vary over the design"),
    ],
)
def test_bad_input_messages(call, pattern):
    with pytest.raises(sl.InputError, match=pattern):
        call()
