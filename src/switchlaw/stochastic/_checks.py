"""Input checks for the stochastic stage: counts, replicate numbers, seeds, rates over states."""

from __future__ import annotations

import numbers

import numpy as np

from .._errors import InputError
from .._validate import _show


def as_count(value, name: str, *, minimum: int = 0) -> int:
    """An integer ``>= minimum`` (integer-valued floats such as ``3.0`` are accepted)."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise InputError(f"`{name}` must be an integer >= {minimum} (got {_show(value)})")
    if not np.isfinite(float(value)) or float(value) != int(value) or int(value) < minimum:
        raise InputError(f"`{name}` must be an integer >= {minimum} (got {value!r})")
    return int(value)


def as_counts(value, name: str) -> np.ndarray:
    """A non-negative integer array (any shape, at least one entry)."""
    try:
        array = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(f"`{name}` must be non-negative integers (got {_show(value)})") from None
    if array.size == 0:
        raise InputError(f"`{name}` must not be empty (got shape {array.shape})")
    bad = ~np.isfinite(array) | (array < 0) | (array != np.round(array))
    if bad.any():
        where = tuple(int(i) for i in np.argwhere(bad)[0])
        entry = where[0] if len(where) == 1 else where
        shown = f"entry {entry} is {float(array[where])!r}" if where else f"got {float(array)!r}"
        raise InputError(f"`{name}` must be non-negative integers; {shown}")
    return array.astype(np.int64)


def as_replicates(value) -> int:
    """The number of independent runs: an integer >= 1."""
    return as_count(value, "replicates", minimum=1)


def as_seed(seed) -> np.random.SeedSequence:
    """An explicit seed: a non-negative integer or a ``numpy.random.SeedSequence``."""
    if isinstance(seed, np.random.SeedSequence):
        return seed
    if seed is None:
        raise InputError("`seed` must be given (an integer >= 0) so that runs can be repeated")
    return np.random.SeedSequence(as_count(seed, "seed"))


def as_rate_vector(value, name: str, n: int | None = None) -> np.ndarray:
    """Per-phenotype rates: a finite, non-negative 1-D float64 array (``n`` entries if given)."""
    try:
        rates = np.atleast_1d(np.asarray(value, dtype=np.float64))
    except (TypeError, ValueError):
        raise InputError(f"`{name}` must be numeric rates (got {_show(value)})") from None
    if rates.ndim != 1 or rates.size == 0:
        raise InputError(f"`{name}` must be one rate per phenotype (got shape {rates.shape})")
    bad = ~np.isfinite(rates) | (rates < 0)
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(
            f"`{name}` rates must be finite and >= 0; phenotype {i} has {float(rates[i])!r}"
        )
    if n is not None and rates.size != n:
        raise InputError(f"`{name}` must have one rate per phenotype ({n}) (got {rates.size})")
    return rates


def rates_over_states(rate, name: str, states: np.ndarray) -> np.ndarray:
    """Evaluate a state-dependent rate at integer ``states``; finite and >= 0 at each.

    ``rate`` is a callable ``n -> rate`` (tried once on the whole array, then state by state
    if it does not accept arrays), an array indexed by ``n``, or a constant. An error names the
    first state where the rate is negative or not finite.
    """
    states = np.asarray(states, dtype=np.int64)
    if callable(rate):
        values = None
        try:
            trial = np.asarray(rate(states.copy()), dtype=np.float64)
            if trial.shape in ((), states.shape):
                values = np.broadcast_to(trial, states.shape).astype(np.float64)
        except (TypeError, ValueError, ArithmeticError):
            values = None
        if values is None:
            values = np.empty(states.size)
            for k, n in enumerate(states.tolist()):
                try:
                    values[k] = float(rate(n))
                except (TypeError, ValueError) as error:
                    raise InputError(f"`{name}` must return a number at n={n} ({error})") from None
    else:
        try:
            table = np.asarray(rate, dtype=np.float64)
        except (TypeError, ValueError):
            raise InputError(f"`{name}` must be a callable, an array over n, or a number (got {_show(rate)})") from None
        if table.ndim == 0:
            values = np.full(states.shape, float(table))
        elif table.ndim == 1:
            if table.size <= states.max():
                raise InputError(
                    f"`{name}` must give a rate for every state n = 0..{int(states.max())} "
                    f"(got {table.size} entries)"
                )
            values = table[states]
        else:
            raise InputError(f"`{name}` must be a 1-D array indexed by n (got shape {table.shape})")
    bad = ~np.isfinite(values) | (values < 0)
    if bad.any():
        k = int(np.argmax(bad))
        raise InputError(
            f"`{name}` must be finite and >= 0 at every state; at n={int(states[k])} it is {float(values[k])!r}"
        )
    return values


def as_times(times, name: str = "times") -> np.ndarray:
    """Output times: finite, >= 0, strictly increasing."""
    grid = np.atleast_1d(np.asarray(times, dtype=np.float64))
    if grid.ndim != 1 or grid.size == 0:
        raise InputError(f"`{name}` must be a 1-D array of times (got shape {grid.shape})")
    if not np.isfinite(grid).all() or (grid < 0).any():
        raise InputError(f"`{name}` must be finite and >= 0 (got {_show(grid)})")
    if grid.size > 1 and not (np.diff(grid) > 0).all():
        raise InputError(f"`{name}` must be strictly increasing (got {_show(grid)})")
    return grid


def as_sizes(sizes, name: str = "sizes") -> np.ndarray:
    """Initial sizes for an extinction curve: integers >= 1, strictly increasing."""
    values = as_counts(sizes, name)
    if values.ndim != 1:
        raise InputError(f"`{name}` must be a 1-D list of sizes (got shape {values.shape})")
    if (values < 1).any():
        raise InputError(f"`{name}` must be integers >= 1 (got {values.tolist()})")
    if values.size > 1 and not (np.diff(values) > 0).all():
        raise InputError(f"`{name}` must be strictly increasing (got {values.tolist()})")
    return values


def as_horizon(upper, t_max, *, smallest: int, largest: int | None = None) -> tuple[int | None, float | None]:
    """The stopping rule of an extinction run: a size ``upper`` and/or a time ``t_max``."""
    if upper is None and t_max is None:
        raise InputError("give `upper` (a size), `t_max` (a time) or both: when is a population safe?")
    if upper is not None:
        upper = as_count(upper, "upper", minimum=1)
        if upper <= smallest:
            raise InputError(f"`upper` must exceed every initial size ({smallest}) (got {upper})")
        if largest is not None and upper > largest:
            raise InputError(f"`upper` must be at most {largest} (got {upper})")
    if t_max is not None:
        t_max = float(t_max) if isinstance(t_max, numbers.Real) and not isinstance(t_max, bool) else t_max
        if not isinstance(t_max, float) or not np.isfinite(t_max) or t_max <= 0:
            raise InputError(f"`t_max` must be a finite time > 0 (got {t_max!r})")
    return upper, t_max
