"""The law's mean-field fractions ``f_x(rho)`` at a vector of densities, and the explicit cache
(solver context) that keeps laws already derived.

The decision problem a cell faces (sensed environment and payoff) depends on the density only,
not on beta, so it is kept per density and reused for every beta; the fractions are kept per
``(density, beta)``. Everything is keyed by the law's own inputs (payoff, environment,
objective, phenotype names, by identity), so a model changed with ``dataclasses.replace``
never reads another law's fractions, and models differing only in rates share laws.
"""

from __future__ import annotations

import threading
from collections import OrderedDict

import numpy as np

from .._errors import InputError
from ..decision._batch import solve_stack
from ..decision._minimum_information import minimum_information_marginal
from ..decision._solve import max_entropy_policy
from ..laws._law import decision_problem


class LawCache:
    """Laws already derived, owned and passed by the caller (an explicit solver context).

    Give one to :class:`~switchlaw.MeanField` methods by keyword (``cache=``) to share derived
    laws between calls (a scan over rates, a regime map, repeated equilibria); without one,
    each call starts from an empty cache of its own, so no call ever depends on an earlier one.
    A lock makes one cache safe to share between threads. Pickling gives an empty cache (a
    worker process derives its own laws).

    Parameters
    ----------
    size : int
        Most ``(density, beta)`` fractions kept per law (least recently used dropped first).

    Notes
    -----
    Min-information laws are warm-started from the last marginal derived for the same law, so
    fractions from a shared cache agree with a fresh cache's to the solver's tolerance (1e-12),
    not bit for bit.
    """

    def __init__(self, size: int = 65536):
        if int(size) < 1:
            raise InputError(f"`size` must be >= 1 (got {size!r})")
        self.size = int(size)
        self._lock = threading.RLock()
        self._laws: dict = {}

    def __reduce__(self):
        return (LawCache, (self.size,))

    def __len__(self) -> int:
        """Decision problems and fractions kept, over all laws."""
        return sum(len(entry.fractions) + len(entry.problems) for entry in self._laws.values())

    def clear(self) -> None:
        """Forget every law."""
        with self._lock:
            self._laws.clear()

    def __repr__(self) -> str:
        return f"LawCache({len(self._laws)} laws, {len(self)} problems and fractions kept)"

    def _entry(self, model) -> "_Law":
        custom = not getattr(type(model)._derive_fractions, "default_law", False)
        referents = (model if custom else None, model.payoff, model.environment)
        names = None if model.phenotypes is None else tuple(model.phenotypes)
        key = tuple(id(r) for r in referents) + (model.objective, names)
        entry = self._laws.get(key)
        if entry is None:
            entry = self._laws[key] = _Law(referents, custom)
        return entry


class _Law:
    """What a cache holds for one law; ``referents`` keep the keyed objects alive."""

    __slots__ = ("referents", "custom", "problems", "stacks", "fractions", "last_marginal")

    def __init__(self, referents, custom: bool):
        self.referents = referents
        self.custom = custom
        self.problems: OrderedDict = OrderedDict()
        self.stacks: OrderedDict = OrderedDict()
        self.fractions: OrderedDict = OrderedDict()
        self.last_marginal = None


def _remember(table: OrderedDict, key, value, size: int) -> None:
    table[key] = value
    if len(table) > size:
        table.popitem(last=False)


def _problem(model, entry: _Law, rho: float, size: int):
    """``(p(y), u[y, x])`` of the decision problem at ``rho`` (per density, any beta)."""
    found = entry.problems.get(rho)
    if found is None:
        env, u, _ = decision_problem(model.payoff, model.environment, rho, model.phenotypes)
        found = (np.asarray(env.probs, dtype=float), np.asarray(u, dtype=float))
        _remember(entry.problems, rho, found, size)
    return found


