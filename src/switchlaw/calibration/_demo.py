"""An INVENTED demo data set and the helper a study file's ``[calibration]`` section calls.

The data are invented: simulated, with a seed, from known parameters, so a newcomer can watch a
fit recover them. They describe no real cells.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from .._errors import InputError

#: Known parameters of the invented colony data (nats per payoff unit; payoff units).
TRUTH = {"beta": 6.0, "half": 2.0, "roam_value": 0.45}
PHENOTYPES = ("divide", "roam")


def colony_payoff(half: float, roam_value: float):
    """Invented payoff: dividing pays ``y / (y + half)`` with ``y`` occupied neighbours of 6
    (crowding signals a good site), roaming pays the constant ``roam_value`` (payoff units)."""
    return {
        "divide": lambda y: np.asarray(y, dtype=float) / (np.asarray(y, dtype=float) + half),
        "roam": lambda y: np.full(np.shape(y), float(roam_value)),
    }


def colony_environment(density):
    """Occupied neighbours of 6 (hexagonal), Binomial at ``density``."""
    from ..laws._environments import occupancy

    return occupancy(6, density)


@dataclass(frozen=True)
class DemoData:
    """INVENTED per-cell counts: ``counts[density, occupied neighbours, phenotype]``.

    Attributes
    ----------
    counts : ndarray, shape (k, 7, 2)
    densities : ndarray, shape (k,)
    truth : dict
        The parameters the data were simulated from.
    phenotypes : tuple of str
    """

    counts: np.ndarray
    densities: np.ndarray
    truth: dict
    phenotypes: tuple = PHENOTYPES

    def rows(self) -> list[dict]:
        """Tidy rows ``{density, state, phenotype, count}`` (zero counts left out), for a CSV."""
        out = []
        for i, rho in enumerate(self.densities):
            for y in range(self.counts.shape[1]):
                for x, name in enumerate(self.phenotypes):
                    if self.counts[i, y, x] > 0:
                        out.append({"density": float(rho), "state": y, "phenotype": name,
                                    "count": int(self.counts[i, y, x])})
        return out


def invented_colony_data(*, seed=0, densities=None, cells: int = 400, truth=None) -> DemoData:
    """Simulate INVENTED counts of (occupied neighbours, phenotype) from known parameters.

    Each of ``cells`` cells per density senses ``Y ~ Binomial(6, rho)`` occupied neighbours and
    divides with the max-entropy (logistic) probability ``1 / (1 + exp(-beta Δu(Y)))``,
    ``Δu(y) = y / (y + half) - roam_value``.

    Parameters
    ----------
    seed : int or numpy.random.Generator
    densities : array_like, optional
        Default: 10 densities from 0.1 to 0.8.
    cells : int
        Cells observed per density.
    truth : mapping, optional
        ``beta``, ``half``, ``roam_value`` (default :data:`TRUTH`).

    Returns
    -------
    DemoData

    Examples
    --------
    >>> data = invented_colony_data(seed=1)
    >>> data.counts.shape, int(data.counts.sum())
    ((10, 7, 2), 4000)
    """
    from ..decision._solve import max_entropy_policy
    from ..laws._payoffs import payoff_table

    truth = dict(TRUTH if truth is None else truth)
    grid = np.linspace(0.1, 0.8, 10) if densities is None else np.asarray(densities, dtype=float)
    generator = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    payoff = colony_payoff(truth["half"], truth["roam_value"])
    counts = np.zeros((grid.size, 7, 2))
    for i, rho in enumerate(grid):
        env = colony_environment(float(rho))
        table, _ = payoff_table(payoff, env, PHENOTYPES)
        joint = env.probs[:, None] * max_entropy_policy(table, truth["beta"], None)
        counts[i] = generator.multinomial(int(cells), joint.ravel() / joint.sum()).reshape(7, 2)
    return DemoData(counts=counts, densities=grid, truth=truth)


#: Keys a ``[calibration]`` study-file section may hold.
SECTION_KEYS = ("data", "free", "fixed", "objective", "starts", "seed", "bootstrap", "population")


def run_calibration_section(section: Mapping, *, payoff, environment, phenotypes, base_dir=".",
                            division=None, death=None, tau=None, figures: bool = True) -> dict:
    """Run a parsed ``[calibration]`` section: fit, carry to the population, draw the figures.

    Parameters
    ----------
    section : mapping
        ``data`` (CSV path, relative to ``base_dir``; tidy columns as in
        :func:`switchlaw.calibrate`), ``free`` (name -> ``[low, high]``), optional ``fixed``
        (name -> value), ``objective``, ``starts``, ``seed``, ``bootstrap``.
    payoff : callable
        ``payoff(**params) -> table or mapping`` built from the study's payoff expressions;
        its keywords are the names in ``free`` and ``fixed`` other than ``beta``/``cost_per_bit``.
    environment : callable
        ``density -> Environment`` of the study.
    phenotypes : sequence of str
    base_dir : path
        Folder of the study file.
    division, death, tau : optional
        The study's population rates; with them the result carries a :class:`PopulationVerdict`.
    figures : bool
        Draw the fit and profile figures (matplotlib ``Figure`` objects; the caller saves them).

    Returns
    -------
    dict
        ``calibration`` (:class:`Calibration`), ``population`` (:class:`PopulationVerdict` or
        ``None``), ``figures`` (name -> Figure), ``table`` (rows of estimates for a report).
    """
    unknown = [key for key in section if key not in SECTION_KEYS]
    if unknown:
        raise InputError(f"`calibration.{unknown[0]}` is not a known key (known: {list(SECTION_KEYS)})")
    if "data" not in section or "free" not in section:
        missing = "data" if "data" not in section else "free"
        raise InputError(f"`calibration.{missing}` is required")
    path = os.path.join(os.fspath(base_dir), os.fspath(section["data"]))
    if not os.path.isfile(path):
        raise InputError(f"`calibration.data` names no readable file (got {section['data']!r})")
    free = section["free"]
    if not isinstance(free, Mapping):
        raise InputError(f"`calibration.free` must map names to [low, high] (got {free!r})")
    from ._fit import calibrate
    from ._population import population_verdict

    result = calibrate(
        path, payoff, environment, free={k: tuple(v) for k, v in free.items()},
        fixed=section.get("fixed"), objective=section.get("objective", "max-entropy"),
        phenotypes=tuple(phenotypes), starts=section.get("starts", 4), seed=section.get("seed", 0),
        bootstrap=section.get("bootstrap", 0),
    )
    verdict = None
    if division is not None and death is not None and section.get("population", True):
        verdict = population_verdict(result, division=division, death=death, tau=tau)
    drawn = {}
    if figures:
        from matplotlib.figure import Figure  # no pyplot: no global figure state

        from ..plotting import plot_calibration, plot_profiles

        fig = Figure(figsize=(5, 3.5), layout="constrained")
        plot_calibration(result, ax=fig.subplots())
        drawn["calibration_fit"] = fig
        fig = Figure(figsize=(4 * len(result.estimates), 3.2), layout="constrained")
        axes = fig.subplots(1, len(result.estimates), squeeze=False)
        for ax, name in zip(axes[0], result.estimates):
            plot_profiles(result, name, ax=ax)
        drawn["calibration_profiles"] = fig
    table = [
        {"parameter": name, "estimate": value, "low": result.intervals[name][0],
         "high": result.intervals[name][1], "identifiable": result.identifiable[name]}
        for name, value in result.estimates.items()
    ]
    return {"calibration": result, "population": verdict, "figures": drawn, "table": table}
