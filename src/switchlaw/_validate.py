"""Input checks shared by every public entry point: one place per concept.

Each function returns a clean float64 array (or float) or raises :class:`InputError`
whose message names the argument, the rule and the value received.
"""

from __future__ import annotations

import math

import numpy as np

from ._errors import InputError

#: Largest allowed deviation of a probability vector's sum from one.
SUM_TOLERANCE = 1e-9


def _show(value) -> str:
    """A short printable form of a received value for error messages."""
    if isinstance(value, np.ndarray):
        if value.ndim == 1 and value.size <= 6:
            return np.array2string(value, precision=6, separator=", ").replace("\n", "")
        return f"array of shape {value.shape}"
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def as_array(value, name: str, *, ndim: int) -> np.ndarray:
    """A finite float64 array with ``ndim`` dimensions."""
    try:
        array = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(f"`{name}` must be numeric (got {_show(value)})") from None
    if array.ndim != ndim:
        raise InputError(f"`{name}` must be a {ndim}-D array (got shape {array.shape})")
    if array.size == 0:
        raise InputError(f"`{name}` must not be empty (got shape {array.shape})")
    bad = ~np.isfinite(array)
    if bad.any():
        where = tuple(int(i) for i in np.argwhere(bad)[0])
        raise InputError(
            f"`{name}` must be finite; entry {where if ndim > 1 else where[0]} is "
            f"{array[where]} (got {_show(array)})"
        )
    return array


def as_distribution(value, name: str = "env") -> np.ndarray:
    """A probability vector: 1-D, finite, non-negative, summing to one within tolerance.

    Objects with a ``probs`` attribute (switchlaw environments) are accepted too.
    The returned vector is renormalised exactly.
    """
    if hasattr(value, "probs") and not isinstance(value, np.ndarray):
        value = value.probs
    probs = as_array(value, name, ndim=1)
    if (probs < 0).any():
        i = int(np.argmax(probs < 0))
        raise InputError(f"`{name}` must be non-negative; entry {i} is {probs[i]} (got {_show(probs)})")
    total = float(probs.sum())
    if abs(total - 1.0) > SUM_TOLERANCE:
        raise InputError(
            f"`{name}` must sum to 1 within {SUM_TOLERANCE:g} (got sum {total!r})"
        )
    return probs / total


def as_stochastic_matrix(value, name: str) -> np.ndarray:
    """A 2-D matrix whose rows are probability vectors."""
    matrix = as_array(value, name, ndim=2)
    if (matrix < 0).any():
        where = tuple(int(i) for i in np.argwhere(matrix < 0)[0])
        raise InputError(f"`{name}` must be non-negative; entry {where} is {matrix[where]}")
    sums = matrix.sum(axis=1)
    off = np.abs(sums - 1.0) > SUM_TOLERANCE
    if off.any():
        row = int(np.argmax(off))
        raise InputError(
            f"`{name}` rows must sum to 1 within {SUM_TOLERANCE:g}; row {row} sums to {float(sums[row])!r}"
        )
    return matrix / sums[:, None]


def as_payoff(value, n_states: int, name: str = "payoff") -> np.ndarray:
    """A finite ``[state, phenotype]`` table matching ``n_states`` states."""
    payoff = as_array(value, name, ndim=2)
    if payoff.shape[0] != n_states:
        raise InputError(
            f"`{name}` must have one row per environment state ({n_states}) "
            f"(got shape {payoff.shape})"
        )
    return payoff


def as_nonnegative(value, name: str) -> float:
    """A finite scalar >= 0."""
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise InputError(f"`{name}` must be a real number (got {_show(value)})") from None
    if not math.isfinite(number) or number < 0:
        raise InputError(f"`{name}` must be finite and >= 0 (got {number!r})")
    return number


def as_positive(value, name: str) -> float:
    """A finite scalar > 0."""
    number = as_nonnegative(value, name)
    if number == 0:
        raise InputError(f"`{name}` must be > 0 (got {number!r})")
    return number


def choice(value, name: str, options) -> str:
    """One of a fixed set of names; an unknown one lists the valid names."""
    if value not in options:
        valid = ", ".join(repr(o) for o in options)
        raise InputError(f"`{name}` must be one of {valid} (got {value!r})")
    return value


#: Longest phenotype name: it names table columns, figure files and SBML species.
MAX_NAME = 64


def phenotype_names(value, name: str = "phenotypes") -> tuple:
    """Phenotype names: text, printable, non-empty, at most :data:`MAX_NAME` characters, distinct."""
    if isinstance(value, (str, bytes)):
        raise InputError(f"`{name}` must be a sequence of names, not one string (got {_show(value)})")
    try:
        names = tuple(value)
    except TypeError:
        raise InputError(f"`{name}` must be a sequence of names (got {_show(value)})") from None
    for i, item in enumerate(names):
        if not isinstance(item, str):
            raise InputError(f"`{name}[{i}]` must be text (got {_show(item)})")
        if not item.strip():
            raise InputError(f"`{name}[{i}]` must not be empty (got {item!r})")
        if not item.isprintable():
            raise InputError(f"`{name}[{i}]` must be printable text, no control characters (got {_show(item)})")
        if len(item) > MAX_NAME:
            raise InputError(f"`{name}[{i}]` has at most {MAX_NAME} characters (got {len(item)})")
        if item in names[:i]:
            raise InputError(f"`{name}` must be distinct; {item!r} appears twice")
    return names
