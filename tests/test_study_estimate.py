"""check/run refuse a study whose new sections are too large, naming the costliest stage."""

import pytest

import switchlaw as sl
from switchlaw.cli._estimate import estimate, over_limit

BASE = """
[study]
title = "Estimate (invented)"
phenotypes = ["divide", "roam"]

[senses]
kind = "neighbours"
neighbours = 4

[payoff]
divide = "y / 4"
roam = "1 - y / 4"

[decision]
objective = "max-entropy"
beta = 6.0
densities = { start = 0.0, stop = 1.0, points = 11 }

[population]
division = { divide = 1.0, roam = 0.0 }
death = { divide = 0.1, roam = 0.1 }
betas = { start = 0.5, stop = 12.0, points = 4 }
tau = 1.0
"""

LATTICE = "\n[lattice]\nneighbourhood = \"von-neumann\"\nrows = 512\ncolumns = 512\nreplicates = 256\nt_end = 10000.0\n"
FRONT = ("\n[front]\ndiffusion = { divide = 0.0, roam = 1.0 }\nlength = 2000.0\ndx = 0.1\nt_end = 5000.0\n"
         "scan = { start = 0.5, stop = 8.0, points = 200 }\n")
SOBOL = ("\n[sensitivity]\nsobol = { ranges = { beta = [1.0, 8.0], death_scale = [0.5, 1.5] }, "
         "samples = 4096 }\n")


@pytest.mark.parametrize("section, stage", [(LATTICE, "lattice"), (FRONT, "front")])
def test_large_new_sections_are_refused_with_their_stage_named(section, stage):
    study = sl.load_study(BASE + section).spec
    line = over_limit(study)
    assert line is not None and f"the {stage} stage" in line and "\n" not in line
    assert over_limit(sl.load_study(BASE).spec) is None
    with pytest.raises(sl.InputError, match=f"the {stage} stage"):
        sl.load_study(BASE + section).run()


def test_sobol_samples_and_variants_multiply_the_estimate():
    base = estimate(sl.load_study(BASE).spec)["seconds"]
    sobol = estimate(sl.load_study(BASE + SOBOL).spec)
    assert sobol["stage"] == "sensitivity" and sobol["seconds"] > 10 * base
    variants = ("\n[[variant]]\nname = \"a\"\ndecision = { beta = 2.0 }\n"
                "\n[[variant]]\nname = \"b\"\ndecision = { beta = 3.0 }\n")
    tripled = estimate(sl.load_study(BASE + variants).spec)
    assert tripled["copies"] == 3 and tripled["seconds"] == pytest.approx(3 * base)
