"""Environments in time: Markov chains per generation, switching in continuous time, and
periodic sequences.

Environments independent across generations need no object: their probability vector
``habitat[e]`` is the whole description. The objects here carry ``.probs``, the long-run fraction
of generations (or of time) spent in each state, so they can be passed wherever switchlaw
expects environment probabilities.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.sparse.csgraph import connected_components

from .._errors import InputError
from .._validate import _show, as_array, as_stochastic_matrix
from ._checks import check_count, check_generator, check_seed


def _require_irreducible(matrix: np.ndarray, name: str) -> None:
    """Every state must be reachable from every other, so that long-run averages do not
    depend on the starting state."""
    n_classes, _ = connected_components(matrix > 0, directed=True, connection="strong")
    if n_classes > 1:
        raise InputError(
            f"`{name}` must describe an irreducible chain (every state reachable from every "
            f"other) (got {n_classes} communicating classes)"
        )


def _stationary(generator: np.ndarray) -> np.ndarray:
    """The distribution ``s`` with ``s @ generator = 0`` and ``sum s = 1`` (unique: irreducible)."""
    m = generator.shape[0]
    system = np.vstack([generator.T, np.ones((1, m))])
    rhs = np.zeros(m + 1)
    rhs[-1] = 1.0
    s = np.linalg.lstsq(system, rhs, rcond=None)[0]
    s = np.maximum(s, 0.0)
    return s / s.sum()


@dataclass(frozen=True, repr=False)
class MarkovHabitat:
    """An environment that changes between generations as a Markov chain.

    Parameters
    ----------
    transition : array_like, shape (states, states)
        ``transition[e, e'] = P(environment e' next generation | environment e now)``; rows
        sum to one; the chain must be irreducible.

    Attributes
    ----------
    transition : ndarray
    probs : ndarray, shape (states,)
        Stationary distribution: the long-run fraction of generations in each state.

    Examples
    --------
    >>> habitat = MarkovHabitat([[0.9, 0.1], [0.3, 0.7]])
    >>> habitat.probs.round(6).tolist()
    [0.75, 0.25]
    """

    transition: np.ndarray

    def __post_init__(self):
        transition = as_stochastic_matrix(self.transition, "transition")
        if transition.shape[0] != transition.shape[1]:
            raise InputError(f"`transition` must be square (got shape {transition.shape})")
        _require_irreducible(transition, "transition")
        object.__setattr__(self, "transition", transition)

    @property
    def probs(self) -> np.ndarray:
        return _stationary(self.transition - np.eye(self.transition.shape[0]))

    @property
    def n_states(self) -> int:
        return self.transition.shape[0]

    def sample(self, generations: int, *, seed, start: int | None = None) -> np.ndarray:
        """A sequence of ``generations`` states; the first is drawn from ``probs`` unless
        ``start`` is given."""
        generations = check_count(generations, "generations")
        rng = check_seed(seed, "to sample an environment")
        return _markov_path(self.transition, self.probs, generations, rng, start)

    def __repr__(self) -> str:
        return f"MarkovHabitat({self.n_states} states, stationary {_show(self.probs)})"


def _markov_path(transition, probs, length, rng, start=None) -> np.ndarray:
    """States of a Markov chain by inverse-CDF sampling of each row."""
    cumulative = np.cumsum(transition, axis=1)
    cumulative[:, -1] = 1.0
    uniforms = rng.random(length)
    states = np.empty(length, dtype=np.intp)
    state = int(rng.choice(probs.size, p=probs)) if start is None else int(start)
    states[0] = state
    for t in range(1, length):
        state = int(np.searchsorted(cumulative[state], uniforms[t], side="right"))
        states[t] = state
    return states


@dataclass(frozen=True, repr=False)
class SwitchingHabitat:
    """An environment that switches between states at constant rates (continuous time).

    Parameters
    ----------
    rates : array_like, shape (states, states)
        ``rates[e, e']`` (e' != e) is the rate of switching from ``e`` to ``e'`` per unit
        time; the diagonal is 0 or minus the row sum. The chain must be irreducible.

    Attributes
    ----------
    rates : ndarray
        The generator (diagonal = minus the total rate of leaving each state).
    probs : ndarray
        Stationary distribution: the long-run fraction of time in each state.
    mean_durations : ndarray
        Mean time spent in a state per visit, ``1 / (rate of leaving it)``.

    Examples
    --------
    >>> habitat = SwitchingHabitat([[0.0, 0.1], [0.4, 0.0]])
    >>> habitat.probs.round(6).tolist(), habitat.mean_durations.tolist()
    ([0.8, 0.2], [10.0, 2.5])
    """

    rates: np.ndarray

    def __post_init__(self):
        rates = as_array(self.rates, "rates", ndim=2)
        if rates.shape[0] != rates.shape[1]:
            raise InputError(f"`rates` must be square (got shape {rates.shape})")
        generator = check_generator(rates, 1, rates.shape[0], name="rates")[0]
        if rates.shape[0] > 1:
            _require_irreducible(generator, "rates")
        object.__setattr__(self, "rates", generator)

    @property
    def probs(self) -> np.ndarray:
        return _stationary(self.rates)

    @property
    def n_states(self) -> int:
        return self.rates.shape[0]

    @property
    def mean_durations(self) -> np.ndarray:
        with np.errstate(divide="ignore"):
            return 1.0 / -np.diagonal(self.rates)

    def sample(self, epochs: int, *, seed) -> tuple[np.ndarray, np.ndarray]:
        """``epochs`` successive visits: the states and how long each lasts (time units).

        The first state is drawn from ``probs``.
        """
        epochs = check_count(epochs, "epochs")
        rng = check_seed(seed, "to sample an environment")
        return _switching_path(self.rates, self.probs, epochs, rng)

    def __repr__(self) -> str:
        return (
            f"SwitchingHabitat({self.n_states} states, stationary {_show(self.probs)}, "
            f"mean durations {_show(self.mean_durations)})"
        )


def _switching_path(generator, probs, epochs, rng) -> tuple[np.ndarray, np.ndarray]:
    """Visits of a continuous-time chain: its jump chain and exponential holding times."""
    exits = -np.diagonal(generator)
    jumps = np.where(np.eye(exits.size, dtype=bool), 0.0, generator) / exits[:, None]
    states = _markov_path(jumps, probs, epochs, rng)
    durations = rng.standard_exponential(epochs) / exits[states]
    return states, durations


@dataclass(frozen=True, repr=False)
class PeriodicHabitat:
    """A periodic sequence of environment states, each held for a fixed duration.

    Parameters
    ----------
    states : sequence of int
        Environment states in the order they occur within one period (indices into the rows
        of ``fitness`` or ``rates``).
    durations : sequence of float
        How long each is held, > 0: whole generations for discrete generations, time units
        for continuous time.

    Examples
    --------
    >>> habitat = PeriodicHabitat([0, 1], [30.0, 10.0])
    >>> habitat.period, habitat.time_fractions(2).tolist()
    (40.0, [0.75, 0.25])
    """

    states: np.ndarray
    durations: np.ndarray

    def __post_init__(self):
        durations = as_array(self.durations, "durations", ndim=1)
        states = as_array(self.states, "states", ndim=1)
        if states.size != durations.size:
            raise InputError(
                f"`states` and `durations` must have the same length "
                f"(got {states.size} and {durations.size})"
            )
        bad = (states < 0) | (states != np.round(states))
        if bad.any():
            i = int(np.argmax(bad))
            raise InputError(
                f"`states` must be non-negative integers; entry {i} is {float(states[i])!r}"
            )
        if (durations <= 0).any():
            i = int(np.argmax(durations <= 0))
            raise InputError(
                f"`durations` must be > 0; entry {i} is {float(durations[i])!r} "
                f"(got {_show(durations)})"
            )
        object.__setattr__(self, "states", states.astype(np.intp))
        object.__setattr__(self, "durations", durations)

    @property
    def period(self) -> float:
        return float(self.durations.sum())

    def time_fractions(self, n_states: int) -> np.ndarray:
        """Fraction of each period spent in each of ``n_states`` states."""
        return np.bincount(self.states, weights=self.durations, minlength=n_states) / self.period

    def __repr__(self) -> str:
        return f"PeriodicHabitat(states {self.states.tolist()}, durations {_show(self.durations)})"
