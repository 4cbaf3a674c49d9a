"""Exports read by general-purpose clients at any size and step: scipy.linalg.expm for step
tables, a C compiler for code, COPASI (copasi-basico) and libroadrunner for SBML at many grid
sizes, gillespy2 and libroadrunner's Gillespie integrator for the count-based SBML, and
cf-units (UDUNITS-2) for netCDF units."""

import json
import math
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from scipy import linalg

import switchlaw as sl
from switchlaw.exporters import export, read_table

# Invented go-or-grow scenario (as in test_export.py): dividing pays in crowded
# neighbourhoods, moving when isolated; hexagonal lattice.
GROW_WHEN_CROWDED = {"divide": sl.Linear(1 / 6, 0.0), "move": sl.Linear(-1 / 6, 1.0)}
# Invented three-phenotype variant: a resting phenotype that pays a little everywhere.
THREE = {**GROW_WHEN_CROWDED, "rest": sl.Linear(0.0, 0.3)}


def hexagonal(rho):
    return sl.occupancy(6, rho)


@pytest.fixture(scope="module")
def law():
    return sl.derive_law(GROW_WHEN_CROWDED, hexagonal, densities=np.linspace(0, 1, 11), beta=3.0)


@pytest.fixture(scope="module")
def three_law():
    return sl.derive_law(THREE, hexagonal, densities=np.linspace(0, 1, 6), beta=8.0)


# ---------------------------------------------------------------------------- step tables
RATIOS = [10.0 ** e for e in range(-6, 7)] + [37.5, 40.0, 745.0]


@pytest.mark.parametrize("ratio", RATIOS)
def test_step_probabilities_are_the_matrix_exponential_at_any_step(law, three_law, ratio):
    # Re-deciding at rate 1/tau and drawing j ~ q(.|y) is the generator K = (1 q^T - I) / tau;
    # the transition matrix over dt is expm(K dt) (Norris, Markov Chains, 1997, Thm 2.1.1),
    # computed here by scipy.linalg.expm.
    tau = 1.7
    dt = ratio * tau
    for source in (law, three_law):
        for rho in (0.0, 0.35, 1.0):
            steps = source.step_probabilities(dt, tau, rho)
            q = source.probs(rho)
            n = q.shape[1]
            assert (steps >= 0.0).all() and (steps <= 1.0).all()
            np.testing.assert_allclose(steps.sum(axis=2), 1.0, rtol=0, atol=1e-14)
            for y in range(q.shape[0]):
                generator = (np.outer(np.ones(n), q[y]) - np.eye(n)) / tau
                np.testing.assert_allclose(steps[y], linalg.expm(dt * generator), rtol=1e-9, atol=1e-14)


@pytest.mark.parametrize("ratio", [1e-6, 37.5, 1e6])
def test_step_table_exports_at_any_step(law, ratio, tmp_path):
    tau = 2.0
    export(law, tmp_path / "steps.csv", format="step-table", dt=ratio * tau, tau=tau)
    table = read_table(tmp_path / "steps.csv")
    steps = table["step_probability"].values
    assert (steps >= 0).all()
    np.testing.assert_allclose(steps.sum(axis=3), 1.0, rtol=0, atol=1e-14)
    if ratio >= 37.5:
        # exp(-dt/tau) is below 1e-16: a cell has re-decided, so every row is q(. | y)
        # (the limit of expm(K dt), Norris 1997 Thm 3.6.2).
        for k, rho in enumerate(law.densities):
            np.testing.assert_allclose(steps[k], np.repeat(law.probs(rho)[:, None, :], 2, axis=1),
                                       rtol=0, atol=1e-15)


# ---------------------------------------------------------------------------------- code
@pytest.fixture(scope="module")
def wild_hill(law):
    # Invented parameters: a Hill curve from -0.2 to 1.3, which leaves [0, 1] at both ends.
    import dataclasses

    fit = sl.fit_formula(law, "divide", kind="hill")
    return dataclasses.replace(fit, parameters={"low": np.array(-0.2), "high": np.array(1.3),
                                                "half": np.array(2.0), "n": np.array(3.0)})


