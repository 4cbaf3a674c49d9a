"""Invasion fronts: linear spreading speed, the method-of-lines front and what a run measures."""

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq

import switchlaw as sl
from switchlaw.spatial._core import Grid, System, integrate
from switchlaw.spatial._linear import linear_speed
from switchlaw.spatial._measure import crossing, expected_plain_slope, fit_speed, log_correction

# Invented go-or-grow scenario (as in test_population): dividing pays in crowded
# neighbourhoods, moving when isolated.
GROW_WHEN_CROWDED = {"divide": sl.Linear(1 / 6, 0.0), "move": sl.Linear(-1 / 6, 1.0)}


def hexagonal(rho):
    return sl.occupancy(6, rho)


def twin(tau=None, r=0.8):
    """Two phenotypes with the same rates: the total density obeys Fisher–KPP with growth r."""
    return sl.MeanField(GROW_WHEN_CROWDED, hexagonal, division=[1.0, 1.0], death=[1 - r, 1 - r],
                        tau=tau, objective="max-entropy")


def go_or_grow(death=0.2, tau=None, division=(1.0, 0.0)):
    return sl.MeanField(GROW_WHEN_CROWDED, hexagonal, division=list(division), death=[death, death],
                        tau=tau, objective="max-entropy")


# ------------------------------------------------------------------ linear spreading speed
@pytest.mark.parametrize("tau", [None, 0.5])
def test_fisher_kpp_linear_speed(tau):
    # Fisher (1937); Kolmogorov, Petrovsky & Piskunov (1937): c* = 2 sqrt(r D), lambda* = sqrt(r / D).
    r, D = 0.8, 1.5
    found = sl.spreading_speed(twin(tau, r), 2.0, diffusion={"divide": D, "move": D})
    assert found.speed == pytest.approx(2 * math.sqrt(r * D), rel=1e-8)
    assert found.decay_rate == pytest.approx(math.sqrt(r / D), rel=1e-5)
    assert found.edge_fractions.sum() == pytest.approx(1.0)
    assert found.status == "ok"


def _go_or_grow_j0(r, a, b):
    # movers m, growers g: m' = -a m + b g, g' = r g + a m - b g (a: into growing, b: out of it).
    return np.array([[-a, b], [a, r - b]])


@pytest.mark.parametrize("rate", [0.05, 0.5, 3.0, 40.0])
def test_go_or_grow_equal_rates_reach_the_bound(rate):
    # Domain notes (front speeds; Lewis & Schmitz 1996 form, from memory): with equal switching
    # rates c* = sqrt(r D), at lambda* = sqrt(r / D) with movers and growers equally common.
    r, D = 1.0, 2.0
    c, l_star, edge = linear_speed(_go_or_grow_j0(r, rate, rate), [D, 0.0])
    assert c == pytest.approx(math.sqrt(r * D), rel=1e-8)
    assert l_star == pytest.approx(math.sqrt(r / D), rel=1e-4)
    assert edge == pytest.approx([0.5, 0.5], abs=1e-4)


def test_go_or_grow_bound_and_fast_switching_limit():
    # Domain notes: c* <= sqrt(r D) for any constant rates; as both rates grow at a fixed ratio
    # c* -> 2 sqrt(r D a b) / (a + b) (Lewis & Schmitz 1996 form, from memory).
    r, D = 1.0, 1.0
    for a in (0.1, 0.5, 2.0, 10.0):
        for b in (0.1, 0.7, 3.0):
            assert linear_speed(_go_or_grow_j0(r, a, b), [D, 0.0])[0] <= math.sqrt(r * D) * (1 + 1e-12)
    a, b = 1.0, 3.0
    scale = 1e4
    c = linear_speed(_go_or_grow_j0(r, scale * a, scale * b), [D, 0.0])[0]
    assert c == pytest.approx(2 * math.sqrt(r * D * a * b) / (a + b), rel=1e-3)