def law_fractions(model, densities: np.ndarray, beta: float, cache: LawCache) -> np.ndarray:
    """``f_x(rho)`` for every density (shape ``(k, phenotypes)``).

    Max-entropy laws are closed form given the decision problem: only the problems are kept
    (per density, and stacked per density vector), and the fractions for all densities come
    from one array operation. Min-information laws keep each ``(density, beta)`` marginal and
    solve the missing ones together (``decision._batch.solve_stack``) when their problems have
    one shape, otherwise one by one, each warm-started from the last.
    """
    n = model.division.size
    with cache._lock:
        entry = cache._entry(model)
        if not entry.custom and model.objective == "max-entropy":
            probs, u = _stacked(model, entry, densities, cache.size)
            if probs is not None:
                logits = beta * u
                logits -= logits.max(axis=-1, keepdims=True)
                q = np.exp(logits)
                q /= q.sum(axis=-1, keepdims=True)
                f = np.einsum("ky,kyx->kx", probs, q)
                _check(f.shape[1], n)
                return f
        out = np.empty((densities.size, n))
        missing = []
        for i, rho in enumerate(densities.tolist()):
            found = entry.fractions.get((rho, beta))
            if found is None:
                missing.append(i)
            else:
                entry.fractions.move_to_end((rho, beta))
                out[i] = found
        if not missing:
            return out
        rhos = densities[missing].tolist()
        if entry.custom:
            derived = [np.asarray(model._derive_fractions(rho, beta), dtype=float) for rho in rhos]
        else:
            problems = [_problem(model, entry, rho, cache.size) for rho in rhos]
            derived = _derive(model.objective, problems, beta, entry)
        for i, rho, f in zip(missing, rhos, derived):
            _check(f.size if f.ndim == 1 else -1, n)
            _remember(entry.fractions, (rho, beta), f, cache.size)
            out[i] = f
    return out


def _check(found: int, n: int) -> None:
    if found != n:
        raise InputError(f"`division` must have one rate per phenotype ({found}) (got {n})")


def _stacked(model, entry: _Law, densities: np.ndarray, size: int):
    """Problems at every density stacked as ``(k, states)`` and ``(k, states, phenotypes)``
    arrays (kept per density vector), or ``(None, None)`` when their shapes differ."""
    if densities.size == 1:
        p, u = _problem(model, entry, float(densities[0]), size)
        return p[None], u[None]
    key = densities.tobytes()
    found = entry.stacks.get(key)
    if found is None:
        problems = [_problem(model, entry, rho, size) for rho in densities.tolist()]
        if len({u.shape for _, u in problems}) == 1:
            found = (np.stack([p for p, _ in problems]), np.stack([u for _, u in problems]))
        else:
            found = (None, None)
        if densities.size >= 16:  # a grid that is likely asked for again (other betas)
            _remember(entry.stacks, key, found, 64)
    return found


#: Fewest missing densities solved as one stack: below it a warm-started single solve per
#: density is cheaper (continuation asks for one or two densities at a time).
_STACK_MIN = 16


def _derive(objective: str, problems: list, beta: float, entry: _Law) -> list:
    if objective == "max-entropy":
        return [p @ max_entropy_policy(u, beta, None) for p, u in problems]
    if len(problems) >= _STACK_MIN and len({u.shape for _, u in problems}) == 1:
        # Every density at once (one Newton step of all of them is a few array operations);
        # a density the stack cannot certify is solved alone, warm-started from its
        # neighbour, under the same certificate.
        found = solve_stack(
            np.stack([u for _, u in problems]), np.stack([p for p, _ in problems]), beta
        )
        converged = np.flatnonzero(found.converged)
        if converged.size:
            entry.last_marginal = found.marginals[converged[-1]].copy()
        return list(found.marginals)
    derived = []
    for p, u in problems:
        r, record, _ = minimum_information_marginal(u, p, beta, start=entry.last_marginal)
        if record.converged and r.size == u.shape[1]:
            entry.last_marginal = r
        derived.append(np.asarray(r, dtype=float))
    return derived
