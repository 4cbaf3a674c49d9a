"""Input checks of the growth stage, one function per concept.

Each returns clean float64 arrays or raises :class:`InputError` whose one-line message names
the argument, the rule and the value received. Shapes of the arrays returned:

* fitness ``[environment, phenotype]``, rates ``[environment, phenotype]``;
* a cue ``[environment, cue_state]``;
* inheritance ``[cue_state, parent, offspring]`` (discrete generations);
* switching generators ``[environment, from, to]`` (continuous time).
"""

from __future__ import annotations

import numbers

import numpy as np

from .._errors import InputError
from .._validate import SUM_TOLERANCE, _show, as_array, as_distribution, as_stochastic_matrix


def check_fitness(value, n_environments: int, occurs: np.ndarray | None = None) -> np.ndarray:
    """Offspring per individual ``fitness[e, x] >= 0``, one row per environment state.

    Every environment that occurs (``occurs``, default all) must let some phenotype leave
    offspring: otherwise long-run growth is minus infinity whatever the strategy.
    """
    fitness = as_array(value, "fitness", ndim=2)
    if (fitness < 0).any():
        where = tuple(int(i) for i in np.argwhere(fitness < 0)[0])
        raise InputError(f"`fitness` must be non-negative; entry {where} is {fitness[where]}")
    check_rows(fitness, n_environments, "fitness", "environment state")
    occurs = np.ones(n_environments, dtype=bool) if occurs is None else occurs
    barren = occurs & ~(fitness > 0).any(axis=1)
    if barren.any():
        e = int(np.argmax(barren))
        raise InputError(
            f"`fitness` must be positive for some phenotype in every environment that occurs; "
            f"row {e} is {_show(fitness[e])}, so long-run growth is minus infinity whatever "
            "the strategy"
        )
    return fitness


def check_rows(array: np.ndarray, n_rows: int, name: str, what: str) -> None:
    """``array`` has one row per ``what`` (``n_rows`` of them)."""
    if array.shape[0] != n_rows:
        raise InputError(f"`{name}` must have one row per {what} ({n_rows}) (got shape {array.shape})")


def check_cue(value, n_environments: int) -> np.ndarray:
    """A sensing channel ``cue[e, c] = P(cue state c | environment e)``."""
    cue = as_stochastic_matrix(value, "cue")
    check_rows(cue, n_environments, "cue", "environment")
    return cue


def check_policy(value, n_phenotypes: int, n_cue_states: int | None) -> np.ndarray:
    """A memoryless strategy as a ``[cue_state, phenotype]`` matrix (one row when no cue)."""
    if n_cue_states is None:
        strategy = as_distribution(value, "strategy")[None, :]
    else:
        strategy = as_stochastic_matrix(value, "strategy")
        if strategy.shape[0] != n_cue_states:
            raise InputError(
                f"`strategy` must have one row per cue state ({n_cue_states}) when a `cue` is "
                f"given (got shape {strategy.shape})"
            )
    if strategy.shape[1] != n_phenotypes:
        raise InputError(
            f"`strategy` must have one entry per phenotype ({n_phenotypes}) "
            f"(got shape {strategy.shape if n_cue_states else strategy.shape[1:]})"
        )
    return strategy


def _ndim(value, name: str) -> int:
    """Number of dimensions of a numeric array-like (ragged or non-numeric input is refused)."""
    try:
        return np.asarray(value, dtype=np.float64).ndim
    except (TypeError, ValueError):
        raise InputError(f"`{name}` must be a numeric array (got {_show(value)})") from None