SIGNALS = np.array([0.0, 0.5, 1.0, 1.5, 2.0, 3.0, 6.0, 60.0])


def test_python_code_stays_a_probability(wild_hill, tmp_path):
    export(wild_hill, tmp_path / "fit.py")
    namespace = {}
    exec(compile((tmp_path / "fit.py").read_text(encoding="utf-8"), "fit.py", "exec"), namespace)
    got = np.array([namespace["q_divide"](float(v)) for v in SIGNALS])
    # The Hill formula itself, written out here: low + (high - low) v^n / (half^n + v^n).
    hill = -0.2 + 1.5 * SIGNALS**3 / (2.0**3 + SIGNALS**3)
    assert hill.min() < 0 and hill.max() > 1  # the raw curve leaves [0, 1] ...
    np.testing.assert_allclose(got, np.clip(hill, 0.0, 1.0), rtol=1e-14, atol=0)  # ... the export does not


def test_c_header_is_guarded_and_stays_a_probability(wild_hill, tmp_path):
    compiler = shutil.which("cc") or shutil.which("gcc")
    if compiler is None:
        pytest.skip("no C compiler (cc or gcc) on PATH to compile the exported header")
    export(wild_hill, tmp_path / "fit.h")
    calls = "\n".join(f'    printf("%.17g\\n", q_divide({float(v)!r}));' for v in SIGNALS)
    # Included twice: without the include guard the second copy redefines q_divide.
    (tmp_path / "main.c").write_text(
        f'#include <stdio.h>\n#include "fit.h"\n#include "fit.h"\nint main(void) {{\n{calls}\n    return 0;\n}}\n')
    subprocess.run([compiler, "-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-o", str(tmp_path / "run"),
                    str(tmp_path / "main.c"), "-lm"], check=True, capture_output=True)
    out = subprocess.run([str(tmp_path / "run")], check=True, capture_output=True, text=True).stdout.split()
    hill = -0.2 + 1.5 * SIGNALS**3 / (2.0**3 + SIGNALS**3)
    np.testing.assert_allclose(np.array(out, dtype=float), np.clip(hill, 0.0, 1.0), rtol=1e-14, atol=0)


# ---------------------------------------------------------------------------- SBML, any grid
RATES = {"division": [1.0, 0.0], "death": [0.2, 0.2], "crowding": [0.1, 0.0]}
GRID_SIZES = [2, 21, 34, 101, pytest.param(1001, marks=pytest.mark.slow)]


def mean_field(tau):
    return sl.MeanField(GROW_WHEN_CROWDED, hexagonal, tau=tau, objective="max-entropy", **RATES)


class Interpolated(sl.MeanField):
    """switchlaw's own mean-field model with f_x(rho) the linear interpolant of a law's grid
    fractions (the model the SBML file states), integrated by MeanField.trajectory."""

    def __init__(self, law, **kwargs):
        super().__init__(GROW_WHEN_CROWDED, hexagonal, objective="max-entropy", **RATES, **kwargs)
        self.grid = law.densities
        self.table = np.einsum("ky,kyx->kx", law.state_probs, law.table)

    def _derive_fractions(self, rho, beta):
        return np.array([np.interp(rho, self.grid, self.table[:, x]) for x in range(self.table.shape[1])])


def grid_law(points):
    return sl.derive_law(GROW_WHEN_CROWDED, hexagonal, densities=np.linspace(0, 1, points), beta=4.0,
                         objective="max-entropy")


def reference(law, tau):
    run = Interpolated(law, tau=tau).trajectory(4.0, 0.5, 40.0, points=201, rtol=1e-10)
    return run.times, (run.density[:, None] if tau is None else run.compartments)


def copasi_run(path, species):
    import basico

    model = basico.load_model(str(path))
    try:
        frame = basico.run_time_course(duration=40.0, intervals=200, method="deterministic", r_tol=1e-10,
                                       a_tol=1e-12, use_sbml_id=True, model=model)
    finally:
        basico.remove_datamodel(model)
    return frame.index.to_numpy(), frame[species].to_numpy()


