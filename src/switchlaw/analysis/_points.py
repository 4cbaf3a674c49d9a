"""Ready-made point functions for :func:`scan`: law summaries, regimes, critical betas and
extinction risk, over any parameter of a model family (see :mod:`._family`).

Each is a picklable callable ``f(point, rng) -> dict`` that also tells :func:`scan` which
parameters it accepts (``check_parameters``) and how to label its outputs (``scan_labels``).
"""

from __future__ import annotations

import math
from collections import OrderedDict

import numpy as np

from .._errors import InputError
from .._validate import as_array
from ..laws._law import _sensed, derive_law
from ..laws._payoffs import payoff_table
from ..population._mean_field import REGIMES
from ._quantity import Quantity
from .._deprecation import renamed_keyword
from ._family import ModelFamily

_BETA = "nats per payoff unit"


def _phenotypes(family: ModelFamily, density: float):
    model = family.default_model()
    if model is None:
        return None
    try:
        env = _sensed(model.environment, density)
        return list(payoff_table(model.payoff, env, model.phenotypes)[1])
    except Exception:
        return None


class _PointFunction:
    """Shared parts: the model family, the parameter check and the labels."""

    law = True
    exclude: tuple = ()

    def check_parameters(self, names) -> None:
        self.family.check(names, law=self.law, exclude=self.exclude)

    @property
    def parameters(self) -> tuple:
        """Parameters this point function accepts in a grid."""
        return tuple(n for n in self.family.names if n not in self.exclude)

    def __repr__(self) -> str:
        return f"{type(self).__name__}(parameters: {', '.join(self.parameters)})"


class LawSummary(_PointFunction):
    """Information, expected payoff and phenotype fractions of the law at each density.

    Parameters
    ----------
    model : MeanField or callable
        The model (its payoff, environment and objective make the law), or a builder.
    densities : array_like
        Densities at which the law is summarised (strictly increasing, in [0, 1]).
    fixed : mapping, optional
        Parameter values for every point (e.g. ``{"beta": 2.0}`` when scanning a cost).

    Outputs: ``information`` (bit), ``expected_payoff`` (payoff unit), ``fraction``
    (mean-field phenotype fractions), ``converged``; all along ``density``.
    """

    @renamed_keyword("study", "model")
    def __init__(self, model, *, densities, fixed=None):
        self.family = ModelFamily(model, fixed)
        self.densities = as_array(densities, "densities", ndim=1)
        if (self.densities < 0).any() or (self.densities > 1).any() or (np.diff(self.densities) <= 0).any():
            raise InputError("`densities` must be strictly increasing and lie in [0, 1]")
        names = _phenotypes(self.family, float(self.densities[0]))
        along = ("density",)
        self.scan_labels = {
            "density": Quantity("population density", "1"),
            "information": Quantity("mutual information I(X;Y) of the law", "bit", along,
                                    {"density": self.densities}),
            "expected_payoff": Quantity("expected payoff E[u]", "payoff unit", along,
                                        {"density": self.densities}),
            "fraction": Quantity("mean-field phenotype fraction", "1", along + ("phenotype",),
                                 {"density": self.densities, **({"phenotype": names} if names else {})}),
            "converged": Quantity("solver converged", None, along, {"density": self.densities}),
            "phenotype": Quantity("phenotype"),
        }

    def __call__(self, point, rng):
        values = self.family.values(point)
        model = self.family.build(values)
        law = derive_law(model.payoff, model.environment, densities=self.densities,
                         beta=self.family.beta(values), objective=model.objective,
                         phenotypes=model.phenotypes)
        return {
            "information": law.information_bits,
            "expected_payoff": law.expected_payoff,
            "fraction": np.einsum("ky,kyx->kx", law.state_probs, law.table),
            "converged": law.converged,
        }


class RegimeSummary(_PointFunction):
    """Mean-field regime, equilibria and Allee threshold at each point.

    Outputs: ``regime`` (one of ``extinction``, ``monostable``, ``weak-allee``,
    ``strong-allee``), ``stable_density`` (largest stable positive equilibrium, NaN if none),
    ``allee_threshold`` (NaN without a strong Allee effect), ``low_density_growth`` (per unit
    time) and ``positive_equilibria`` (how many).
    """

    @renamed_keyword("study", "model")
    def __init__(self, model, *, fixed=None, points: int = 201):
        self.family = ModelFamily(model, fixed)
        self.points = int(points)
        self.scan_labels = {
            "regime": Quantity(f"mean-field regime ({', '.join(REGIMES)})"),
            "stable_density": Quantity("largest stable positive equilibrium density", "1"),
            "allee_threshold": Quantity("Allee threshold density", "1"),
            "low_density_growth": Quantity("growth rate of a rare population", "per unit time"),
            "positive_equilibria": Quantity("number of positive equilibria", "1"),
        }

    def __call__(self, point, rng):
        values = self.family.values(point)
        model = self.family.build(values)
        beta = self.family.beta(values)
        found = model.equilibria(beta, points=self.points)
        stable = [e.density for e in found[1:] if e.stable]
        threshold = model.allee_threshold(beta, points=self.points)
        return {
            "regime": model.regime(beta, points=self.points),
            "stable_density": max(stable) if stable else math.nan,
            "allee_threshold": math.nan if threshold is None else threshold,
            "low_density_growth": model.low_density_growth(beta),
            "positive_equilibria": len(found) - 1,
        }


