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