def test_go_or_grow_mean_field_with_a_flat_law():
    # Max-entropy at beta = 0 chooses each phenotype with probability 1/2 whatever the density,
    # so cells switch at equal constant rates 1 / (2 tau): the go-or-grow bound c* = sqrt(r D)
    # holds with equality (domain notes, front speeds).
    model = go_or_grow(death=0.0, tau=0.5)
    found = sl.spreading_speed(model, 0.0, diffusion=[0.0, 2.0])
    assert found.speed == pytest.approx(math.sqrt(1.0 * 2.0), rel=1e-8)
    assert found.edge_fractions == pytest.approx([0.5, 0.5], abs=1e-4)


def test_fast_switching_speed_is_kpp_with_averaged_rates():
    # Fast switching: rho_t = (D(rho) rho)_xx + rho g(rho) linearises to KPP with g(0) and
    # D(0) = sum_x f_x(0) D_x, so c* = 2 sqrt(g(0) D(0)) (Fisher 1937; KPP 1937).
    model = go_or_grow(death=0.2)
    f0 = model.fractions(0.0, 0.5)
    D = np.array([0.3, 1.0])
    found = sl.spreading_speed(model, 0.5, diffusion=D)
    g0 = model.growth(0.0, 0.5)
    assert found.speed == pytest.approx(2 * math.sqrt(g0 * (f0 @ D)), rel=1e-8)
    assert found.edge_fractions == pytest.approx(f0)


def test_strong_allee_has_no_linear_speed():
    # Domain notes: with a strong Allee effect zero density is stable: no linear speed.
    model = go_or_grow(death=0.2)
    assert model.regime(2.0) == "strong-allee"
    found = sl.spreading_speed(model, 2.0, diffusion=[1.0, 1.0])
    assert math.isnan(found.speed) and found.status == "stable-zero"
    assert "pushed" in found.note  # growth rises with density: linear determinacy not guaranteed


# ------------------------------------------------------------------ the numerical front core
def test_radial_laplacian_of_r_squared():
    # Vector calculus: the Laplacian of r^2 in d dimensions is 2 d (interior cells; the
    # finite-volume flux of r^2 is exact for a quadratic).
    for d in (1, 2, 3):
        grid = Grid(10.0, 0.1, d)
        lap = grid.laplacian() @ grid.centres**2
        np.testing.assert_allclose(lap[:-1], 2 * d, rtol=1e-9)


@pytest.mark.parametrize("theta", [0.1, 0.25, 0.4])
def test_bistable_cubic_front_speed(theta):
    # Hadeler & Rothe (1975): u_t = D u_xx + r u (1 - u)(u - theta) has a travelling front with
    # speed sqrt(2 r D) (1/2 - theta).
    r, D = 1.0, 1.0
    system = System(lambda u: r * u * (1 - u) * (u - theta),
                    lambda u: (r * (-3 * u**2 + 2 * (1 + theta) * u - theta))[:, :, None], np.array([D]))
    grid = Grid(60.0, 0.1)
    times = np.linspace(0.0, 60.0, 121)
    solution = integrate(system, grid, np.where(grid.centres < 10, 1.0, 0.0)[:, None], times, rtol=1e-7, atol=1e-10)
    positions = np.array([crossing(grid.centres, u[:, 0], 0.5) for u in solution.fields])
    late = times >= 30
    speed, _ = fit_speed(times[late], positions[late], 0.0)
    assert speed == pytest.approx(math.sqrt(2 * r * D) * (0.5 - theta), rel=5e-3)


# ------------------------------------------------------------------ simulate_front
def test_kpp_front_speed_and_ebert_van_saarloos_transient():
    # Fisher–KPP total density (two identical phenotypes): the fitted speed approaches
    # c* = 2 sqrt(r D), and the uncorrected late-window slope is what c* t - 3/(2 lambda*) log t
    # predicts (Ebert & van Saarloos 2000).
    r, D = 0.8, 1.0
    run = sl.simulate_front(twin(None, r), 2.0, diffusion=[D, D], length=150, dx=0.25, t_end=60)
    c_star = 2 * math.sqrt(r * D)
    assert run.kind == "pulled" and run.ok, run.message
    assert run.linear_speed == pytest.approx(c_star, rel=1e-8)
    assert run.speed == pytest.approx(c_star, rel=5e-3)
    late = (run.times >= run.window[0]) & (run.times <= run.window[1])
    predicted = expected_plain_slope(run.times[late], run.grid_linear_speed, log_correction(run.decay_rate))
    assert run.plain_speed == pytest.approx(predicted, rel=5e-3)
    assert run.plain_speed < c_star  # the transient is slower than c* (same source)
    assert run.width > 4 * 0.25
    np.testing.assert_allclose(run.bulk_fractions, twin().fractions(1 - (1 - r), 2.0), atol=1e-6)