def roadrunner_run(path, species):
    import roadrunner

    runner = roadrunner.RoadRunner(str(path))
    runner.integrator.relative_tolerance = 1e-10
    runner.integrator.absolute_tolerance = 1e-12
    runner.timeCourseSelections = ["time"] + species
    result = np.asarray(runner.simulate(0.0, 40.0, 201))
    return result[:, 0], result[:, 1:]


@pytest.mark.parametrize("points", GRID_SIZES)
@pytest.mark.parametrize("tau", [None, 2.0])
def test_copasi_and_roadrunner_read_every_grid_size(points, tau, tmp_path):
    # COPASI (through copasi-basico) and libroadrunner integrate the file; both must match
    # switchlaw's own integration of the same interpolated model to 1e-6 relative. Before
    # the balanced encoding COPASI dropped the switching rule at 34 points or more.
    law = grid_law(points)
    export(mean_field(tau), tmp_path / "model.xml", law=law, initial=0.5)
    times, expected = reference(law, tau)
    species = ["rho"] if tau is None else ["cells_divide", "cells_move"]
    for client in (copasi_run, roadrunner_run):
        got_times, got = client(tmp_path / "model.xml", species)
        np.testing.assert_allclose(got_times, times, rtol=1e-12, atol=1e-12)
        relative = np.abs(got - expected) / np.abs(expected)
        assert relative.max() <= 1e-6, (client.__name__, relative.max())
    if tau is not None:
        # The switching rule acts: the phenotype split moves away from its start.
        assert abs(expected[-1, 0] / expected[-1].sum() - expected[0, 0] / expected[0].sum()) > 0.05


@pytest.mark.parametrize("points", [2, 21, 34, 101, 1001])
def test_piecewise_depth_grows_as_log2_of_the_grid(points, tmp_path):
    import libsbml

    from switchlaw.exporters._sbml import piecewise_depth

    export(mean_field(2.0), tmp_path / "model.xml", law=grid_law(points), initial=0.5)
    model = libsbml.readSBMLFromString((tmp_path / "model.xml").read_text(encoding="utf-8")).getModel()
    for name in ("fraction_divide", "fraction_move"):
        depth = piecewise_depth(model.getAssignmentRuleByVariable(name).getMath())
        # A balanced binary search over n - 1 intervals needs ceil(log2(n - 1)) comparisons
        # (Knuth, TAOCP vol. 3, §6.2.1); a chain would need n - 2.
        assert depth == math.ceil(math.log2(points - 1))


# ----------------------------------------------------------------- SBML, count variant
def count_law():
    # 21 grid points and 20 cells at density 1: every count n sits on a grid density n / 20,
    # where the SBML interpolant and switchlaw's own fractions agree exactly.
    return grid_law(21)


def count_model(tau):
    return sl.MeanField(GROW_WHEN_CROWDED, hexagonal, tau=tau, objective="max-entropy",
                        division=[1.0, 0.0], death=[0.2, 0.2], crowding=[0.0, 0.0])


@pytest.mark.parametrize("tau", [None, 2.0])
def test_count_variant_is_the_density_model_times_the_system_size(tau, tmp_path):
    # With counts n = N rho the deterministic rates are N times those of the density model
    # (van Kampen, Stochastic Processes in Physics and Chemistry, ch. X, system-size
    # expansion): libroadrunner's ODE run of the count file over N equals switchlaw's own
    # integration of the density model.
    law, size = grid_law(34), 500
    initial = 250 if tau is None else [150, 100]
    export(mean_field(tau), tmp_path / "counts.xml", law=law, initial=initial, variant="counts",
           system_size=size, time_unit="hour")
    text = (tmp_path / "counts.xml").read_text(encoding="utf-8")
    assert "sbml:units" not in text and "<piecewise>" not in text and "listOfRules" not in text
    species = ["cells"] if tau is None else ["cells_divide", "cells_move"]
    times, got = roadrunner_run(tmp_path / "counts.xml", species)
    start = 0.5 if tau is None else np.array([0.3, 0.2])
    run = Interpolated(law, tau=tau).trajectory(4.0, start, 40.0, points=201, rtol=1e-10)
    expected = run.density[:, None] if tau is None else run.compartments
    np.testing.assert_allclose(times, run.times, rtol=1e-12)
    assert (np.abs(got / size - expected) / expected).max() <= 1e-6


