"""Exports checked by real clients: csv/json/h5py/xarray for tables, jsonschema for the JSON
schema, libsbml and libroadrunner for SBML, the Python interpreter, a C compiler and sympy's
LaTeX parser for code."""

import csv
import dataclasses
import hashlib
import importlib.resources
import json
import math
import re
import shutil
import subprocess

import numpy as np
import pytest
from scipy import linalg

import switchlaw as sl
from switchlaw.exporters import EXPORT_FORMATS, export, read_table

# Invented go-or-grow scenario (as in test_population.py): dividing pays in crowded
# neighbourhoods, moving when isolated; hexagonal lattice.
GROW_WHEN_CROWDED = {"divide": sl.Linear(1 / 6, 0.0), "move": sl.Linear(-1 / 6, 1.0)}


def hexagonal(rho):
    return sl.occupancy(6, rho)


def two_signals(rho):
    # Invented: two neighbours on one axis and one on another, as one combined state.
    return sl.product_environment(sl.occupancy(2, rho), sl.occupancy(1, rho))


@pytest.fixture(scope="module")
def law():
    return sl.derive_law(GROW_WHEN_CROWDED, hexagonal, densities=np.linspace(0, 1, 21), beta=3.0)


@pytest.fixture(scope="module")
def budget_law():
    # At density 0 every neighbour site is empty: one state, no information to spend, so the
    # budget does not bind there and beta is +inf.
    return sl.derive_law(GROW_WHEN_CROWDED, hexagonal, densities=np.linspace(0, 1, 11), bits=0.3)


@pytest.fixture(scope="module")
def product_law():
    payoff = np.array([[0.2, 0.9], [0.5, 0.4], [0.1, 0.3], [0.7, 0.2], [0.6, 0.6], [0.9, 0.1]])
    return sl.derive_law(payoff, two_signals, densities=np.linspace(0, 1, 6), beta=2.0)


@pytest.fixture(scope="module")
def max_entropy_law():
    return sl.derive_law(GROW_WHEN_CROWDED, hexagonal, densities=np.linspace(0, 1, 41), beta=4.0,
                         objective="max-entropy")


def documented_sha256(law):
    """The hash recipe of docs/file-formats.md, written out again with hashlib."""
    digest = hashlib.sha256()
    for name, values in [
        ("densities", law.densities), ("states", law.states), ("state_values", law.state_values),
        ("probability", law.table), ("state_probability", law.state_probs), ("beta", law.betas),
        ("information_bits", law.information_bits), ("expected_payoff", law.expected_payoff),
        ("converged", law.converged),
    ]:
        array = np.asarray(values, dtype="<f8")
        digest.update(f"{name}:{','.join(map(str, array.shape))}\n".encode())
        digest.update(array.tobytes())
    digest.update(
        f"phenotypes={chr(31).join(law.phenotypes)}\nobjective={law.objective}\n"
        f"route={law.route}\nsetting={law.setting!r}\n".encode()
    )
    return digest.hexdigest()


def files_in(folder):
    return sorted(p.name for p in folder.iterdir())


# ------------------------------------------------------------------------------ registry
def test_registry_lists_every_format_and_infers_from_suffix(law, tmp_path):
    assert EXPORT_FORMATS == ("csv", "json", "netcdf", "step-table", "sbml", "python", "c", "latex")
    assert export(law, tmp_path / "a.json").format == "json"
    assert export(law, tmp_path / "a.nc").format == "netcdf"
    with pytest.raises(sl.InputError) as caught:
        export(law, tmp_path / "a.txt")
    for name in EXPORT_FORMATS:
        assert repr(name) in str(caught.value)
    assert "'.txt'" in str(caught.value)


def test_unknown_format_lists_the_valid_names(law, tmp_path):
    with pytest.raises(sl.InputError, match="`format` must be one of 'csv', 'json', 'netcdf', "
                       "'step-table', 'sbml', 'python', 'c', 'latex' \\(got 'xlsx'\\)"):
        export(law, tmp_path / "law.xlsx", format="xlsx")
    assert files_in(tmp_path) == []