def test_finite_tau_and_fast_switching_total_density_agree_for_identical_phenotypes():
    # With identical rates and diffusion the total density obeys the same Fisher–KPP equation
    # whatever tau (Fisher 1937): both formulations run at the same speed.
    fast = sl.simulate_front(twin(None), 2.0, diffusion=[1.0, 1.0], length=120, dx=0.25, t_end=50)
    slow = sl.simulate_front(twin(0.5), 2.0, diffusion=[1.0, 1.0], length=120, dx=0.25, t_end=50)
    np.testing.assert_allclose(fast.density, slow.density, atol=2e-4)
    assert fast.speed == pytest.approx(2 * math.sqrt(0.8), rel=1e-2)


def test_go_or_grow_front_runs_at_the_bound():
    # Equal constant switching rates (max-entropy, beta = 0): c* = sqrt(r D) (domain notes).
    run = sl.simulate_front(go_or_grow(death=0.0, tau=0.5), 0.0, diffusion=[0.0, 1.0],
                            length=100, dx=0.25, t_end=60)
    assert run.kind == "pulled", run.message
    assert run.speed == pytest.approx(1.0, rel=1.5e-2)
    assert run.linear_speed == pytest.approx(1.0, rel=1e-8)


def _bistable_sign(model, beta):
    # Scalar bistable equation rho_t = rho_xx + R(rho): the front advances iff the integral of
    # R from 0 to the stable state is positive (Aronson & Weinberger 1975; from memory).
    top = max(e.density for e in model.equilibria(beta)[1:] if e.stable)
    return quad(lambda r: r * model.growth(r, beta), 0.0, top, epsabs=1e-14)[0]


def test_strong_allee_fronts_advance_stall_and_retreat_as_the_area_rule_says():
    beta = 2.0
    stall = brentq(lambda d: _bistable_sign(go_or_grow(death=d), beta), 0.22, 0.24, xtol=1e-10)
    kinds = {}
    for death in (0.2, stall, 0.24):
        model = go_or_grow(death=death)
        run = sl.simulate_front(model, beta, diffusion=[1.0, 1.0], length=100, dx=0.25, t_end=100, occupied=40)
        kinds[round(death, 4)] = run.kind
        assert math.isnan(run.linear_speed)
        if death == 0.2:
            assert run.speed > 0 and run.kind == "pushed" and run.ok, run.message
        elif death == 0.24:
            assert run.speed < 0 and run.kind == "retreating"
        else:
            assert run.kind == "stalled" and abs(run.speed) < 2e-3, run
    assert len(kinds) == 3


@pytest.mark.parametrize("dimension", [2, 3])
def test_radial_kpp_front(dimension):
    # Radially symmetric Fisher–KPP: R(t) = c* t - (d + 2)/(2 lambda*) log t + ... (Gärtner 1982,
    # from memory), so the corrected fit returns c* = 2 sqrt(r D).
    run = sl.simulate_front(twin(None, 1.0), 2.0, diffusion=[1.0, 1.0], length=120, dx=0.25,
                            t_end=50, dimension=dimension)
    assert run.kind == "pulled", run.message
    assert run.speed == pytest.approx(2.0, rel=1e-2)


def test_front_to_xarray():
    run = sl.simulate_front(twin(None), 2.0, diffusion=[1.0, 1.0], length=60, dx=0.25, t_end=20, frames=41)
    data = run.to_xarray()
    assert data["density"].dims == ("time", "x", "phenotype")
    assert list(data["phenotype"].values) == ["divide", "move"]
    assert data.attrs["kind"] == run.kind
    # Compartments sum to the total density the position was read from (a crossing at 0.5 x bulk).
    i = -1
    total = data["density"].sum("phenotype").values[i]
    assert np.interp(run.positions[i], run.x, total) == pytest.approx(0.5 * run.bulk_density, rel=1e-2)


