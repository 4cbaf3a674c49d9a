"""One name per idea: the public namespace, and old names kept for one release with a warning."""

from __future__ import annotations

import switchlaw


def test_dir_lists_public_names_and_dunders_only():
    # PEP 562 module __dir__: what dir() shows is up to the module (common practice, no source).
    extra = [name for name in dir(switchlaw) if name not in switchlaw.__all__]
    assert "annotations" not in dir(switchlaw) and "importlib" not in dir(switchlaw)
    assert all(name.startswith("__") and name.endswith("__") for name in extra), extra
    assert set(switchlaw.__all__) <= set(dir(switchlaw))


def test_old_habitat_names_warn_and_still_work():
    # Kept for one release (issue 17): the old class names and the old `env=` keyword of the
    # growth functions. Reference for the number: Kelly (1956) / Cover & Thomas (2006, ch. 6),
    # the growth rate of proportional betting with fitness diag(2, 2) in a fair coin habitat is
    # sum_e p(e) log(2 p(e)) = log 2 - H(p) = 0 for p = (1/2, 1/2).
    import pytest

    with pytest.warns(DeprecationWarning, match="MarkovHabitat"):
        old = switchlaw.MarkovEnvironment
    assert old is switchlaw.MarkovHabitat
    for old_name, new_name in (("PeriodicEnvironment", "PeriodicHabitat"), ("SwitchingEnvironment", "SwitchingHabitat")):
        with pytest.warns(DeprecationWarning, match=new_name):
            assert getattr(switchlaw, old_name) is getattr(switchlaw, new_name)
        with pytest.warns(DeprecationWarning, match=new_name):
            assert getattr(switchlaw.growth, old_name) is getattr(switchlaw, new_name)
    fitness = [[2.0, 0.0], [0.0, 2.0]]
    with pytest.warns(DeprecationWarning, match="habitat"):
        rate = switchlaw.growth_rate(fitness, env=[0.5, 0.5], strategy=[0.5, 0.5])
    assert abs(rate) < 1e-12
    assert switchlaw.growth_rate(fitness, habitat=[0.5, 0.5], strategy=[0.5, 0.5]) == rate
    with pytest.raises(switchlaw.InputError, match="habitat"):
        switchlaw.growth_rate(fitness, env=[0.5, 0.5], habitat=[0.5, 0.5], strategy=[0.5, 0.5])
    assert "MarkovEnvironment" not in switchlaw.__all__ and "MarkovHabitat" in switchlaw.__all__


def test_point_functions_take_model_and_warn_on_study():
    # `study` means the study file only (issue 17); the point functions' first argument is the
    # model (a MeanField or a builder); `study=` still works for one release, with a warning.
    # Reference for the value: Lotka-Volterra-type logistic growth n' = (b - d) n - b n^2 with a
    # single phenotype has its stable equilibrium at 1 - d / b (Murray 2002, Mathematical
    # Biology I, ch. 1), here b = 1, d = 0.25: 0.75.
    import numpy as np
    import pytest

    model = switchlaw.MeanField({"grow": switchlaw.Linear(0.0, 1.0)}, lambda rho: switchlaw.occupancy(4, rho),
                                division=[1.0], death=[0.25])
    with pytest.warns(DeprecationWarning, match="model"):
        old = switchlaw.RegimeSummary(study=model)
    new = switchlaw.RegimeSummary(model)
    for summary in (old, new):
        values = summary({"beta": 1.0}, None)
        assert np.isclose(float(values["stable_density"]), 0.75, atol=1e-6)