def check_inheritance(value, n_phenotypes: int, n_cue_states: int | None):
    """Discrete-generation strategy: memoryless, or a switching matrix ``[parent, offspring]``.

    Accepted forms: without a cue, a phenotype distribution ``(n,)`` or a switching matrix
    ``(n, n)``; with a cue of ``k`` states, a policy ``(k, n)`` or one switching matrix per cue
    state ``(k, n, n)``. Returns ``(switching[k, parent, offspring], memoryless)``, where
    memoryless means the offspring's phenotype does not depend on the parent's.
    """
    ndim = _ndim(value, "strategy")
    memoryless_ndim = 1 if n_cue_states is None else 2
    if ndim == memoryless_ndim:
        policy = check_policy(value, n_phenotypes, n_cue_states)
        return np.repeat(policy[:, None, :], n_phenotypes, axis=1), True
    k = 1 if n_cue_states is None else n_cue_states
    expected = (n_phenotypes, n_phenotypes) if n_cue_states is None else (k, n_phenotypes, n_phenotypes)
    stacked = as_array(value, "strategy", ndim=ndim) if ndim == len(expected) else None
    if stacked is None or stacked.shape != expected:
        shapes = "(phenotypes,) or (phenotypes, phenotypes)" if n_cue_states is None else \
            "(cue states, phenotypes) or (cue states, phenotypes, phenotypes)"
        memoryless = expected[:-2] + (n_phenotypes,)
        raise InputError(
            f"`strategy` must have shape {shapes}, here {memoryless} or {expected} "
            f"(got shape {np.shape(value)})"
        )
    stacked = stacked.reshape(k, n_phenotypes, n_phenotypes)
    switching = np.stack([
        as_stochastic_matrix(stacked[c], "strategy" if n_cue_states is None else f"strategy[{c}]")
        for c in range(k)
    ])
    return switching, bool(np.all(switching == switching[:, :1, :]))


def check_rates(value, name: str = "rates") -> np.ndarray:
    """Per-capita growth rates ``rates[e, x]`` (per unit time, any sign)."""
    return as_array(value, name, ndim=2)


def check_generator(
    value, n_environments: int, n_phenotypes: int, name: str = "switching"
) -> np.ndarray:
    """Switching-rate generators ``[environment, from, to]`` from one constant ``(n, n)`` matrix
    or one matrix per environment ``(m, n, n)``.

    Off-diagonal entries are rates per unit time (>= 0). The diagonal is set to minus the row
    sum; a diagonal given must be zero or already equal to it.
    """
    ndim = np.ndim(value)
    if ndim not in (2, 3):
        raise InputError(
            f"`{name}` must have shape (phenotypes, phenotypes) or (environments, phenotypes, "
            f"phenotypes) (got shape {np.shape(value)})"
        )
    k = as_array(value, name, ndim=ndim)
    if ndim == 2:
        k = np.broadcast_to(k, (n_environments,) + k.shape)
    if k.shape != (n_environments, n_phenotypes, n_phenotypes):
        raise InputError(
            f"`{name}` must have shape ({n_phenotypes}, {n_phenotypes}) or "
            f"({n_environments}, {n_phenotypes}, {n_phenotypes}) (got shape {np.shape(value)})"
        )
    off = ~np.eye(n_phenotypes, dtype=bool)
    negative = (k < 0) & off
    if negative.any():
        e, i, j = (int(a) for a in np.argwhere(negative)[0])
        where = (e, i, j) if ndim == 3 else (i, j)
        raise InputError(f"`{name}` off-diagonal rates must be >= 0; entry {where} is {k[e, i, j]}")
    exits = np.where(off, k, 0.0).sum(axis=2)
    diagonal = np.diagonal(k, axis1=1, axis2=2)
    wrong = (diagonal != 0) & (np.abs(diagonal + exits) > SUM_TOLERANCE * np.maximum(1.0, exits))
    if wrong.any():
        e, i = (int(j) for j in np.argwhere(wrong)[0])
        where = (e, i, i) if ndim == 3 else (i, i)
        raise InputError(
            f"`{name}` diagonal must be 0 or minus the row's total switching rate; entry "
            f"{where} is {float(diagonal[e, i])!r}, expected {float(-exits[e, i])!r}"
        )
    generator = np.where(off, k, 0.0)
    generator[:, np.arange(n_phenotypes), np.arange(n_phenotypes)] = -exits
    return generator


def check_count(value, name: str, minimum: int = 1) -> int:
    """A whole number >= ``minimum``."""
    if isinstance(value, bool) or not isinstance(value, numbers.Integral) or value < minimum:
        raise InputError(f"`{name}` must be an integer >= {minimum} (got {value!r})")
    return int(value)


def check_seed(seed, why: str) -> np.random.Generator:
    """A random generator from an explicit seed; ``None`` is refused (results must repeat)."""
    if seed is None:
        raise InputError(f"`seed` must be given (an int or numpy Generator) {why} (got None)")
    try:
        return np.random.default_rng(seed)
    except (TypeError, ValueError):
        raise InputError(
            f"`seed` must be an int, SeedSequence or numpy Generator (got {_show(seed)})"
        ) from None