@pytest.mark.parametrize("tau", [None, 2.0])
def test_count_variant_propensities_are_non_negative_everywhere(tau, tmp_path):
    import roadrunner

    size = 20
    export(count_model(tau), tmp_path / "counts.xml", law=count_law(), initial=10 if tau is None else [5, 5],
           variant="counts", system_size=size)
    runner = roadrunner.RoadRunner(str(tmp_path / "counts.xml"))
    reactions = runner.model.getReactionIds()
    rates = []
    states = [(n,) for n in range(size + 1)] if tau is None else \
        [(a, b) for a in range(size + 1) for b in range(size + 1 - a)]
    for state in states:
        runner.model.setFloatingSpeciesAmounts(list(map(float, state)))
        rates.append(runner.model.getReactionRates())
    rates = np.array(rates)
    assert rates.shape == (len(states), len(reactions))
    assert (rates >= 0).all()
    # No division once the population is at its size, no event at all in an empty one.
    full = [k for k, state in enumerate(states) if sum(state) == size]
    births = [k for k, name in enumerate(reactions) if name in ("birth", "division_of_divide", "division_of_move")]
    assert (rates[np.ix_(full, births)] == 0).all() and (rates[states.index((0,) * len(states[0]))] == 0).all()


def switchlaw_counts(tau, replicates, t_end):
    model = sl.BirthDeathSwitching(division=[1.0, 0.0], death=[0.2, 0.2], carrying_capacity=20, law=count_law(), tau=tau)
    return model.simulate([5, 5], t_end=t_end, times=[0.0, t_end], replicates=replicates, seed=20261203).counts[:, -1]


def within(samples, reference, z=3.5):
    """Means of two independent samples agree within z combined standard errors."""
    error = np.sqrt(samples.var(axis=0, ddof=1) / len(samples) + reference.var(axis=0, ddof=1) / len(reference))
    return np.abs(samples.mean(axis=0) - reference.mean(axis=0)) <= z * error


def test_gillespy2_ssa_of_the_count_variant_matches_switchlaw(tmp_path):
    import gillespy2

    export(count_model(2.0), tmp_path / "counts.xml", law=count_law(), initial=[5, 5], variant="counts",
           system_size=20)
    model, errors = gillespy2.import_SBML(str(tmp_path / "counts.xml"))
    assert errors == []
    t_end, replicates = 4.0, 400
    model.timespan(np.linspace(0.0, t_end, 5))
    results = model.run(solver=gillespy2.NumPySSASolver, number_of_trajectories=replicates, seed=11)
    theirs = np.array([[r["cells_divide"][-1], r["cells_move"][-1]] for r in results])
    ours = switchlaw_counts(2.0, replicates, t_end)
    assert within(theirs, ours).all(), (theirs.mean(axis=0), ours.mean(axis=0))
    # Cells do switch: without switching no "move" cell would ever divide, and the split of
    # phenotypes moves away from 5:5 (the same in both simulators).
    assert abs(theirs[:, 0].mean() - theirs[:, 1].mean()) > 1.0


def test_roadrunner_gillespie_runs_the_count_variant(tmp_path):
    import roadrunner

    export(count_model(2.0), tmp_path / "counts.xml", law=count_law(), initial=[5, 5], variant="counts",
           system_size=20)
    runner = roadrunner.RoadRunner(str(tmp_path / "counts.xml"))
    runner.setIntegrator("gillespie")
    runner.integrator.seed = 5
    runner.timeCourseSelections = ["time", "cells_divide", "cells_move"]
    t_end, replicates = 4.0, 400
    finals = []
    for _ in range(replicates):
        runner.reset()
        finals.append(np.asarray(runner.simulate(0.0, t_end, 5))[-1, 1:])
    theirs = np.array(finals)
    assert (theirs == np.round(theirs)).all() and (theirs >= 0).all() and (theirs.sum(axis=1) <= 20).all()
    assert within(theirs, switchlaw_counts(2.0, replicates, t_end)).all()


