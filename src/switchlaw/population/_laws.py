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
        return sum(len(entry.fractions) for entry in self._laws.values())

    def clear(self) -> None:
        """Forget every law."""
        with self._lock:
            self._laws.clear()

    def __repr__(self) -> str:
        return f"LawCache({len(self._laws)} laws, {len(self)} fractions kept)"

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

    __slots__ = ("referents", "custom", "problems", "fractions", "last_marginal")

    def __init__(self, referents, custom: bool):
        self.referents = referents
        self.custom = custom
        self.problems: OrderedDict = OrderedDict()
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
    """``f_x(rho)`` for every density (shape ``(k, phenotypes)``), derived once per density.

    Max-entropy laws are evaluated for all missing densities in one array operation;
    min-information laws run the marginal solver per density, each warm-started from the last.
    """
    n = model.division.size
    out = np.empty((densities.size, n))
    with cache._lock:
        entry = cache._entry(model)
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
            if f.shape != (n,):
                raise InputError(
                    f"`division` must have one rate per phenotype ({f.size}) (got {n})"
                )
            _remember(entry.fractions, (rho, beta), f, cache.size)
            out[i] = f
    return out


def _derive(objective: str, problems: list, beta: float, entry: _Law) -> list:
    if objective == "max-entropy":
        shapes = {u.shape for _, u in problems}
        if len(shapes) == 1:
            probs = np.stack([p for p, _ in problems])
            u = np.stack([u for _, u in problems])
            logits = beta * u
            logits = logits - logits.max(axis=2, keepdims=True)
            q = np.exp(logits)
            q /= q.sum(axis=2, keepdims=True)
            return list(np.einsum("ky,kyx->kx", probs, q))
        return [p @ max_entropy_policy(u, beta, None) for p, u in problems]
    derived = []
    for p, u in problems:
        r, record, _ = minimum_information_marginal(u, p, beta, start=entry.last_marginal)
        if record.converged and r.size == u.shape[1]:
            entry.last_marginal = r
        derived.append(np.asarray(r, dtype=float))
    return derived
