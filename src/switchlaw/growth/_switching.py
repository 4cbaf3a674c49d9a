"""Growth-optimal stochastic switching rates, and what sensing must cost to be worse."""

from __future__ import annotations

import numpy as np
from scipy.optimize import minimize

from .._deprecation import renamed_keyword
from .._errors import InputError
from .._validate import as_array
from ._checks import check_count, check_rates, check_seed
from ._continuous import BURN_IN, check_continuous, periodic_rate, simulated_rate
from ._environments import PeriodicHabitat, _switching_path
from ._results import GrowthEstimate, SwitchingOptimum

#: Equal rates tried across the bounds (log-spaced) to pick the optimiser's starting point.
SCAN_POINTS = 19


def _bounds(bounds, habitat) -> tuple[float, float]:
    """Rate bounds (per unit time): given, or 1e-6 to 1e3 over the mean duration of a state."""
    if bounds is None:
        if isinstance(habitat, PeriodicHabitat):
            mean_duration = habitat.period / habitat.durations.size
        else:
            mean_duration = float(habitat.probs @ habitat.mean_durations)
        return 1e-6 / mean_duration, 1e3 / mean_duration
    low, high = as_array(bounds, "bounds", ndim=1) if np.size(bounds) == 2 else (None, None)
    if low is None or not 0 < low < high:
        raise InputError(f"`bounds` must be (low, high) with 0 < low < high (got {bounds!r})")
    return float(low), float(high)


@renamed_keyword("env", "habitat")
def optimal_switching(
    rates,
    habitat,
    *,
    bounds=None,
    epochs: int = 5_000,
    batches: int = 20,
    seed=None,
) -> SwitchingOptimum:
    """Constant switching rates that maximise long-run growth in a fluctuating environment.

    Parameters
    ----------
    rates : array_like, shape (environments, phenotypes)
        Per-capita growth rate of each phenotype in each environment (per unit time).
    habitat : PeriodicHabitat or SwitchingHabitat
    bounds : (float, float), optional
        Range searched for every switching rate (per unit time); default ``1e-6`` to ``1e3``
        over the mean duration of an environment state.
    epochs, batches, seed :
        Simulation settings for a switching environment (see :func:`continuous_growth`).
        The same history is used for every candidate (common random numbers), so the
        objective is a smooth function of the rates.

    Returns
    -------
    SwitchingOptimum
        The rates, the growth they reach, and ``break_even_cost``: the growth a population
        would have if it sensed the environment perfectly and took the best phenotype at
        once, minus the optimum — the sensing cost per unit time at which sensing stops
        paying.

    Notes
    -----
    Every off-diagonal rate ``k_ij`` is optimised on a log scale within ``bounds`` by
    L-BFGS-B with finite-difference gradients, started from the best of 19 log-spaced equal
    rates (a local optimiser: the landscape can have more than one peak). The objective is
    the exact periodic growth rate, or the simulated one in a switching environment. With
    large growth-rate differences between phenotypes, the optimal rate out of a phenotype
    approaches ``1 / (duration of the environment it is fit in)``: optimal switching tracks
    the rate of environmental change (Kussell & Leibler 2005).

    References
    ----------
    Kussell, E. & Leibler, S. (2005). Phenotypic diversity, population growth, and
    information in fluctuating environments. *Science* 309:2075–2078.

    Examples
    --------
    >>> from switchlaw.growth import PeriodicHabitat
    >>> habitat = PeriodicHabitat([0, 1], [20.0, 50.0])
    >>> best = optimal_switching([[1.0, -1.0], [-1.0, 1.0]], habitat)
    >>> [round(float(k), 2) for k in (best.rates[0, 1] * 20.0, best.rates[1, 0] * 50.0)]
    [1.04, 1.04]
    """
    g = check_rates(rates)
    n = g.shape[1]
    base, fractions = check_continuous(g, np.zeros((n, n)), habitat)
    if n < 2:
        raise InputError(f"`rates` must have at least two phenotypes to switch between (got {n})")
    if not isinstance(habitat, PeriodicHabitat) and habitat.n_states < 2:
        raise InputError("`habitat` must have at least two states for switching to matter (got 1)")
    low, high = _bounds(bounds, habitat)
    off = ~np.eye(n, dtype=bool)

    def generator(log_rates: np.ndarray) -> np.ndarray:
        k = np.zeros((n, n))
        k[off] = np.exp(log_rates)
        k[np.arange(n), np.arange(n)] = -k.sum(axis=1)
        return k

    if isinstance(habitat, PeriodicHabitat):
        def growth(log_rates) -> GrowthEstimate:
            rate = periodic_rate(base + generator(log_rates).T[None], habitat)
            return GrowthEstimate(rate, 0.0, "spectral radius", message="periodic environment")
    else:
        epochs = check_count(epochs, "epochs")
        batches = check_count(batches, "batches", 2)
        rng = check_seed(seed, "when the growth rate is estimated by simulation")
        burn = int(np.ceil(BURN_IN * epochs))
        states, durations = _switching_path(habitat.rates, habitat.probs, burn + epochs, rng)

        def growth(log_rates) -> GrowthEstimate:
            matrices = base + generator(log_rates).T[None]
            result = simulated_rate(matrices, states, durations, burn, batches)
            rate, error = (-np.inf, 0.0) if result is None else result
            return GrowthEstimate(rate, error, "simulation", epochs, batches,
                                  "switching environment; the same history for every candidate")

    def loss(log_rates) -> float:
        rate = growth(log_rates).rate
        return -rate if np.isfinite(rate) else 1e300

    scan = np.linspace(np.log(low), np.log(high), SCAN_POINTS)
    start = np.full(off.sum(), scan[int(np.argmin([loss(np.full(off.sum(), x)) for x in scan]))])
    outcome = minimize(
        loss, start, method="L-BFGS-B", bounds=[(np.log(low), np.log(high))] * start.size,
        options={"ftol": 1e-15, "gtol": 1e-10, "maxiter": 500},
    )
    estimate = growth(outcome.x)
    sensing = float(fractions @ g.max(axis=1))
    return SwitchingOptimum(
        rates=generator(outcome.x), growth_rate=estimate, sensing_growth_rate=sensing,
        break_even_cost=sensing - estimate.rate, converged=bool(outcome.success),
        iterations=int(outcome.nit), message=str(outcome.message),
    )