def test_count_variant_input_rules(tmp_path):
    law = count_law()
    with pytest.raises(sl.InputError, match="variant='counts' needs `system_size`"):
        export(count_model(2.0), tmp_path / "c.xml", law=law, initial=[5, 5], variant="counts")
    with pytest.raises(sl.InputError, match="`system_size` applies only with variant='counts'"):
        export(count_model(2.0), tmp_path / "c.xml", law=law, initial=0.5, system_size=20)
    with pytest.raises(sl.InputError, match="`system_size` must be an integer >= 1 \\(got 2.5\\)"):
        export(count_model(2.0), tmp_path / "c.xml", law=law, initial=[1, 1], variant="counts", system_size=2.5)
    with pytest.raises(sl.InputError, match="`initial` must be 2 cell counts .* at most `system_size`=20"):
        export(count_model(2.0), tmp_path / "c.xml", law=law, initial=[15, 15], variant="counts", system_size=20)
    with pytest.raises(sl.InputError, match="`initial` must be one cell count"):
        export(count_model(None), tmp_path / "c.xml", law=law, initial=0.5, variant="counts", system_size=20)
    with pytest.raises(sl.InputError, match="`variant` must be one of 'density', 'counts'"):
        export(count_model(None), tmp_path / "c.xml", law=law, initial=5, variant="cells", system_size=20)
    assert list(tmp_path.iterdir()) == []


# ------------------------------------------------------------------------- netCDF (CF)
def cf_problems(path):
    """What a CF reader objects to: no Conventions, or a units string UDUNITS-2 (through
    cf-units, the CF community's UDUNITS-2 binding) cannot parse."""
    import cf_units
    import h5py

    def text(value):
        return value.decode() if isinstance(value, bytes) else str(value)

    problems = []
    with h5py.File(path, "r") as stored:
        if not text(stored.attrs.get("Conventions", "")).startswith("CF-"):
            problems.append("no Conventions attribute beginning CF-")

        def visit(name, item):
            if "units" in item.attrs:
                try:
                    cf_units.Unit(text(item.attrs["units"]))
                except ValueError:
                    problems.append(f"{name}: units {text(item.attrs['units'])!r} do not parse")

        stored.visititems(visit)
    return problems


def test_law_netcdf_has_cf_conventions_and_udunits(law, tmp_path):
    import xarray as xr

    export(law, tmp_path / "law.nc")
    assert cf_problems(tmp_path / "law.nc") == []
    with xr.open_dataset(tmp_path / "law.nc", engine="h5netcdf") as stored:
        assert stored.attrs["Conventions"] == "CF-1.10"
        assert stored["information_bits"].attrs["units"] == "1" and "bit" in stored["information_bits"].attrs["long_name"]
        assert "units" not in stored["beta"].attrs and "nats per payoff unit" in stored["beta"].attrs["long_name"]
        assert "units" not in stored["expected_payoff"].attrs