# ------------------------------------------------------------------ bad input
@pytest.mark.parametrize("options, pattern", [
    (dict(diffusion=[-1.0, 1.0]), r"`diffusion` coefficients must be >= 0; 'divide' has -1\.0"),
    (dict(diffusion=[0.0, 0.0]), r"`diffusion` must be positive for at least one phenotype"),
    (dict(diffusion={"divide": 1.0, "walk": 1.0}), r"`diffusion` names unknown phenotype\(s\) \['walk'\]"),
    (dict(diffusion=[1.0]), r"`diffusion` must have one coefficient per phenotype \(2"),
    (dict(dx=2.0), r"`dx` = 2 is too coarse for the front: .*use dx <= "),
    (dict(length=40.0), r"`length` = 40 is too short for the run: .*use length >= "),
    (dict(dimension=4), r"`dimension` must be one of \(1, 2, 3\)"),
    (dict(dx=float("nan")), r"`dx`"),
    (dict(frames=5), r"`frames` must be an integer >= 20 \(got 5\)"),
    (dict(level=1.5), r"`level` must lie strictly between 0 and 1"),
    (dict(occupied=200.0), r"`occupied` must be shorter than `length`"),
])
def test_bad_front_input(options, pattern):
    arguments = dict(diffusion=[1.0, 1.0], length=150.0, dx=0.25, t_end=60.0) | options
    with pytest.raises(sl.InputError, match=pattern):
        sl.simulate_front(twin(None), 2.0, **arguments)


def test_model_must_be_a_mean_field():
    with pytest.raises(sl.InputError, match=r"`model` must be a MeanField \(got dict\)"):
        sl.spreading_speed({}, 1.0, diffusion=[1.0])


def test_no_motility_at_low_density_gives_zero_linear_speed():
    # Growers do not move and only growers are present at zero density (fast switching):
    # s(l)/l = s0/l has infimum 0 (Fisher 1937 with D = 0).
    model = sl.MeanField({"grow": sl.Linear(0.0, 1.0), "move": sl.Linear(0.0, 0.0)}, hexagonal,
                         division=[1.0, 0.0], death=[0.2, 0.2])
    assert model.fractions(0.0, 5.0).tolist() == [1.0, 0.0]  # min-information: all grow
    found = sl.spreading_speed(model, 5.0, diffusion=[0.0, 1.0])
    assert found.speed == 0.0 and found.decay_rate == math.inf


def test_ill_posed_fast_switching_transport_is_refused():
    # D(rho) rho falling with density is backward diffusion (ill-posed); a finite tau is fine.
    with pytest.raises(sl.InputError, match=r"backward diffusion.*finite `tau`"):
        sl.simulate_front(go_or_grow(death=0.2), 3.0, diffusion=[0.2, 1.0], length=200, dx=0.25, t_end=150)


def test_short_run_is_reported():
    run = sl.simulate_front(twin(None), 2.0, diffusion=[1.0, 1.0], length=150.0, dx=0.25, t_end=5.0)
    assert run.status == "short" and not run.ok
    assert "`t_end` = 5 is too short to fit a speed" in run.message and "use t_end >= 12.5" in run.message


def test_far_boundary_is_reported():
    # A pushed front (no linear speed to plan the domain with) that reaches the far end says so.
    run = sl.simulate_front(go_or_grow(death=0.2), 2.0, diffusion=[1.0, 1.0], length=30, dx=0.25,
                            t_end=200, occupied=20)
    assert run.status == "boundary" and not run.ok
    assert "far boundary" in run.message and run.boundary_time < 200