def test_unknown_and_missing_options_name_the_valid_ones(law, tmp_path):
    with pytest.raises(sl.InputError, match="option 'dt' does not apply to format 'csv'; its options are 'study'"):
        export(law, tmp_path / "law.csv", dt=0.1)
    with pytest.raises(sl.InputError, match="format 'step-table' needs the option `tau`"):
        export(law, tmp_path / "steps.csv", format="step-table", dt=0.1)
    with pytest.raises(sl.InputError, match="format 'sbml' exports a MeanField \\(got SwitchingLaw\\)"):
        export(law, tmp_path / "model.xml")
    assert files_in(tmp_path) == []


# ------------------------------------------------------------------------------- tables
@pytest.mark.parametrize("name", ["law.csv", "law.json", "law.nc"])
@pytest.mark.parametrize("which", ["law", "budget_law", "product_law"])
def test_table_round_trip_is_exact(name, which, request, tmp_path):
    law = request.getfixturevalue(which)
    done = export(law, tmp_path / name)
    table = read_table(tmp_path / name)
    # Exact: every float64 reads back bit for bit (shortest round-trip decimals, or HDF5).
    for read, original in [
        (table["density"].values, law.densities), (table["probability"].values, law.table),
        (table["state_probability"].values, law.state_probs), (table["beta"].values, law.betas),
        (table["information_bits"].values, law.information_bits),
        (table["expected_payoff"].values, law.expected_payoff),
        (table["state_value"].values, law.state_values), (table["state"].values, law.states),
    ]:
        assert read.dtype == original.dtype
        np.testing.assert_array_equal(read, original)
    np.testing.assert_array_equal(table["converged"].values.astype(bool), law.converged)
    assert [str(p) for p in table["phenotype"].values] == list(law.phenotypes)
    # The hash follows the documented recipe (recomputed here with hashlib).
    assert done.inputs_sha256 == documented_sha256(law) == table.attrs["inputs_sha256"]
    assert table.attrs["objective"] == law.objective and table.attrs["route"] == law.route
    assert table.attrs["setting"] == law.setting
    assert table.attrs["switchlaw_version"] == sl.__version__
    # CF conventions: units only where UDUNITS parses them, the rest in the long name
    # (checked against UDUNITS-2 itself in test_export_clients.py).
    assert "units" not in table["beta"].attrs and table["beta"].attrs["long_name"].endswith("unit: nats per payoff unit")
    assert table["information_bits"].attrs["units"] == "1"
    assert table["information_bits"].attrs["long_name"].endswith("unit: bit")


def test_budget_law_keeps_infinite_beta(budget_law, tmp_path):
    # Precondition of the round trip above: this law has +inf betas where the budget is slack.
    assert np.isinf(budget_law.betas).any() and np.isfinite(budget_law.betas).any()
    export(budget_law, tmp_path / "law.json")
    document = json.loads((tmp_path / "law.json").read_text(encoding="utf-8"))
    assert [b is None for b in document["beta"]] == list(np.isinf(budget_law.betas))


def test_formats_give_identical_datasets_and_netcdf_round_trips(law, tmp_path):
    import xarray as xr

    from switchlaw.exporters._tables import law_arrays, law_dataset
    from switchlaw.exporters._provenance import law_metadata

    for name in ("law.csv", "law.json", "law.nc"):
        export(law, tmp_path / name, study={"name": "invented go-or-grow", "seed": 1})
    written = law_dataset(law_arrays(law), law.phenotypes,
                          law_metadata(law, {"name": "invented go-or-grow", "seed": 1}, documented_sha256(law)))
    with xr.open_dataset(tmp_path / "law.nc", engine="h5netcdf") as stored:
        xr.testing.assert_identical(stored.load(), written)
    for name in ("law.csv", "law.json"):
        xr.testing.assert_identical(read_table(tmp_path / name), written)
    assert json.loads(written.attrs["study"]) == {"name": "invented go-or-grow", "seed": 1}