def test_scan_netcdf_has_cf_conventions_and_round_trips(tmp_path):
    import cf_units
    import xarray as xr

    from switchlaw import analysis as sa

    study = sl.MeanField(GROW_WHEN_CROWDED, hexagonal, division=[1.0, 0.0], death=[0.2, 0.2],
                         objective="max-entropy")
    regimes = sa.scan(sa.RegimeSummary(study, points=41), {"beta": [1.0, 6.0]}, progress=False)
    laws = sa.scan(sa.LawSummary(study, densities=[0.2, 0.6]), {"beta": [1.0, 6.0]}, progress=False)
    for name, ds in {"regimes": regimes, "laws": laws}.items():
        sa.save_scan(ds, tmp_path / f"{name}.nc")
        assert cf_problems(tmp_path / f"{name}.nc") == []
        xr.testing.assert_identical(sa.load_scan(tmp_path / f"{name}.nc"), ds)
    with xr.open_dataset(tmp_path / "regimes.nc", engine="h5netcdf") as stored:
        assert "units" not in stored["low_density_growth"].attrs  # no declared time unit
        assert "per unit time" in stored["low_density_growth"].attrs["long_name"]
    with xr.open_dataset(tmp_path / "laws.nc", engine="h5netcdf") as stored:
        assert stored["information"].attrs["units"] == "1" and "bit" in stored["information"].attrs["long_name"]
    # With a declared time unit, rates are UDUNITS "h-1": 1 per hour is 1/3600 per second.
    sa.save_scan(regimes, tmp_path / "hours.nc", time_unit="hour")
    assert cf_problems(tmp_path / "hours.nc") == []
    with xr.open_dataset(tmp_path / "hours.nc", engine="h5netcdf") as stored:
        unit = cf_units.Unit(stored["low_density_growth"].attrs["units"])
        assert unit.convert(1.0, cf_units.Unit("s-1")) == pytest.approx(1 / 3600, rel=1e-12)
        assert stored.attrs["time_unit"] == "hour"
    xr.testing.assert_identical(sa.load_scan(tmp_path / "hours.nc"), regimes)
    with pytest.raises(sl.InputError, match="`time_unit` must be one of"):
        sa.save_scan(regimes, tmp_path / "weeks.nc", time_unit="week")


# ------------------------------------------------------------------- time unit, end to end
def test_study_time_unit_reaches_every_export(tmp_path):
    import cf_units
    import libsbml
    import xarray as xr

    from switchlaw.cli._main import main

    colony = (Path(sl.__file__).parent / "cli" / "studies" / "colony.toml").read_text(encoding="utf-8")
    # The built-in invented colony study, smaller, with its rates declared per hour.
    text = (colony.replace('phenotypes = ["divide", "roam"]', 'phenotypes = ["divide", "roam"]\ntime_unit = "hour"')
            .replace("points = 101", "points = 21").replace("points = 60", "points = 12")
            .replace("points = 25", "points = 4").replace("beta_points = 80", "beta_points = 12"))
    assert 'time_unit = "hour"' in text
    (tmp_path / "hours.toml").write_text(text, encoding="utf-8")
    out = tmp_path / "run"
    assert main(["run", str(tmp_path / "hours.toml"), "--out", str(out), "--quiet"]) == 0
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert summary["study"]["time_unit"] == "hour"
    assert json.loads((out / "law.csv.json").read_text(encoding="utf-8"))["metadata"]["study"]["time_unit"] == "hour"
    document = libsbml.readSBMLFromString((out / "model.sbml").read_text(encoding="utf-8"))
    model = document.getModel()
    assert model.getTimeUnits() == "hour"
    hour = model.getUnitDefinition("hour").getUnit(0)
    assert hour.getKind() == libsbml.UNIT_KIND_SECOND and hour.getMultiplier() == 3600.0
    for category in (libsbml.LIBSBML_CAT_UNITS_CONSISTENCY, libsbml.LIBSBML_CAT_MODELING_PRACTICE):
        document.setConsistencyChecks(category, True)
    assert document.checkConsistency() == 0  # no errors and no warnings, units included
    netcdf = sorted(out.glob("*.nc"))
    assert [p.name for p in netcdf] == ["law.nc", "scan.nc"]
    for path in netcdf:
        assert cf_problems(path) == []  # Conventions begins CF-; every units string parses
    with xr.open_dataset(out / "scan.nc", engine="h5netcdf") as scan:
        assert scan.attrs["time_unit"] == "hour"
        rates = [name for name, v in scan.variables.items() if v.attrs.get("units") == "h-1"]
        assert rates  # e.g. the growth rate of a rare population, per hour
        assert cf_units.Unit("h-1").convert(1.0, cf_units.Unit("s-1")) == pytest.approx(1 / 3600)
