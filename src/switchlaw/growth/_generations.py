"""Long-run growth in discrete generations: exact where a formula exists, otherwise the top
Lyapunov exponent of the random matrix product, estimated from one long history."""

from __future__ import annotations

import numpy as np

from .._deprecation import renamed_keyword
from .._errors import InputError
from .._validate import as_array, as_distribution, choice
from ._batch_means import batch_means
from ._checks import check_count, check_cue, check_fitness, check_inheritance, check_seed
from ._environments import MarkovHabitat, PeriodicHabitat, _markov_path
from ._growth_rate import memoryless_growth
from ._products import log_spectral_radius
from ._results import GrowthEstimate

#: ``method=`` names.
METHODS = ("auto", "simulation")
#: Fraction of the simulated generations run first and discarded, so that the phenotype
#: composition forgets its start.
BURN_IN = 0.05


def _environment(habitat, n_rows: int):
    """``(kind, weights, occurs)``: the long-run fraction of generations in each state and
    which states occur, for an independent, Markov or periodic environment."""
    if isinstance(habitat, PeriodicHabitat):
        if (habitat.durations != np.round(habitat.durations)).any():
            i = int(np.argmax(habitat.durations != np.round(habitat.durations)))
            raise InputError(
                f"`habitat.durations` must be whole numbers of generations; entry {i} is "
                f"{float(habitat.durations[i])!r}"
            )
        if habitat.states.max() >= n_rows:
            raise InputError(
                f"`habitat.states` must index the rows of `fitness` (0 to {n_rows - 1}) "
                f"(got state {int(habitat.states.max())})"
            )
        fractions = habitat.time_fractions(n_rows)
        return "periodic", fractions, fractions > 0
    if isinstance(habitat, MarkovHabitat):
        probs = habitat.probs
        return "markov", probs, np.ones(probs.size, dtype=bool)
    probs = as_distribution(habitat, "habitat")
    return "independent", probs, probs > 0