def test_netcdf_is_read_by_h5py_with_cf_attributes(law, tmp_path):
    import h5py

    export(law, tmp_path / "law.nc")
    with h5py.File(tmp_path / "law.nc", "r") as stored:
        np.testing.assert_array_equal(stored["probability"][()], law.table)
        np.testing.assert_array_equal(stored["density"][()], law.densities)
        assert stored.attrs["Conventions"] == "CF-1.10"
        units = stored["probability"].attrs["units"]
        assert (units.decode() if isinstance(units, bytes) else units) == "1"


def test_csv_is_long_format_read_by_the_csv_module(law, tmp_path):
    export(law, tmp_path / "law.csv")
    with open(tmp_path / "law.csv", newline="", encoding="utf-8") as stream:
        rows = list(csv.DictReader(stream))
    k, m, n = law.table.shape
    assert len(rows) == k * m * n
    assert list(rows[0]) == ["density", "state", "state_value", "phenotype", "probability", "state_probability"]
    q = np.array([float(r["probability"]) for r in rows]).reshape(k, m, n)
    np.testing.assert_array_equal(q, law.table)
    # A policy's rows are conditional distributions: they sum to one (Cover & Thomas ch. 2).
    np.testing.assert_allclose(q.sum(axis=2), 1.0, atol=1e-12)
    sidecar = json.loads((tmp_path / "law.csv.json").read_text(encoding="utf-8"))
    assert sidecar["metadata"]["objective"] == "min-information" and sidecar["beta"] == [3.0] * k
    assert sidecar["units"]["information_bits"] == "bit"