class CriticalBetas(_PointFunction):
    """Critical betas in ``[beta_min, beta_max]`` at each point (continuation in beta).

    Outputs: ``transcritical_beta`` and ``fold_beta`` (the smallest of each kind, NaN if
    none) and ``critical_points`` (how many of any kind).
    """

    law = False
    exclude = ("beta", "cost_per_bit")

    @renamed_keyword("study", "model")
    def __init__(self, model, *, beta_min, beta_max, fixed=None):
        self.family = ModelFamily(model, fixed)
        self.beta_min, self.beta_max = float(beta_min), float(beta_max)
        if not 0 <= self.beta_min < self.beta_max:
            raise InputError(f"`beta_max` must exceed `beta_min` >= 0 (got {beta_min!r}, {beta_max!r})")
        self.scan_labels = {
            "transcritical_beta": Quantity("smallest transcritical beta in range", _BETA),
            "fold_beta": Quantity("smallest fold beta in range", _BETA),
            "critical_points": Quantity("number of critical betas in range", "1"),
        }

    def __call__(self, point, rng):
        model = self.family.build(self.family.values(point))
        found = model.critical_betas(self.beta_min, self.beta_max)

        def first(kind):
            betas = [c.beta for c in found if c.kind == kind]
            return min(betas) if betas else math.nan

        return {"transcritical_beta": first("transcritical"), "fold_beta": first("fold"),
                "critical_points": len(found)}


def _whole(value, name: str, low: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < low:
        raise InputError(f"`{name}` must be an integer >= {low} (got {value!r})")
    return int(value)


class ExtinctionRisk(_PointFunction):
    """One stochastic run per call: does a small population die out before it establishes?

    A birth–death chain on ``n`` cells among ``sites`` sites, with the mean-field law at
    density ``n / sites`` (fast-switching limit): births at rate
    ``n sum_x f_x b_x (1 - n/sites)``, deaths at ``n sum_x f_x (d_x + c_x n/sites)``. The
    embedded jump chain is run from ``initial`` cells until it hits 0 (``extinct``) or
    ``target`` (established). Use ``scan(..., replicates=R)`` for ``R`` independent runs per
    point; the fraction extinct estimates the probability, whose exact value follows from
    first-step analysis (Karlin & Taylor 1975, ch. 4).

    Outputs: ``extinct`` (bool) and ``steps`` (jumps until 0 or ``target``). A state with
    neither births nor deaths ends the run, not extinct.

    References
    ----------
    Karlin & Taylor (1975), *A First Course in Stochastic Processes*, 2nd ed., ch. 4.
    """

    @renamed_keyword("study", "model")
    def __init__(self, model, *, sites, initial, target, fixed=None):
        self.family = ModelFamily(model, fixed)
        self.sites = _whole(sites, "sites", 2)
        self.target = _whole(target, "target", 2)
        self.initial = _whole(initial, "initial", 1)
        if self.target > self.sites:
            raise InputError(f"`target` must be <= `sites` ({self.sites}) (got {self.target})")
        if self.initial >= self.target:
            raise InputError(f"`initial` must be below `target` ({self.target}) (got {self.initial})")
        self._rates: OrderedDict = OrderedDict()
        self.scan_labels = {
            "extinct": Quantity("died out before reaching the target size"),
            "steps": Quantity("births and deaths until 0 or the target size", "1"),
        }

    def birth_probabilities(self, values) -> np.ndarray:
        """``P(next event is a birth | n cells)`` for ``n = 0..target`` (NaN where stuck)."""
        key = tuple(sorted(values.items()))
        if key in self._rates:
            return self._rates[key]
        model = self.family.build(values)
        if model.tau is not None:
            raise InputError("ExtinctionRisk uses the fast-switching limit: build the model with tau=None")
        beta = self.family.beta(values)
        chance = np.full(self.target + 1, np.nan)
        for n in range(1, self.target):
            rho = n / self.sites
            f = model.fractions(rho, beta)
            birth = f @ model.division * (1.0 - rho)
            death = f @ (model.death + model.crowding * rho)
            if birth + death > 0:
                chance[n] = birth / (birth + death)
        self._rates[key] = chance
        if len(self._rates) > 8:
            self._rates.popitem(last=False)
        return chance

    def __getstate__(self):
        state = dict(self.__dict__)
        state["_rates"] = OrderedDict()
        return state

    def __call__(self, point, rng):
        chance = self.birth_probabilities(self.family.values(point))
        n, steps = self.initial, 0
        while 0 < n < self.target:
            if np.isnan(chance[n]):
                break
            n += 1 if rng.random() < chance[n] else -1
            steps += 1
        return {"extinct": n == 0, "steps": steps}
