"""Exports read by general-purpose clients at any size and step: scipy.linalg.expm for step
tables, a C compiler for code, COPASI (copasi-basico) and libroadrunner for SBML at many grid
sizes, gillespy2 and libroadrunner's Gillespie integrator for the count-based SBML, and
cf-units (UDUNITS-2) for netCDF units."""

import json
import math
import shutil
import subprocess

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
    exec(compile((tmp_path / "fit.py").read_text(), "fit.py", "exec"), namespace)
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