def test_json_documents_validate_against_the_shipped_schema(law, tmp_path):
    import jsonschema

    schema = json.loads(importlib.resources.files("switchlaw.exporters").joinpath("law.schema.json").read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator.check_schema(schema)
    export(law, tmp_path / "law.json")
    export(law, tmp_path / "law.csv")
    export(law, tmp_path / "steps.csv", format="step-table", dt=0.1, tau=2.0, time_unit="hour")
    for name in ("law.json", "law.csv.json", "steps.csv.json"):
        jsonschema.validate(json.loads((tmp_path / name).read_text(encoding="utf-8")), schema,
                            cls=jsonschema.Draft202012Validator)
    broken = json.loads((tmp_path / "law.json").read_text(encoding="utf-8"))
    del broken["probability"]
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(broken, schema, cls=jsonschema.Draft202012Validator)


def test_edited_table_fails_its_hash(law, tmp_path):
    export(law, tmp_path / "law.csv")
    lines = (tmp_path / "law.csv").read_text(encoding="utf-8").splitlines()
    fields = lines[-1].split(",")
    fields[-2] = repr(float(fields[-2]) + 1e-9)
    (tmp_path / "law.csv").write_text("\n".join(lines[:-1] + [",".join(fields)]) + "\n")
    with pytest.raises(sl.InputError, match="does not match its inputs_sha256"):
        read_table(tmp_path / "law.csv")


def test_step_table_matches_the_matrix_exponential(law, tmp_path):
    dt, tau = 0.3, 1.7
    done = export(law, tmp_path / "steps.csv", format="step-table", dt=dt, tau=tau, time_unit="minute")
    table = read_table(tmp_path / "steps.csv")
    steps = table["step_probability"].values
    assert steps.shape == (21, 7, 2, 2)
    assert table.attrs["dt"] == dt and table.attrs["tau"] == tau and table.attrs["time_unit"] == "minute"
    assert done.inputs_sha256 == documented_sha256(law)
    for k, rho in enumerate(law.densities):
        np.testing.assert_array_equal(steps[k], law.step_probabilities(dt, tau, rho))  # exact round trip
        for y in range(7):
            # Re-deciding at rate 1/tau and drawing j ~ q(.|y) is the Markov generator
            # Q = (1 q^T - I) / tau; its transition matrix over dt is expm(dt Q) (Norris,
            # Markov Chains, 1997, Thm 2.1.1).
            q = law.table[k, y]
            generator = (np.outer(np.ones(2), q) - np.eye(2)) / tau
            np.testing.assert_allclose(steps[k, y], linalg.expm(dt * generator), rtol=1e-12, atol=1e-15)
            np.testing.assert_allclose(steps[k, y].sum(axis=1), 1.0, atol=1e-15)
    sidecar = json.loads((tmp_path / "steps.csv.json").read_text(encoding="utf-8"))
    assert sidecar["step"]["decision_probability"] == -math.expm1(-dt / tau)


# --------------------------------------------------------------------------------- SBML
def mean_field(tau, objective="max-entropy"):
    return sl.MeanField(GROW_WHEN_CROWDED, hexagonal, division=[1.0, 0.0], death=[0.2, 0.2],
                        crowding=[0.1, 0.0], tau=tau, objective=objective)


def grid_fractions(law):
    return np.einsum("ky,kyx->kx", law.state_probs, law.table)


class Interpolated(sl.MeanField):
    """switchlaw's own mean-field model with f_x(rho) the linear interpolant of a law's grid
    fractions (the model the SBML file states), integrated by MeanField.trajectory."""

    def __init__(self, law, fraction=None, **kwargs):
        super().__init__(GROW_WHEN_CROWDED, hexagonal, **kwargs)
        self.grid, self.table, self.fraction = law.densities, grid_fractions(law), fraction

    def _derive_fractions(self, rho, beta):
        if self.fraction is not None:
            first = float(self.fraction(rho))
            return np.array([first, 1.0 - first])
        return np.array([np.interp(rho, self.grid, self.table[:, x]) for x in range(self.table.shape[1])])


def sbml_problems(text):
    import libsbml

    document = libsbml.readSBMLFromString(text)
    for category in (libsbml.LIBSBML_CAT_UNITS_CONSISTENCY, libsbml.LIBSBML_CAT_MODELING_PRACTICE,
                     libsbml.LIBSBML_CAT_GENERAL_CONSISTENCY, libsbml.LIBSBML_CAT_IDENTIFIER_CONSISTENCY,
                     libsbml.LIBSBML_CAT_MATHML_CONSISTENCY, libsbml.LIBSBML_CAT_SBO_CONSISTENCY,
                     libsbml.LIBSBML_CAT_OVERDETERMINED_MODEL):
        document.setConsistencyChecks(category, True)
    document.checkConsistency()
    return document, [document.getError(i).getMessage() for i in range(document.getNumErrors())]


@pytest.mark.parametrize("tau", [None, 2.0])
def test_sbml_passes_libsbml_checks_with_units_and_exact_numbers(max_entropy_law, tau, tmp_path):
    done = export(mean_field(tau), tmp_path / "model.xml", law=max_entropy_law, initial=0.5,
                     time_unit="hour", study={"scenario": "invented"})
    text = (tmp_path / "model.xml").read_text(encoding="utf-8")
    document, problems = sbml_problems(text)
    assert problems == []  # no errors and no warnings, units included
    assert (document.getLevel(), document.getVersion()) == (3, 2)
    model = document.getModel()
    assert model.getNumEvents() == 0 and "delay" not in text
    assert all(model.getRule(i).isAssignment() for i in range(model.getNumRules()))
    assert all(model.getParameter(i).isSetUnits() for i in range(model.getNumParameters()))
    assert text.count("<cn") == text.count('sbml:units="dimensionless"')  # every literal has units
    assert model.getTimeUnits() == "hour"
    assert model.getUnitDefinition("hour").getUnit(0).getMultiplier() == 3600.0
    expected_reactions = 2 if tau is None else 2 * 2 + 2
    assert model.getNumReactions() == expected_reactions
    assert all(not model.getReaction(i).getReversible() for i in range(model.getNumReactions()))
    # Exact table: every grid density and grid fraction is written to the bit.
    literals = set()

    def collect(node):
        if node.isNumber():
            literals.add(node.getReal())
        for i in range(node.getNumChildren()):
            collect(node.getChild(i))

    collect(model.getAssignmentRuleByVariable("fraction_divide").getMath())
    fractions = grid_fractions(max_entropy_law)[:, 0]
    assert set(max_entropy_law.densities) <= literals and set(fractions) <= literals
    annotation = model.getAnnotationString()
    assert f'switchlaw:inputs_sha256="{done.inputs_sha256}"' in annotation
    assert f'switchlaw:version="{sl.__version__}"' in annotation
    assert "invented" in annotation and "not a medical device" in model.getNotesString()


def roadrunner_run(text, t_end, points):
    import roadrunner

    runner = roadrunner.RoadRunner(text)
    runner.integrator.relative_tolerance = 1e-10
    runner.integrator.absolute_tolerance = 1e-12
    species = list(runner.model.getFloatingSpeciesIds())
    runner.timeCourseSelections = ["time"] + species
    return runner, np.asarray(runner.simulate(0.0, t_end, points))


@pytest.mark.parametrize("tau", [None, 2.0])
def test_roadrunner_trajectory_matches_switchlaw(max_entropy_law, tau, tmp_path):
    export(mean_field(tau), tmp_path / "model.xml", law=max_entropy_law, initial=0.5)
    runner, result = roadrunner_run((tmp_path / "model.xml").read_text(encoding="utf-8"), 40.0, 201)
    reference = Interpolated(max_entropy_law, division=[1.0, 0.0], death=[0.2, 0.2], crowding=[0.1, 0.0],
                             tau=tau, objective="max-entropy").trajectory(4.0, 0.5, 40.0, points=201, rtol=1e-10)
    expected = reference.density[:, None] if tau is None else reference.compartments
    np.testing.assert_array_equal(result[:, 0], reference.times)
    relative = np.abs(result[:, 1:] - expected) / np.abs(expected)
    assert relative.max() <= 1e-6
    if tau is not None:
        # A changed parameter survives reset() but not resetAll() (libroadrunner's API docs).
        runner.setValue("tau", 4.0)
        runner.reset()
        changed = np.asarray(runner.simulate(0.0, 40.0, 201))
        slower = Interpolated(max_entropy_law, division=[1.0, 0.0], death=[0.2, 0.2], crowding=[0.1, 0.0],
                              tau=4.0, objective="max-entropy").trajectory(4.0, 0.5, 40.0, points=201, rtol=1e-10)
        assert (np.abs(changed[:, 1:] - slower.compartments) / slower.compartments).max() <= 1e-6
        runner.resetAll()
        again = np.asarray(runner.simulate(0.0, 40.0, 201))
        assert (np.abs(again[:, 1:] - expected) / expected).max() <= 1e-6


def test_sbml_closed_form_fractions_match_switchlaw(max_entropy_law, tmp_path):
    export(mean_field(None), tmp_path / "model.xml", law=max_entropy_law, initial=0.5,
              fractions="logistic", tolerance=0.05)
    text = (tmp_path / "model.xml").read_text(encoding="utf-8")
    assert sbml_problems(text)[1] == []
    assert "piecewise" not in text and "<exp/>" in text
    # The same least-squares fit of f(rho), built from public pieces: the grid fractions as a
    # one-density law whose signal value is the density.
    grid = max_entropy_law.densities
    as_signal = sl.SwitchingLaw(
        densities=np.zeros(1), states=np.arange(grid.size), state_values=grid, phenotypes=("divide", "move"),
        table=grid_fractions(max_entropy_law)[None], state_probs=np.full((1, grid.size), 1 / grid.size),
        betas=np.zeros(1), information_bits=np.zeros(1), expected_payoff=np.zeros(1),
        converged=np.ones(1, dtype=bool), objective="max-entropy", route="beta", setting=4.0,
    )
    fit = sl.fit_formula(as_signal, 0, kind="logistic")
    assert f'switchlaw:fit_max_abs_error="{fit.max_abs_error!r}"' in text
    _, result = roadrunner_run(text, 40.0, 201)
    reference = Interpolated(max_entropy_law, fraction=fit.evaluate, division=[1.0, 0.0], death=[0.2, 0.2],
                             crowding=[0.1, 0.0], objective="max-entropy").trajectory(4.0, 0.5, 40.0, points=201,
                                                                                      rtol=1e-10)
    assert (np.abs(result[:, 1] - reference.density) / reference.density).max() <= 1e-6
    with pytest.raises(sl.InputError, match="closed form is off by .* more than `tolerance`=1e-06"):
        export(mean_field(None), tmp_path / "other.xml", law=max_entropy_law, initial=0.5,
                  fractions="logistic", tolerance=1e-6)
    assert not (tmp_path / "other.xml").exists()


def test_sbml_table_converges_to_the_exact_model_at_second_order(tmp_path):
    # Linear interpolation errs by O(h^2) (common practice, no source), so halving the grid
    # step cuts the distance to switchlaw's exact model about fourfold.
    exact = mean_field(None).trajectory(4.0, 0.5, 20.0, points=41, rtol=1e-10).density
    errors = []
    for points in (21, 41):
        law = sl.derive_law(GROW_WHEN_CROWDED, hexagonal, densities=np.linspace(0, 1, points), beta=4.0,
                            objective="max-entropy")
        export(mean_field(None), tmp_path / f"m{points}.xml", law=law, initial=0.5)
        _, result = roadrunner_run((tmp_path / f"m{points}.xml").read_text(encoding="utf-8"), 20.0, 41)
        errors.append(np.abs(result[:, 1] - exact).max())
    assert 3.0 < errors[0] / errors[1] < 5.0


# --------------------------------------------------------------------------------- code
@pytest.fixture(scope="module")
def fits(law, max_entropy_law):
    return {
        "global logistic": sl.fit_formula(max_entropy_law, "divide", kind="logistic"),
        "per-density hill": sl.fit_formula(law, "divide", kind="hill", per_density=True),
    }


def stated_error(text):
    return float(re.search(r"max abs error against the exact law: (\S+)", text).group(1))


@pytest.mark.parametrize("which", ["global logistic", "per-density hill"])
def test_python_code_evaluates_to_the_fit(fits, which, law, max_entropy_law, tmp_path):
    fit = fits[which]
    export(fit, tmp_path / "fit.py")
    text = (tmp_path / "fit.py").read_text(encoding="utf-8")
    assert "np." not in text and "array(" not in text and "float64" not in text
    namespace = {}
    exec(compile(text, "fit.py", "exec"), namespace)
    q = namespace["q_divide"]
    source = max_entropy_law if not fit.per_density else law
    values = source.state_values
    if fit.per_density:
        got = np.array([[q(v, i) for v in values] for i in range(fit.densities.size)])
        want = np.stack([fit.evaluate(values, i) for i in range(fit.densities.size)])
    else:
        got = np.array([q(v) for v in values])
        want = fit.evaluate(values)
    np.testing.assert_allclose(got, want, rtol=1e-13, atol=1e-15)
    # The stated error is the largest gap to the exact law, recomputed from the code's output.
    exact = source.table[:, :, 0]
    assert stated_error(text) == pytest.approx(np.abs(np.broadcast_to(got, exact.shape) - exact).max(), abs=1e-12)


@pytest.mark.parametrize("which", ["global logistic", "per-density hill"])
def test_c_code_compiles_and_agrees(fits, which, tmp_path):
    compiler = shutil.which("cc") or shutil.which("gcc")
    assert compiler, "a C compiler (cc or gcc) is needed for this check"
    fit = fits[which]
    export(fit, tmp_path / "fit.c")
    values = np.linspace(0.0, 6.0, 13)
    rows = range(fit.densities.size) if fit.per_density else [None]
    calls = "\n".join(
        f'    printf("%.17g\\n", q_divide({float(v)!r}{"" if i is None else f", {i}"}));' for i in rows for v in values
    )
    (tmp_path / "main.c").write_text(f'#include <stdio.h>\n#include "fit.c"\nint main(void) {{\n{calls}\n    return 0;\n}}\n')
    subprocess.run([compiler, "-std=c99", "-Wall", "-Werror", "-O0", "-o", str(tmp_path / "run"),
                    str(tmp_path / "main.c"), "-lm"], check=True, capture_output=True)
    out = subprocess.run([str(tmp_path / "run")], check=True, capture_output=True, text=True).stdout.split()
    want = np.concatenate([fit.evaluate(values, i) for i in rows])
    np.testing.assert_allclose(np.array(out, dtype=float), want, rtol=1e-13, atol=1e-15)
    assert stated_error((tmp_path / "fit.c").read_text(encoding="utf-8")) == fit.max_abs_error


def test_latex_parses_back_to_the_fit(fits, tmp_path):
    import sympy
    from sympy.parsing.latex import parse_latex

    fit = fits["global logistic"]
    export(fit, tmp_path / "fit.tex")
    text = (tmp_path / "fit.tex").read_text(encoding="utf-8")
    body = re.search(r"\\mid v\) = (.*)\n", text).group(1)
    expression = parse_latex(body, backend="lark").subs(sympy.Symbol("e"), sympy.E)
    values = dict(re.findall(r"\$([ab]) = ([-0-9.e]+)\$", text))
    numbers = {sympy.Symbol(name): float(value) for name, value in values.items()}
    assert numbers[sympy.Symbol("a")] == float(fit.parameters["a"])  # exact decimal
    for v in (0.0, 2.5, 6.0):
        got = float(expression.subs(numbers).subs(sympy.Symbol("v"), v).evalf(30))
        assert got == pytest.approx(float(fit.evaluate(v)), rel=1e-13)
    assert stated_error(text) == fit.max_abs_error


def test_code_from_a_law_fits_it_here(law, tmp_path):
    done = export(law, tmp_path / "fit.py", phenotype="divide", kind="hill", per_density=True)
    assert done.inputs_sha256 == documented_sha256(law)
    with pytest.raises(sl.InputError, match="needs `phenotype`"):
        export(law, tmp_path / "other.py")
    with pytest.raises(sl.InputError, match="apply when exporting a SwitchingLaw"):
        export(sl.fit_formula(law, "divide"), tmp_path / "other.py", kind="hill")


# ---------------------------------------------------------------------------- bad input
def unconverged(law):
    # Invented: the same law with its solver marked as failed at one density.
    flags = law.converged.copy()
    flags[3] = False
    return dataclasses.replace(law, converged=flags)


def test_unconverged_law_is_refused_or_marked(law, max_entropy_law, tmp_path):
    bad = unconverged(law)
    with pytest.raises(sl.InputError, match="did not converge at 1 of 21 densities .*allow_unconverged=True"):
        export(bad, tmp_path / "law.csv")
    assert files_in(tmp_path) == []
    done = export(bad, tmp_path / "law.csv", allow_unconverged=True)
    assert not done.converged and "NOT converged" in repr(done)
    sidecar = json.loads((tmp_path / "law.csv.json").read_text(encoding="utf-8"))
    assert sidecar["metadata"]["converged"] is False and "NOT CONVERGED" in sidecar["metadata"]["note"]
    assert sidecar["converged"][3] is False
    assert read_table(tmp_path / "law.csv").attrs["converged"] == 0
    export(bad, tmp_path / "fit.c", phenotype="divide", allow_unconverged=True)
    assert "WARNING: the law did NOT converge" in (tmp_path / "fit.c").read_text(encoding="utf-8")
    model_law = unconverged(max_entropy_law)
    with pytest.raises(sl.InputError, match="`law` did not converge"):
        export(mean_field(None), tmp_path / "model.xml", law=model_law, initial=0.5)
    export(mean_field(None), tmp_path / "model.xml", law=model_law, initial=0.5, allow_unconverged=True)
    assert 'switchlaw:converged="false"' in (tmp_path / "model.xml").read_text(encoding="utf-8")


def test_existing_files_are_kept_unless_overwrite(law, tmp_path):
    (tmp_path / "law.csv.json").write_text("keep me")
    with pytest.raises(sl.InputError, match="law.csv.json' exists; refusing to replace it \\(pass overwrite=True\\)"):
        export(law, tmp_path / "law.csv")
    assert files_in(tmp_path) == ["law.csv.json"] and (tmp_path / "law.csv.json").read_text(encoding="utf-8") == "keep me"
    export(law, tmp_path / "law.csv", overwrite=True)
    assert json.loads((tmp_path / "law.csv.json").read_text(encoding="utf-8"))["kind"] == "switching-law"
    with pytest.raises(sl.InputError, match="existing folder"):
        export(law, tmp_path / "missing" / "law.json")


def test_non_finite_values_are_refused(law, fits, tmp_path):
    table = law.table.copy()
    table[2, 1, 0] = np.nan
    with pytest.raises(sl.InputError, match=r"`obj.table` must be finite to export; entry \(2, 1, 0\) is nan"):
        export(dataclasses.replace(law, table=table), tmp_path / "law.json")
    with pytest.raises(sl.InputError, match="`dt` must be finite and >= 0 \\(got inf\\)"):
        export(law, tmp_path / "steps.csv", format="step-table", dt=math.inf, tau=1.0)
    broken = dataclasses.replace(fits["global logistic"], parameters={"a": np.array(np.nan), "b": np.array(1.0)})
    with pytest.raises(sl.InputError, match="finite fitted parameters"):
        export(broken, tmp_path / "fit.py")
    with pytest.raises(sl.InputError, match="`study` must be JSON-serialisable with finite numbers"):
        export(law, tmp_path / "law.json", study={"x": math.nan})
    assert files_in(tmp_path) == []


def test_sbml_input_rules(law, max_entropy_law, tmp_path):
    inner = sl.derive_law(GROW_WHEN_CROWDED, hexagonal, densities=np.linspace(0.1, 0.9, 9), beta=4.0,
                          objective="max-entropy")
    with pytest.raises(sl.InputError, match="density grid from 0 to 1"):
        export(mean_field(None), tmp_path / "model.xml", law=inner, initial=0.5)
    with pytest.raises(sl.InputError, match="`law` must use the model's objective 'max-entropy' \\(got 'min-information'\\)"):
        export(mean_field(None), tmp_path / "model.xml", law=law, initial=0.5)
    with pytest.raises(sl.InputError, match="`initial` must be a density in \\[0, 1\\] \\(got 1.5\\)"):
        export(mean_field(None), tmp_path / "model.xml", law=max_entropy_law, initial=1.5)
    with pytest.raises(sl.InputError, match="`time_unit` must be one of 'second', 'minute', 'hour', 'day'"):
        export(mean_field(2.0), tmp_path / "model.xml", law=max_entropy_law, initial=0.5, time_unit="week")
    assert files_in(tmp_path) == []


def test_a_failed_rename_leaves_nothing_behind(law, tmp_path, monkeypatch):
    import os

    real = os.replace
    calls = []

    def fail_second(source, target):
        calls.append(target)
        if len(calls) == 2:
            raise OSError("disk full (simulated)")
        real(source, target)

    monkeypatch.setattr(os, "replace", fail_second)
    with pytest.raises(OSError, match="simulated"):
        export(law, tmp_path / "law.csv")
    assert files_in(tmp_path) == []


@pytest.mark.parametrize("suffix", [".py", ".h", ".tex"])
def test_code_formats_without_sympy_say_which_extra_to_install(fits, suffix, monkeypatch, tmp_path):
    # sympy is in the optional [code] extra: without it a code export is a one-line InputError
    # naming the format and the extra, and nothing is written (common practice, no source).
    import importlib.util

    real_find_spec = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec",
                        lambda name, *a, **k: None if name == "sympy" else real_find_spec(name, *a, **k))
    with pytest.raises(sl.InputError, match=r"needs the optional package sympy.*switchlaw\[code\]"):
        export(fits["global logistic"], tmp_path / f"fit{suffix}")
    assert not list(tmp_path.iterdir())
