"""Long-run growth in continuous time with phenotype switching:
``n' = (diag(g(e)) + K(e)^T) n`` while the environment is in state ``e``."""

from __future__ import annotations

import numpy as np
from scipy.linalg import expm

from .._deprecation import renamed_keyword
from .._errors import InputError
from .._validate import _show, as_positive, as_stochastic_matrix
from ._batch_means import batch_means
from ._checks import check_count, check_generator, check_rates, check_seed
from ._environments import PeriodicHabitat, SwitchingHabitat, _switching_path
from ._products import log_spectral_radius, principal_eigenvalue
from ._results import GrowthEstimate

#: Fraction of the simulated epochs run first and discarded.
BURN_IN = 0.05
#: Eigenvector matrices better conditioned than this give the exponentials by
#: diagonalisation; worse ones fall back to ``scipy.linalg.expm``.
_EIGEN_CONDITION = 1e6


def switching_generator(policy, *, tau) -> np.ndarray:
    """Switching rates of a law whose cells re-decide at rate ``1 / tau``.

    Parameters
    ----------
    policy : array_like or Policy, shape (environments, phenotypes)
        ``q(x | e)``, e.g. ``switchlaw.solve(...).probs`` with the environment states as the
        sensed states; a :class:`switchlaw.Policy` is accepted.
    tau : float
        Decision timescale (time units), > 0.

    Returns
    -------
    ndarray, shape (environments, phenotypes, phenotypes)
        ``rates[e, i, j] = q(j | e) / tau`` for ``j != i``; the diagonal is minus the row sum.
        In a fixed environment ``e`` the phenotype distribution relaxes to ``q(. | e)``.

    Examples
    --------
    >>> switching_generator([[0.8, 0.2]], tau=2.0)[0].tolist()
    [[-0.1, 0.1], [0.4, -0.4]]
    """
    probs = as_stochastic_matrix(getattr(policy, "probs", policy), "policy")
    tau = as_positive(tau, "tau")
    n = probs.shape[1]
    rates = np.repeat(probs[:, None, :] / tau, n, axis=1)
    rates[:, np.arange(n), np.arange(n)] = 0.0
    rates[:, np.arange(n), np.arange(n)] = -rates.sum(axis=2)
    return rates


def growth_matrices(rates: np.ndarray, generators: np.ndarray) -> np.ndarray:
    """``A(e) = diag(g(e)) + K(e)^T`` for every environment: ``n' = A(e) n``."""
    matrices = np.transpose(generators, (0, 2, 1)).copy()
    n = rates.shape[1]
    matrices[:, np.arange(n), np.arange(n)] += rates
    return matrices


def check_continuous(rates, switching, habitat) -> tuple[np.ndarray, np.ndarray]:
    """Validated growth matrices ``A[e]`` and time fractions of the states."""
    g = check_rates(rates)
    if isinstance(habitat, PeriodicHabitat):
        if habitat.states.max() >= g.shape[0]:
            raise InputError(
                f"`habitat.states` must index the rows of `rates` (0 to {g.shape[0] - 1}) "
                f"(got state {int(habitat.states.max())})"
            )
        fractions = habitat.time_fractions(g.shape[0])
    elif isinstance(habitat, SwitchingHabitat):
        if habitat.n_states != g.shape[0]:
            raise InputError(
                f"`rates` must have one row per environment state ({habitat.n_states}) "
                f"(got shape {g.shape})"
            )
        fractions = habitat.probs
    else:
        raise InputError(
            f"`habitat` must be a PeriodicHabitat or a SwitchingHabitat (got {_show(habitat)})"
        )
    generators = check_generator(switching, g.shape[0], g.shape[1])
    return growth_matrices(g, generators), fractions


def periodic_rate(matrices: np.ndarray, habitat: PeriodicHabitat) -> float:
    """``log rho(expm(A_L T_L) ... expm(A_1 T_1)) / sum T``, each exponential shifted by its
    principal eigenvalue so that it neither overflows nor vanishes."""
    shifts = [principal_eigenvalue(a) for a in matrices]
    eye = np.eye(matrices.shape[1])

    def factors():
        for e, duration in zip(habitat.states, habitat.durations):
            yield expm((matrices[e] - shifts[e] * eye) * duration), shifts[e] * duration

    return log_spectral_radius(factors()) / habitat.period


