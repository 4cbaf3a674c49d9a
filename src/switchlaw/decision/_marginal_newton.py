"""Active-set Newton method on the marginal ``r`` for the minimum-information problem.

Plain Blahut–Arimoto alternation slows to thousands of iterations where the set of phenotypes
in use changes. The problem is convex in ``r`` alone with one variable per phenotype (see
:mod:`._problem`), so Newton steps on the current support, with exact handling of phenotypes
that leave (a step that reaches the boundary sets that entry to exactly zero) or enter (a
line search along ``e_x - r`` when ``c(x) > 1``), converge quadratically at every beta.

The stopping rule is the certified bound ``F(r) - min F <= log max_x c(x)`` (Blahut 1972).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from ._problem import Evaluation, Reduced, evaluate, objective

#: Predicted decreases below this (relative to ``1 + |F|``) are beyond the resolution of
#: ``F`` in float64, so the line search cannot judge them; the full step is taken.
_FLOOR = 1e-12
_ARMIJO = 1e-4


@dataclass(frozen=True)
class MarginalResult:
    """Outcome of an iterative solve on the marginal."""

    marginal: np.ndarray
    gap_nats: float
    iterations: int
    converged: bool
    message: str


def _gap(c: np.ndarray, allowed: np.ndarray) -> float:
    return float(np.log(max(c[allowed].max(), 1.0)))


def _enter(problem: Reduced, r: np.ndarray, ev: Evaluation, x: int) -> np.ndarray:
    """Move mass toward phenotype ``x`` along ``e_x - r`` with an exact line search."""
    b = ev.ratio[:, x] - 1.0
    p = problem.p

    def slope(t: float) -> float:
        with np.errstate(divide="ignore", invalid="ignore"):
            return float(-(p @ (b / (1.0 + t * b))))

    t_hi = 1.0 - 1e-12
    end = slope(t_hi)
    if np.isfinite(end) and end <= 0:
        t = 1.0
    else:
        t = brentq(slope, 0.0, t_hi, xtol=1e-15, rtol=4 * np.finfo(float).eps)
    trial = (1.0 - t) * r
    trial[x] += t
    return trial / trial.sum()


def _newton_direction(
    problem: Reduced, ev: Evaluation, support: np.ndarray
) -> tuple[np.ndarray, float]:
    """Newton step on the support, constrained to keep ``sum r = 1``, and its decrement.

    The decrement ``d' H d`` is the objective decrease predicted by the quadratic model (x2).
    """
    ratio = ev.ratio[:, support]
    hessian = (ratio * problem.p[:, None]).T @ ratio
    k = support.size
    system = np.zeros((k + 1, k + 1))
    system[:k, :k] = hessian
    system[:k, k] = 1.0
    system[k, :k] = 1.0
    rhs = np.zeros(k + 1)
    rhs[:k] = ev.c[support]
    try:
        step = np.linalg.solve(system, rhs)
        if not np.isfinite(step).all():
            raise np.linalg.LinAlgError
    except np.linalg.LinAlgError:
        step = np.linalg.lstsq(system, rhs, rcond=None)[0]
    direction = step[:k]
    return direction, float(direction @ hessian @ direction)


def newton_marginal(
    problem: Reduced,
    start: np.ndarray,
    *,
    allowed: np.ndarray | None = None,
    tol: float = 1e-12,
    max_iter: int = 200,
) -> MarginalResult:
    """Minimise ``F(r)`` over the simplex (optionally over phenotypes in ``allowed`` only).

    Parameters
    ----------
    problem : Reduced
    start : (n,) starting marginal; entries outside ``allowed`` are ignored.
    allowed : (n,) bool mask of phenotypes that may be used (default: all).
    tol : stop once ``log max_x c(x) <= tol`` (nats of objective).
    max_iter : Newton and entering steps together.
    """
    n = problem.n_phenotypes
    allowed = np.ones(n, dtype=bool) if allowed is None else allowed
    r = np.where(allowed, start, 0.0)
    r = r / r.sum()
    ev = evaluate(problem, r)
    gap = _gap(ev.c, allowed)
    for iteration in range(1, max_iter + 1):
        if gap <= tol:
            return MarginalResult(r, gap, iteration - 1, True, "certified gap below tolerance")
        support = np.flatnonzero(r > 0)
        outside = np.flatnonzero(allowed & (r == 0))
        if outside.size:
            x = outside[np.argmax(ev.c[outside])]
            if ev.c[x] > max(1.0 + tol, ev.c[support].max()):
                r = _enter(problem, r, ev, x)
                ev = evaluate(problem, r)
                gap = _gap(ev.c, allowed)
                continue
        direction, decrease = _newton_direction(problem, ev, support)
        if not decrease > 0:
            break
        unresolved = decrease < _FLOOR * (1.0 + abs(ev.objective))
        blocked = direction < 0
        edge_steps = -r[support][blocked] / direction[blocked]
        t_edge = edge_steps.min() if blocked.any() else np.inf
        t = min(1.0, t_edge)
        accepted = None
        while t >= 1e-14:
            trial = r.copy()
            trial[support] += t * direction
            if t == t_edge:
                trial[support[blocked][np.argmin(edge_steps)]] = 0.0
            np.maximum(trial, 0.0, out=trial)
            trial /= trial.sum()
            if unresolved or (
                objective(problem, trial) <= ev.objective - _ARMIJO * t * decrease
            ):
                accepted = trial
                break
            t *= 0.5
        if accepted is None:
            break
        r = accepted
        ev = evaluate(problem, r)
        gap = _gap(ev.c, allowed)
    if gap <= tol:
        return MarginalResult(r, gap, max_iter, True, "certified gap below tolerance")
    return MarginalResult(
        r, gap, iteration, False, f"Newton stopped with certified gap {gap:.3g} nats"
    )