@renamed_keyword("env", "habitat")
def generation_growth(
    fitness,
    habitat,
    strategy,
    *,
    cue=None,
    method: str = "auto",
    generations: int = 100_000,
    batches: int = 20,
    seed=None,
) -> GrowthEstimate:
    """Long-run growth rate in discrete generations (nats per generation), with inheritance.

    Parameters
    ----------
    fitness : array_like, shape (environments, phenotypes)
        Offspring per individual, >= 0.
    habitat : array_like, MarkovHabitat or PeriodicHabitat
        Environment probabilities (independent across generations), a Markov chain, or a
        periodic sequence with durations in whole generations.
    strategy : array_like
        How offspring choose their phenotype. Memoryless (whatever the parent's phenotype):
        a distribution ``(phenotypes,)``, or with a cue a policy ``[cue_state, phenotype]``.
        Inherited: a switching matrix ``[parent, offspring]``, or with a cue one per cue
        state, ``[cue_state, parent, offspring]``.
    cue : array_like, shape (environments, cue states), optional
        Sensing channel; each generation's cue is drawn given that generation's environment
        and read by its newborns.
    method : {"auto", "simulation"}
        ``"auto"`` uses an exact formula when there is one (see Notes) and simulates
        otherwise; ``"simulation"`` always simulates.
    generations : int
        Generations simulated after a burn-in of 5 % more (simulation only).
    batches : int
        Batches for the standard error (simulation only), >= 2.
    seed : int or numpy.random.Generator
        Required when simulating.

    Returns
    -------
    GrowthEstimate

    Notes
    -----
    The phenotype numbers follow ``n_{t+1} = diag(f(e_t)) S(c_t)^T n_t``. Exact cases:

    * a memoryless strategy in any of the environments: the population multiplies by
      ``sum_x f(e, x) q(x | c)`` each generation, so
      ``Lambda = sum_e w(e) sum_c P(c|e) log sum_x f(e,x) q(x|c)`` with ``w`` the long-run
      fraction of generations in each state (ergodic theorem) — ``"closed form"``;
    * a periodic environment without a cue:
      ``Lambda = log rho(M_L ... M_1) / L``, the Perron root of the product over one period
      — ``"spectral radius"``.

    Otherwise the growth rate is the top Lyapunov exponent of the random product
    (Furstenberg & Kesten 1960), estimated as ``(1/T) sum_t log(|n_{t+1}| / |n_t|)`` along
    one history, with a standard error from batch means.

    References
    ----------
    Furstenberg, H. & Kesten, H. (1960). Products of random matrices. *Ann. Math. Stat.*
    31:457–469. Tuljapurkar, S. (1990). *Population Dynamics in Variable Environments*.
    Springer.

    Examples
    --------
    >>> estimate = generation_growth([[2.0, 0.5], [0.5, 2.0]], [0.5, 0.5], [0.5, 0.5])
    >>> estimate.method, round(estimate.rate, 12)
    ('closed form', 0.223143551314)
    """
    kind, weights, occurs = _environment(habitat, as_array(fitness, "fitness", ndim=2).shape[0])
    f = check_fitness(fitness, weights.size, occurs)
    channel = None if cue is None else check_cue(cue, weights.size)
    switching, memoryless = check_inheritance(
        strategy, f.shape[1], None if channel is None else channel.shape[1]
    )
    choice(method, "method", METHODS)
    if method == "auto" and memoryless:
        rate = memoryless_growth(f, weights, switching[:, 0, :], channel)
        return GrowthEstimate(
            rate, 0.0, "closed form", message=f"{kind} environment, memoryless strategy"
        )
    if method == "auto" and kind == "periodic" and channel is None:
        factors = (
            (f[e][:, None] * switching[0].T, 0.0)
            for e, d in zip(habitat.states, habitat.durations.astype(int))
            for _ in range(d)
        )
        rate = log_spectral_radius(factors) / habitat.period
        return GrowthEstimate(rate, 0.0, "spectral radius", message="periodic environment")
    generations = check_count(generations, "generations")
    batches = check_count(batches, "batches", 2)
    if generations < batches:
        raise InputError(
            f"`generations` must be at least `batches` ({batches}) (got {generations})"
        )
    rng = check_seed(seed, "when the growth rate is estimated by simulation")
    burn = int(np.ceil(BURN_IN * generations))
    states = _sample_states(kind, habitat, weights, burn + generations, rng)
    if channel is None:
        cues = np.zeros(states.size, dtype=np.intp)
    else:
        cues = _sample_cues(channel, states, rng)
    increments = _lyapunov_increments(f, switching, states, cues)
    if increments is None:
        return GrowthEstimate(
            -np.inf, 0.0, "simulation", generations, batches, "the lineage died out"
        )
    rate, error = batch_means(increments[burn:], np.ones(generations), batches)
    return GrowthEstimate(
        rate, error, "simulation", generations, batches,
        f"{kind} environment; top Lyapunov exponent from one history after {burn} burn-in "
        "generations",
    )


def _sample_states(kind, habitat, weights, length, rng) -> np.ndarray:
    if kind == "independent":
        return rng.choice(weights.size, size=length, p=weights)
    if kind == "markov":
        return _markov_path(habitat.transition, weights, length, rng)
    one_period = np.repeat(habitat.states, habitat.durations.astype(int))
    return np.resize(one_period, length)


def _sample_cues(channel: np.ndarray, states: np.ndarray, rng) -> np.ndarray:
    """One cue per generation, drawn from ``channel[e_t]`` by inverse CDF."""
    cumulative = np.cumsum(channel, axis=1)
    cumulative[:, -1] = 1.0
    uniforms = rng.random(states.size)
    return (uniforms[:, None] >= cumulative[states]).sum(axis=1)


def _lyapunov_increments(fitness, switching, states, cues) -> np.ndarray | None:
    """``log(|n_{t+1}| / |n_t|)`` per generation; ``None`` if the population vanishes."""
    transposed = np.transpose(switching, (0, 2, 1)).copy()
    n = fitness.shape[1]
    v = np.full(n, 1.0 / n)
    increments = np.empty(states.size)
    for t, (e, c) in enumerate(zip(states.tolist(), cues.tolist())):
        v = fitness[e] * (transposed[c] @ v)
        total = v.sum()
        if not total > 0:
            return None
        increments[t] = np.log(total)
        v /= total
    return increments
