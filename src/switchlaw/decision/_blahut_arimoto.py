"""Blahut–Arimoto alternation for the minimum-information problem (the reference method).

``r <- r * c(r)`` decreases ``F`` monotonically (Blahut 1972; Arimoto 1972; Csiszár &
Tusnády 1984); it stops on the certified bound ``log max_x c(x) <= tol``. That bound certifies
the objective only: next to a transition the alternation stops with the entering mass far
from optimal. The policy is then certified as the Newton solver's is (a Newton finish on the
support, :func:`._marginal_newton.finish`); where that fails the result is "not converged".
"""

from __future__ import annotations

import numpy as np

from ._marginal_newton import MarginalResult, _gap, emptied, finish
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
    next_check = 0
    last = None
    for iteration in range(max_iter + 1):
        ev = evaluate(problem, r)
        gap = _gap(ev.c, allowed)
        if gap <= tol and iteration >= next_check:
            last, draining = _certify(problem, ev, r, allowed, tol, iteration)
            if last.converged or not draining:
                return last
            # Masses still draining towards zero: alternate on, and look again later.
            next_check = iteration + max(10, iteration // 4)
        r = r * ev.c
        r /= r.sum()
    if last is not None:
        return last
    return MarginalResult(
        r, gap, max_iter, False, f"iteration limit reached with certified gap {gap:.3g} nats"
    )


def _certify(problem: Reduced, ev, r: np.ndarray, allowed: np.ndarray, tol: float, iteration: int):
    """Certify the policy of a marginal whose objective gap is below ``tol``.

    Masses the alternation is still draining (a Newton correction would empty them) are set
    to zero first, as long as the gap stays below ``tol``.
    """
    index = np.flatnonzero(allowed)
    draining = np.zeros(0, dtype=int)
    for _ in range(3):
        draining = emptied(problem, ev, r, index)
        if not draining.size:
            break
        cleaned = r.copy()
        cleaned[draining] = 0.0
        cleaned /= cleaned.sum()
        cleaned_ev = evaluate(problem, cleaned)
        if _gap(cleaned_ev.c, allowed) > tol:
            break
        r, ev = cleaned, cleaned_ev
        draining = np.zeros(0, dtype=int)
    r, ev, gap, size, certified, _ = finish(problem, ev, r, index, allowed, tol)
    if certified:
        return MarginalResult(
            r, gap, iteration, True,
            f"certified gap below tolerance; Newton correction {size:.2g} relative",
        ), False
    return MarginalResult(
        r, gap, iteration, False,
        f"certified gap {gap:.2g} nats, but the policy is not certified (Newton correction "
        f"{size:.2g} relative): the alternation stalls on a nearly flat objective",
        policy_uncertified=True,
    ), bool(draining.size)