# ------------------------------------------------------------------ independent PDE package
@pytest.mark.slow
def test_front_agrees_with_py_pde():
    # py-pde (a general-purpose PDE package) on the same equation and grid: the go-or-grow
    # model with the max-entropy law written out in closed form (Binomial(6, rho) occupancy,
    # q(divide | y) = 1 / (1 + exp(-beta (y/3 - 1)))), its adaptive Runge-Kutta 5(4) solver.
    import pde  # in the `test` extra
    beta, tau, death, length, dx, t_end = 1.5, 0.5, 0.1, 100.0, 0.25, 40.0
    model = sl.MeanField(GROW_WHEN_CROWDED, hexagonal, division=[1.0, 0.0], death=[death, death],
                         tau=tau, objective="max-entropy")
    run = sl.simulate_front(model, beta, diffusion=[0.0, 1.0], length=length, dx=dx, t_end=t_end, rtol=1e-8)
    f = " + ".join(
        f"{math.comb(6, y) / (1 + math.exp(-beta * (y / 3 - 1)))!r} * (g + m)**{y} * (1 - g - m)**{6 - y}"
        for y in range(7))
    equation = pde.PDE({
        "g": f"(1 - g - m) * g - {death} * g + ((g + m) * ({f}) - g) / {tau}",
        "m": f"laplace(m) - {death} * m + ((g + m) * (1 - ({f})) - m) / {tau}",
    })
    grid = pde.CartesianGrid([[0.0, length]], int(length / dx))
    state = pde.FieldCollection([pde.ScalarField(grid, run.profiles[0, :, k]) for k in range(2)])
    final = equation.solve(state, t_range=t_end, solver="runge-kutta", adaptive=True, tolerance=1e-8,
                           tracker=None, backend="numpy")
    total = final[0].data + final[1].data
    np.testing.assert_allclose(run.density[-1], total, atol=1e-4)
    assert crossing(run.x, total, 0.5 * run.bulk_density) == pytest.approx(run.positions[-1], abs=0.01)


# ------------------------------------------------------------------ scans
def test_front_summary_in_a_beta_scan():
    # Identical phenotypes: whatever the law, the total density obeys Fisher–KPP, so every
    # point runs at 2 sqrt(r D) (Fisher 1937; KPP 1937).
    function = sl.FrontSummary(twin(None), diffusion=[1.0, 1.0], length=100.0, dx=0.25, t_end=40.0)
    data = sl.scan(function, {"beta": [0.5, 3.0]}, progress=False)
    np.testing.assert_allclose(data["linear_speed"].values, 2 * math.sqrt(0.8), rtol=1e-8)
    np.testing.assert_allclose(data["front_speed"].values, 2 * math.sqrt(0.8), rtol=1e-2)
    assert list(data["front_kind"].values) == ["pulled", "pulled"]
    assert data["edge_fraction"].dims == ("beta", "phenotype")
    np.testing.assert_allclose(data["edge_fraction"].sum("phenotype").values, 1.0)


# ------------------------------------------------------------------ plots
def test_front_plots_draw_the_run():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    run = sl.simulate_front(twin(None), 2.0, diffusion=[1.0, 1.0], length=60, dx=0.25, t_end=20, frames=41)
    axes = sl.plot_front_profiles(run, times=[0.0, 10.0, 20.0])
    assert len(axes) == 2 and len(axes[0].get_lines()) == 3
    np.testing.assert_allclose(axes[1].get_lines()[-1].get_ydata(), run.profiles[-1, :, 1])
    ax = sl.plot_front_position(run)
    np.testing.assert_allclose(ax.get_lines()[0].get_ydata(), run.positions)
    dashed = ax.get_lines()[1]
    slope = np.polyfit(dashed.get_xdata(), dashed.get_ydata(), 1)[0]
    assert slope == pytest.approx(2 * math.sqrt(0.8))  # c* of Fisher–KPP
    ax = sl.plot_front_speeds([run])
    assert [line.get_label() for line in ax.get_lines()][:2] == ["linear speed c*", run.kind]
    plt.close("all")


def test_front_study_runs_and_scan():
    # Identical phenotypes (Fisher–KPP whatever the law): every beta runs at 2 sqrt(r D).
    study = sl.front_study(twin(None), diffusion={"divide": 1.0, "move": 1.0}, length=100.0, dx=0.25,
                           t_end=40.0, betas=[1.0], scan={"start": 0.5, "stop": 3.0, "points": 3})
    assert len(study.runs) == 1 and study.runs[0].kind == "pulled"
    np.testing.assert_allclose(study.scan.speeds, 2 * math.sqrt(0.8), rtol=1e-2)
    summary = study.summary()
    assert summary["scan"]["kind"] == ["pulled"] * 3
    assert set(summary["runs"][0]["edge_fractions"]) == {"divide", "move"}
    assert study.scan.to_xarray()["front_speed"].dims == ("beta",)
    with pytest.raises(sl.InputError, match=r"`front.scan` must have keys start, stop, points"):
        sl.front_study(twin(None), diffusion=[1.0, 1.0], length=100.0, dx=0.25, t_end=40.0,
                       betas=[1.0], scan={"start": 0.5, "stop": 3.0})