def propagators(matrices: np.ndarray, shifts: np.ndarray, states: np.ndarray,
                durations: np.ndarray) -> np.ndarray:
    """``expm((A(e_i) - shift_e I) tau_i)`` for every epoch ``i``.

    Each state's shifted matrix is diagonalised once, ``V diag(w) V^-1``, and the epochs of
    that state are formed together as ``V diag(exp(w tau)) V^-1``. A state whose eigenvector
    matrix is ill conditioned (nearly defective) uses ``scipy.linalg.expm`` per epoch.
    """
    n = matrices.shape[1]
    out = np.empty((states.size, n, n))
    for e in np.unique(states):
        at = np.flatnonzero(states == e)
        shifted = matrices[e] - shifts[e] * np.eye(n)
        values, vectors = np.linalg.eig(shifted)
        if np.linalg.cond(vectors) < _EIGEN_CONDITION:
            inverse = np.linalg.inv(vectors)
            growth = np.exp(values[None, :] * durations[at, None])
            out[at] = np.einsum("ij,tj,jk->tik", vectors, growth, inverse).real
        else:
            out[at] = [expm(shifted * tau) for tau in durations[at]]
    return np.maximum(out, 0.0, out=out)


def simulated_rate(matrices, states, durations, burn: int, batches: int):
    """Growth along one environment history: ``(rate, standard error)`` or ``None`` if the
    population vanishes."""
    shifts = np.array([principal_eigenvalue(a) for a in matrices])
    n = matrices.shape[1]
    v = np.full(n, 1.0 / n)
    increments = shifts[states] * durations
    for i, propagator in enumerate(propagators(matrices, shifts, states, durations)):
        v = propagator @ v
        total = v.sum()
        if not total > 0:
            return None
        increments[i] += np.log(total)
        v /= total
    return batch_means(increments[burn:], durations[burn:], batches)


@renamed_keyword("env", "habitat")
def continuous_growth(
    rates,
    switching,
    habitat,
    *,
    epochs: int = 20_000,
    batches: int = 20,
    seed=None,
) -> GrowthEstimate:
    """Long-run growth rate of a switching population in continuous time (nats per unit time).

    Parameters
    ----------
    rates : array_like, shape (environments, phenotypes)
        Per-capita net growth rate of each phenotype in each environment (per unit time).
    switching : array_like, shape (phenotypes, phenotypes) or (environments, phenotypes, phenotypes)
        Switching rates ``[from, to]`` per unit time: constant (stochastic switching), or one
        matrix per environment state (a responsive law, e.g. from :func:`switching_generator`).
        The diagonal is 0 or minus the row sum.
    habitat : PeriodicHabitat or SwitchingHabitat
    epochs : int
        Environment epochs simulated after a burn-in of 5 % more (switching environments).
    batches : int
        Batches for the standard error, >= 2.
    seed : int or numpy.random.Generator
        Required for a switching environment with more than one state.

    Returns
    -------
    GrowthEstimate

    Notes
    -----
    In environment ``e`` the phenotype numbers obey ``n' = A(e) n`` with
    ``A(e) = diag(rates[e]) + K(e)^T``. In a periodic environment the growth rate is exact:
    ``Lambda = log rho(expm(A_L T_L) ... expm(A_1 T_1)) / sum_i T_i`` (Floquet theory; the
    product has non-negative entries, so its spectral radius is its Perron root). In a
    switching (Markov) environment it is the top Lyapunov exponent, estimated along one
    history, with a standard error from batch means of the ratio of log growth to time.
    One environment state: the principal eigenvalue of ``A``.

    References
    ----------
    Kussell, E. & Leibler, S. (2005). Phenotypic diversity, population growth, and
    information in fluctuating environments. *Science* 309:2075–2078.

    Examples
    --------
    A phenotype growing at 1 in state 0 and at -1 in state 1, held for 3 and 1 time units:

    >>> habitat = PeriodicHabitat([0, 1], [3.0, 1.0])
    >>> continuous_growth([[1.0], [-1.0]], [[0.0]], habitat).rate
    0.5
    """
    matrices, _ = check_continuous(rates, switching, habitat)
    if isinstance(habitat, PeriodicHabitat):
        return GrowthEstimate(periodic_rate(matrices, habitat), 0.0, "spectral radius",
                              message="periodic environment")
    if habitat.n_states == 1:
        return GrowthEstimate(principal_eigenvalue(matrices[0]), 0.0, "principal eigenvalue",
                              message="constant environment")
    epochs = check_count(epochs, "epochs")
    batches = check_count(batches, "batches", 2)
    if epochs < batches:
        raise InputError(f"`epochs` must be at least `batches` ({batches}) (got {epochs})")
    rng = check_seed(seed, "when the growth rate is estimated by simulation")
    burn = int(np.ceil(BURN_IN * epochs))
    states, durations = _switching_path(habitat.rates, habitat.probs, burn + epochs, rng)
    result = simulated_rate(matrices, states, durations, burn, batches)
    if result is None:
        return GrowthEstimate(-np.inf, 0.0, "simulation", epochs, batches, "the population died out")
    return GrowthEstimate(
        result[0], result[1], "simulation", epochs, batches,
        f"switching environment; top Lyapunov exponent from one history after {burn} burn-in epochs",
    )
