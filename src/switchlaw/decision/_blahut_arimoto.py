"""Blahut–Arimoto alternation for the minimum-information problem (the reference method).

``r <- r * c(r)`` decreases ``F`` monotonically (Blahut 1972; Arimoto 1972; Csiszár &
Tusnády 1984); it stops on the certified bound ``log max_x c(x) <= tol``.
"""

from __future__ import annotations

import numpy as np

from ._marginal_newton import MarginalResult, _gap
from ._problem import Reduced, evaluate

#: Weight of the uniform mixture added to a warm start: an exact zero can never come back.
_MIX = 1e-3


def blahut_arimoto_marginal(
    problem: Reduced,
    start: np.ndarray,
    *,
    allowed: np.ndarray | None = None,
    tol: float = 1e-12,
    max_iter: int = 100_000,
) -> MarginalResult:
    """Iterate ``r <- r c(r)`` from ``start`` (mixed with the uniform marginal)."""
    n = problem.n_phenotypes
    allowed = np.ones(n, dtype=bool) if allowed is None else allowed
    uniform = allowed / allowed.sum()
    r = np.where(allowed, start, 0.0)
    r = (1.0 - _MIX) * r / r.sum() + _MIX * uniform
    gap = np.inf
    for iteration in range(max_iter + 1):
        ev = evaluate(problem, r)
        gap = _gap(ev.c, allowed)
        if gap <= tol:
            return MarginalResult(r, gap, iteration, True, "certified gap below tolerance")
        r = r * ev.c
        r /= r.sum()
    return MarginalResult(
        r, gap, max_iter, False, f"iteration limit reached with certified gap {gap:.3g} nats"
    )