def test_leading_edge_composition_is_the_linear_eigenvector():
    # Ahead of a pulled front the population is the principal eigenmode of the linearisation at
    # lambda* (Weinberger, Lewis & Li 2002; van Saarloos 2003): the measured edge composition
    # matches the eigenvector of spreading_speed.
    model = go_or_grow(death=0.1, tau=0.5)
    linear = sl.spreading_speed(model, 1.5, diffusion=[0.0, 1.0])
    run = sl.simulate_front(model, 1.5, diffusion=[0.0, 1.0], length=120.0, dx=0.2, t_end=100.0)
    assert run.kind == "pulled" and run.ok, run.message
    np.testing.assert_allclose(run.edge_fractions, linear.edge_fractions, atol=5e-3)
    assert run.speed == pytest.approx(linear.speed, rel=1.5e-2)


# ------------------------------------------------------------------ lattice fronts
def test_lattice_front_is_slower_than_its_continuum_bound():
    # One phenotype dividing into free neighbour sites (rate b) and hopping (rate m), no death:
    # the population invades (Fisher–KPP growth), and a front of discrete cells runs below the
    # continuum pulled speed 2 sqrt(b D) with D = (m + b) / 4 counting both the hops and the
    # daughters' displacement (Brunet & Derrida 1997: a cutoff slows pulled fronts).
    b, m = 1.0, 8.0
    agents = sl.LatticeModel(sl.Lattice((16, 120), "von-neumann", "closed"), division=[b], death=[0.0],
                             motility=[m])
    front = sl.lattice_front(agents, t_end=12.0, seed=3, strip=6, replicates=4, frames=25)
    assert front.status == "ok", front.message
    assert 0.0 < front.speed < 2 * math.sqrt(b * (m + b) / 4)
    again = sl.lattice_front(agents, t_end=12.0, seed=3, strip=6, replicates=4, frames=25)
    np.testing.assert_array_equal(front.positions, again.positions)  # the seed fixes the run


def test_lattice_front_continuum_value_beside_it():
    law = sl.derive_law(GROW_WHEN_CROWDED, lambda rho: sl.occupancy(4, rho),
                        densities=np.linspace(0, 1, 101), beta=1.0, objective="max-entropy")
    agents = sl.LatticeModel(sl.Lattice((6, 100), "von-neumann", "closed"), division=[1.0, 0.0],
                             death=[0.1, 0.1], motility=[0.0, 4.0], law=law, tau=0.5)
    field = sl.MeanField(GROW_WHEN_CROWDED, lambda rho: sl.occupancy(4, rho), division=[1.0, 0.0],
                         death=[0.1, 0.1], tau=0.5, objective="max-entropy")
    front = sl.lattice_front(agents, t_end=30.0, seed=1, mean_field=field, beta=1.0, frames=21)
    # Motility 4 on a von Neumann lattice is diffusion 1 (mean square jump 1, over 2 x 2 dimensions).
    np.testing.assert_allclose(front.diffusion, [0.0, 1.0])
    assert front.continuum_linear_speed == pytest.approx(
        sl.spreading_speed(field, 1.0, diffusion=[0.0, 1.0]).speed)
    assert np.isfinite(front.speed) and np.isfinite(front.continuum_speed)
    with pytest.raises(sl.InputError, match=r"boundary='closed'"):
        sl.lattice_front(sl.LatticeModel(sl.Lattice((6, 100)), division=[1.0], death=[0.0], motility=[1.0]),
                         t_end=1.0, seed=0)


def test_one_phenotype_logistic_growth_is_fisher_kpp():
    # One phenotype, logistic growth r = b - d: c* = 2 sqrt(r D) (Fisher 1937; KPP 1937).
    model = sl.MeanField({"grow": sl.Linear(0.0, 1.0)}, hexagonal, division=[1.0], death=[0.2])
    run = sl.simulate_front(model, 1.0, diffusion=[1.0], length=150, dx=0.25, t_end=60)
    assert run.kind == "pulled" and run.ok, run.message
    assert run.speed == pytest.approx(2 * math.sqrt(0.8), rel=5e-3)
    assert run.edge_fractions == pytest.approx([1.0])


def test_coarse_grid_for_a_pushed_front_is_reported():
    # No linear speed to size the grid in advance: the run reports a front core under 3 cells
    # and the spacing to use (common practice, no source: resolve the core with several cells).
    run = sl.simulate_front(go_or_grow(death=0.2), 2.0, diffusion=[1.0, 1.0], length=100, dx=2.0,
                            t_end=100, occupied=40)
    assert run.status == "coarse" and not run.ok
    assert "use dx <= " in run.message


def _shooting_speed(model, beta, D, c_max=1.0, bisections=22):
    # Travelling wave D U'' + c U' + R(U) = 0 from the bulk state to 0: the heteroclinic orbit
    # between the two saddles of the phase plane, found by shooting along the bulk's unstable
    # manifold and bisecting on c (textbook phase-plane method, e.g. Murray, Mathematical
    # Biology I, ch. 13; scipy's solve_ivp as the integrator, independent of the PDE code).
    from scipy.integrate import solve_ivp

    top = max(e.density for e in model.equilibria(beta)[1:] if e.stable)

    def R(u):
        return u * model.growth(min(max(u, 0.0), 1.0), beta)

    slope = (R(top + 1e-6) - R(top - 1e-6)) / 2e-6

    def overshoots(c):
        mu = (-c + math.sqrt(c * c - 4 * D * slope)) / (2 * D)

        def empty(_, z):
            return z[0]

        def turns(_, z):
            return z[1]

        empty.terminal = turns.terminal = True
        turns.direction = 1
        path = solve_ivp(lambda _, z: [z[1], -(c * z[1] + R(z[0])) / D], (0.0, 500.0),
                         [top - 1e-6, -1e-6 * mu], events=[empty, turns], rtol=1e-10, atol=1e-13)
        return path.t_events[0].size > 0

    lo, hi = 0.0, c_max
    for _ in range(bisections):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if overshoots(mid) else (lo, mid)
    return 0.5 * (lo + hi)


def test_pushed_front_speed_matches_the_travelling_wave():
    # Strong Allee effect (no linear speed): the fast-switching front is pushed, and its speed
    # is that of the travelling-wave solution found independently by phase-plane shooting.
    model = go_or_grow(death=0.2)
    run = sl.simulate_front(model, 2.0, diffusion=[1.0, 1.0], length=100, dx=0.25, t_end=100, occupied=40)
    assert run.kind == "pushed" and run.ok, run.message
    assert run.speed == pytest.approx(_shooting_speed(model, 2.0, 1.0), rel=5e-3)


@pytest.mark.slow
@pytest.mark.parametrize("dimension", [2, 3])
def test_radial_front_agrees_with_py_pde(dimension):
    # py-pde's polar and spherical grids (cell-centred, symmetric at the origin) on radial
    # Fisher–KPP u_t = Lap u + u (1 - u): same front position at t_end.
    import pde  # in the `test` extra

    length, dx, t_end = 60.0, 0.25, 20.0
    run = sl.simulate_front(twin(None, 1.0), 2.0, diffusion=[1.0, 1.0], length=length, dx=dx, t_end=t_end,
                            dimension=dimension, rtol=1e-8)
    grid = (pde.PolarSymGrid if dimension == 2 else pde.SphericalSymGrid)(length, int(length / dx))
    state = pde.ScalarField(grid, run.density[0])
    final = pde.PDE({"u": "laplace(u) + u * (1 - u)"}).solve(
        state, t_range=t_end, solver="runge-kutta", adaptive=True, tolerance=1e-8, tracker=None, backend="numpy")
    np.testing.assert_allclose(run.density[-1], final.data, atol=1e-4)
    assert crossing(run.x, final.data, 0.5) == pytest.approx(run.positions[-1], abs=0.01)
