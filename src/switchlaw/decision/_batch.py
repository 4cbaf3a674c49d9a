"""Many min-information problems of one shape solved together: Newton's method on a stack.

A law over a density grid, a regime map or a calibration asks for hundreds of small problems
(tens of states, a few phenotypes). Solved one by one, each pays Python's overhead per
Newton step; stacked as arrays ``(K, states)`` and ``(K, states, phenotypes)``, one step of
every problem is a handful of array operations, and the ``(n + 1) x (n + 1)`` Newton systems
are solved as one stack by LAPACK.

The step is the one of :func:`._marginal_newton._support_newton_step` (scaled variables
``d = r y``, the constraint ``sum r = 1`` kept), applied on each problem's support: a
phenotype out of use has its row and column of the system replaced by the identity, so its
mass stays zero. Far from the optimum the step is damped (Armijo backtracking on ``F``) and
stops short of the simplex's boundary; a phenotype the step would empty leaves the support
once its mass is small and ``c(x) < 1``, and an unused phenotype with ``c(x) > e^tol`` enters
by one Newton step of the one-dimensional problem along ``e_x - r``. Close to the optimum the
right-hand side is the Kuhn–Tucker residual of :func:`._marginal_newton.kkt_residual`
(``expm1`` of the payoff gaps, no cancellation), with the same worst-case bound on its
rounding: where that bound could move a mass in use by more than the policy tolerance, the
problem's residual is computed in extended precision from then on.

Every marginal returned is certified by the rule of the single-problem solver: objective gap
``log max_x c(x) <= tol`` over every phenotype, and a Newton correction of every mass in use at
most :data:`._marginal_newton.POLICY_RTOL` relative (the marginal returned is the certified one
plus that correction, which Newton's quadratic convergence makes the more accurate). A problem
that does not meet it within :data:`_STACK_STEPS` steps (rounding stops the corrections, a
partition sum underflows, a step cannot be solved) is handed to
:func:`._minimum_information.minimum_information_marginal`, which certifies it under the
same rule or reports it not converged. Problems below the first critical beta, ``beta = 0``
and a single phenotype get the closed forms of that function, and identical phenotype columns
share their mass equally, as there.

References
----------
Blahut, R. E. (1972). Computation of channel capacity and rate-distortion functions. IEEE
Trans. Inf. Theory 18:460–473 (the reduced problem and its Kuhn–Tucker conditions).
Nocedal, J. & Wright, S. J. (2006). Numerical Optimization, 2nd ed., Springer: §3.1
(backtracking), §3.3 (Newton's method), §16.1 (equality-constrained quadratic steps).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._marginal_newton import POLICY_RTOL, _rounding_factor
from ._minimum_information import (
    deterministic_excess,
    minimum_information_marginal,
    tie_tolerance,
)

#: Newton steps a problem may take in the stack before it is handed to the single solver.
_STACK_STEPS = 40
#: Steps smaller than this (relative), or no longer shrinking, use the accurate residual
#: (as :func:`._marginal_newton.warm_newton` does).
_ACCURATE = 1e-6
#: ... (steps that stop shrinking are at the plain residual's rounding level only when below
#: this; larger ones are still far from the optimum).
_ROUNDING = 1e-4
#: A partition sum below this sends the problem to the single solver (its log domain).
_Z_FLOOR = 1e-100
_ARMIJO = 1e-4
#: A phenotype the Newton step would empty leaves the support once its mass is below this;
#: above it, the step stops this fraction of the way to the boundary.
_DROP = 1e-4
_BOUNDARY = 0.9
#: Predicted decreases below this (relative to ``1 + F``) are beyond float64's resolution of
#: ``F``: the full step is taken (as in the single solver).
_FLOOR = 1e-13
#: The Kuhn–Tucker test for a single phenotype is recomputed by the single solver when its
#: value is within this many times its rounding bound of zero (the threshold of
#: ``stays_deterministic``).
_NEAR_THRESHOLD = 4.0


@dataclass(frozen=True)
class StackSolution:
    """Marginals of a stack of min-information problems.

    Attributes
    ----------
    marginals : ndarray, shape (K, phenotypes)
        The optimal marginal ``r(x)`` of every problem (duplicates share their mass).
    converged : ndarray of bool, shape (K,)
        Certified (objective gap and policy tolerance) or closed form.
    iterations : ndarray of int, shape (K,)
        Newton steps, in the stack and in the single solver together.
    status : ndarray of str, shape (K,)
        ``"closed-form"``, ``"converged"`` or ``"not-converged"``, as the single solver says.
    stacked : ndarray of bool, shape (K,)
        Certified inside the stack (the rest: closed form or the single solver).
    """

    marginals: np.ndarray
    converged: np.ndarray
    iterations: np.ndarray
    status: np.ndarray
    stacked: np.ndarray


def solve_stack(payoff, env, beta, *, starts=None, tol: float = 1e-12) -> StackSolution:
    """Optimal marginals of ``K`` min-information problems of one shape, solved together.

    Parameters
    ----------
    payoff : ndarray, shape (K, states, phenotypes)
        Payoff tables (validated: finite float64).
    env : ndarray, shape (K, states)
        State probabilities of each problem (validated distributions; zeros allowed).
    beta : float or ndarray of shape (K,)
        Nats per payoff unit, ``>= 0``; one for all problems or one per problem.
    starts : ndarray, shape (K, phenotypes), optional
        Warm starts (nearby problems' marginals). Without them every problem starts from the
        uniform marginal; a problem handed to the single solver is then warm-started from the
        nearest certified problem before it in the stack (the stack is taken to be ordered,
        as a density grid is).
    tol : float
        Certified objective gap, nats (the single solver's ``tol``).

    Returns
    -------
    StackSolution
    """
    u = np.asarray(payoff, dtype=np.float64)
    p = np.asarray(env, dtype=np.float64)
    k, m, n = u.shape
    betas = np.broadcast_to(np.asarray(beta, dtype=np.float64), (k,)).copy()
    marginals = np.zeros((k, n))
    converged = np.zeros(k, dtype=bool)
    iterations = np.zeros(k, dtype=int)
    status = np.full(k, "not-converged", dtype=object)
    stacked = np.zeros(k, dtype=bool)
    if n == 1:
        marginals[:] = 1.0
        converged[:] = True
        status[:] = "closed-form"
        return StackSolution(marginals, converged, iterations, status, stacked)

    seen = p > 0
    # Payoffs on the states that occur; states that do not get zero gaps and weight zero.
    u_seen = np.where(seen[:, :, None], u, 0.0)
    first, counts = _groups(u_seen)
    distinct = first == np.arange(n)
    single = betas == 0  # closed form of the single solver (every best-on-average phenotype)
    deterministic, star, borderline = _stays_deterministic(u_seen, p, betas, distinct)
    single |= borderline
    closed = deterministic & ~single
    marginals[closed] = (first[closed] == star[closed, None]) / counts[closed]
    converged[closed] = True
    status[closed] = "closed-form"

    todo = np.flatnonzero(~single & ~closed)
    if todo.size:
        start = _start(starts, first, distinct, todo, n)
        done, r, steps = _newton_stack(u_seen[todo], p[todo], betas[todo], start, distinct[todo], tol)
        certified = todo[done]
        marginals[certified] = r[done][np.arange(done.sum())[:, None], first[certified]] / counts[certified]
        converged[certified] = True
        status[certified] = "converged"
        stacked[certified] = True
        iterations[todo] = steps
        single[todo[~done]] = True

    for index in np.flatnonzero(single):
        warm = _warm_start(starts, index, converged, marginals)
        r, record, word = minimum_information_marginal(u[index], p[index], float(betas[index]), start=warm, tol=tol)
        marginals[index] = r
        converged[index] = record.converged
        iterations[index] += record.iterations
        status[index] = word
    return StackSolution(marginals, converged, iterations, status, stacked)


def _groups(u_seen: np.ndarray):
    """For every problem and phenotype, the first phenotype with the same column on the
    states that occur, and the size of its group (as ``Prepared`` merges them)."""
    k, _, n = u_seen.shape
    first = np.tile(np.arange(n), (k, 1))
    for j in range(1, n):
        for i in range(j - 1, -1, -1):  # the last match found is the first phenotype
            same = (first[:, i] == i) & (u_seen[:, :, i] == u_seen[:, :, j]).all(axis=1)
            first[same, j] = i
    counts = np.zeros((k, n), dtype=int)
    np.add.at(counts, (np.arange(k)[:, None], first), 1)
    return first, np.take_along_axis(counts, first, axis=1)


def _stays_deterministic(u_seen, p, betas, distinct):
    """The Kuhn–Tucker test of ``stays_deterministic`` on every problem at once.

    Returns the problems that keep one phenotype, that phenotype, and the problems too close
    to either threshold of the test to decide here (they go to the single solver).
    """
    n = u_seen.shape[2]
    means = np.einsum("km,kmn->kn", p, u_seen)
    means = np.where(distinct, means, -np.inf)
    star = np.argmax(means, axis=1)
    top = np.take_along_axis(means, star[:, None], axis=1)[:, 0]
    below = top[:, None] - means
    # Exact ties here are ties of the single solver too (its sums differ from these by less
    # than its tie tolerance); a mean within twice that tolerance of the best, or within the
    # old 1e-12 band, is left to the single solver, whose own sums decide.
    magnitudes = np.einsum("km,kmn->kn", p, np.abs(u_seen))
    tolerance = tie_tolerance(p, magnitudes, np.take_along_axis(magnitudes, star[:, None], 1))
    best = distinct & (below == 0)
    tied = best.sum(axis=1) > 1
    band = np.maximum(2.0 * tolerance, 1e-12 * np.maximum(1.0, np.abs(top))[:, None])
    near_tie = (distinct & (below > 0) & (below <= band)).any(axis=1)
    # The test of the single solver (its expm1 form and rounding bound); states not seen
    # have p = 0 here. Where a value is within a few times its bound of that threshold the
    # two summation orders could disagree: the single solver decides.
    excess, bound = deterministic_excess(u_seen, p, star, betas)
    others = distinct & (np.arange(n) != star[:, None])
    deterministic = ~tied & np.where(others, excess <= bound, True).all(axis=1)
    unsure = others & (np.abs(excess) <= _NEAR_THRESHOLD * bound)
    borderline = near_tie | unsure.any(axis=1)
    return deterministic, star, borderline


def _start(starts, first, distinct, todo, n):
    """Starting marginals on the distinct phenotypes: the warm starts merged onto them, or
    uniform (also where a warm start uses fewer than two of them)."""
    allowed = distinct[todo]
    uniform = allowed / allowed.sum(axis=1, keepdims=True)
    if starts is None:
        return uniform
    given = np.asarray(starts, dtype=np.float64)[todo]
    merged = np.zeros_like(given)
    np.add.at(merged, (np.arange(todo.size)[:, None], first[todo]), given)
    usable = ((merged > 0).sum(axis=1) >= 2) & (merged.sum(axis=1) > 0)
    with np.errstate(invalid="ignore", divide="ignore"):
        merged = merged / merged.sum(axis=1, keepdims=True)
    return np.where(usable[:, None], merged, uniform)


def _warm_start(starts, index, converged, marginals):
    if starts is not None:
        return np.asarray(starts[index], dtype=np.float64)
    before = np.flatnonzero(converged[:index])
    return marginals[before[-1]] if before.size else None


def _newton_stack(u_seen, p, betas, start, allowed, tol):
    """Newton's method on the support of every problem of the stack at once.

    Returns the problems certified, their marginals (each with its last, certified Newton
    correction applied) and the steps taken by every problem.
    """
    k, m, n = u_seen.shape
    gaps = u_seen - u_seen.max(axis=2, keepdims=True)
    exponent = betas[:, None, None] * gaps
    expo = np.exp(exponent)
    m1 = np.expm1(exponent)
    root_p = np.sqrt(p)
    r = np.where(allowed, start, 0.0)
    r /= r.sum(axis=1, keepdims=True)
    done = np.zeros(k, dtype=bool)
    steps = np.zeros(k, dtype=int)
    accurate = np.zeros(k, dtype=bool)
    extended = np.zeros(k, dtype=bool)
    previous = np.full(k, np.inf)
    active = np.arange(k)  # problems still iterating
    for _ in range(_STACK_STEPS):
        if not active.size:
            break
        e, rr, pp = expo[active], r[active], p[active]
        z = np.einsum("kmn,kn->km", e, rr)
        alive = z.min(axis=1) >= _Z_FLOOR
        with np.errstate(divide="ignore"):
            w = pp / z
        c = np.einsum("km,kmn->kn", w, e)
        support = rr > 0
        top = np.where(allowed[active], c, -np.inf).max(axis=1)
        gap = np.log(np.maximum(top, 1.0))
        acc = accurate[active]
        residual = c - 1.0
        scaled = e * (root_p[active] / z)[:, :, None]
        hessian = np.einsum("kmi,kmj->kij", scaled, scaled)
        if acc.any():
            plain = acc & ~extended[active]
            if plain.any():
                residual[plain], bound = _accurate_residual(
                    e[plain], m1[active[plain]], pp[plain], rr[plain], z[plain]
                )
                # As the single solver: float64 only where its rounding cannot move a mass
                # in use by more than the policy tolerance.
                rough = np.flatnonzero(plain)[
                    _rounding(hessian[plain], rr[plain], support[plain], bound) > POLICY_RTOL
                ]
                extended[active[rough]] = True
            small = acc & extended[active]
            if small.any():
                residual[small] = _extended_residual(
                    gaps[active[small]], betas[active[small]], pp[small], rr[small]
                )
        step, ok = _scaled_steps(hessian, rr, residual, support)
        alive &= ok
        size = np.max(np.where(support, np.abs(step) / np.where(support, rr, 1.0), 0.0), axis=1)
        trial = rr + step
        # Certified by the single solver's rule: accurate residual, gap and correction small.
        certified = alive & acc & (size <= POLICY_RTOL) & (gap <= tol)
        certified &= np.where(support, trial > 0, True).all(axis=1)
        outside = np.where(allowed[active] & ~support, c, -np.inf)
        # Hand over: no usable step, or the corrections stopped shrinking (rounding level)
        # without the certificate.
        stalled = acc & (size > 0.25 * previous[active])
        keep = ~certified & alive & ~stalled
        done[active[certified]] = True
        # The certified marginal plus its last correction: Newton's method converging
        # quadratically, its error is of the order of the correction squared.
        finished = trial[certified]
        r[active[certified]] = finished / finished.sum(axis=1, keepdims=True)
        steps[active] += 1
        # An unused phenotype with c(x) > e^tol enters by one Newton step of the
        # one-dimensional problem along e_x - r (its slope at 0 is 1 - c(x)); the masses
        # in use wait for the next step.
        entering = keep & (outside.max(axis=1) > np.exp(tol))
        if entering.any():
            rows = np.flatnonzero(entering)
            x = np.argmax(outside[rows], axis=1)
            b = e[rows, :, x] / z[rows] - 1.0
            with np.errstate(divide="ignore", invalid="ignore"):
                share = (c[rows, x] - 1.0) / np.einsum("km,km->k", pp[rows], b * b)
            share = np.clip(np.nan_to_num(share, nan=0.5), 0.0, 0.5)
            rr[rows] *= (1.0 - share)[:, None]
            rr[rows, x] += share
        # A step that would empty a phenotype in use: once its mass is small and the
        # objective wants it lower (c(x) < 1) it leaves the support; otherwise the step is
        # shortened to keep it inside the simplex.
        leaving = support & (trial <= 0)
        dropping = leaving & (c < 1.0) & (rr < _DROP) & (keep & ~entering)[:, None]
        drop = dropping.any(axis=1)
        if drop.any():
            rr[dropping] = 0.0
            rr[drop] /= rr[drop].sum(axis=1, keepdims=True)
        move = keep & ~entering & ~drop
        t = np.ones(len(active))
        blocked = move & leaving.any(axis=1)
        if blocked.any():
            with np.errstate(divide="ignore", invalid="ignore"):
                ratios = np.where(leaving, rr / -step, np.inf)
            t[blocked] = _BOUNDARY * ratios[blocked].min(axis=1)
        far = move & ~acc
        if far.any():
            t[far] = _backtrack(e[far], pp[far], z[far], rr[far], step[far], c[far], t[far])
        moved = rr + t[:, None] * step
        moved = np.where(support, np.maximum(moved, 0.0), 0.0)
        moved /= moved.sum(axis=1, keepdims=True)
        rr[move] = moved[move]
        r[active[~certified]] = rr[~certified]
        changed = active[entering | drop]
        accurate[changed] = False
        previous[changed] = np.inf
        # (not shrinking while small: the plain residual's rounding level)
        newly = move & ~acc & (
            (size < _ACCURATE) | ((size > 0.25 * previous[active]) & (size < _ROUNDING))
        )
        accurate[active[newly]] = True
        previous[active[move]] = np.where(t[move] == 1.0, size[move], np.inf)
        active = active[keep]
    return done, r, steps


def _scaled_systems(hessian, r, support):
    """``[r_i H_ij r_j, r_i; r_j, 0]`` for every problem, the identity on phenotypes out of
    use (their rows and columns vanish with ``r = 0``)."""
    k, n = r.shape
    system = np.zeros((k, n + 1, n + 1))
    system[:, :n, :n] = r[:, :, None] * hessian * r[:, None, :]
    diagonal = np.arange(n)
    system[:, diagonal, diagonal] += ~support
    system[:, :n, n] = r
    system[:, n, :n] = r
    return system


def _scaled_steps(hessian, r, residual, support):
    """The step of ``_support_newton_step`` for every problem, phenotypes out of use masked.

    ``[r_i H_ij r_j, r_i; r_j, 0] [y; mu] = [r_i residual_i; 0]``, ``d = r y``; a phenotype
    out of use has ``r = 0``, so its row and column vanish and the identity is put there.
    """
    k, n = r.shape
    system = _scaled_systems(hessian, r, support)
    rhs = np.zeros((k, n + 1))
    rhs[:, :n] = np.where(support, r * residual, 0.0)
    ok = np.ones(k, dtype=bool)
    try:
        solution = np.linalg.solve(system, rhs[:, :, None])[:, :, 0]
    except np.linalg.LinAlgError:  # a singular system (ties): solve one by one
        solution = np.zeros((k, n + 1))
        for i in range(k):
            try:
                solution[i] = np.linalg.solve(system[i], rhs[i])
            except np.linalg.LinAlgError:
                ok[i] = False
    ok &= np.isfinite(solution).all(axis=1)
    step = np.where(ok[:, None] & support, r * solution[:, :n], 0.0)
    return step, ok


def _backtrack(e, p, z, r, step, c, t):
    """Armijo backtracking on ``F = -sum_y p(y) log z(y)`` along each step (Nocedal &
    Wright 2006, §3.1); steps whose predicted decrease is below float64's resolution of ``F``
    are taken whole."""
    with np.errstate(divide="ignore"):
        value = -(p * np.log(z)).sum(axis=1)
    decrease = ((c - 1.0) * step).sum(axis=1)
    t = t.copy()
    pending = ~(np.abs(decrease) < _FLOOR * (1.0 + np.abs(value)))
    for _ in range(40):
        if not pending.any():
            break
        trial = r[pending] + t[pending, None] * step[pending]
        trial = np.maximum(trial, 0.0)
        trial /= trial.sum(axis=1, keepdims=True)
        z_trial = np.einsum("kmn,kn->km", e[pending], trial)
        with np.errstate(divide="ignore", invalid="ignore"):
            trial_value = -(p[pending] * np.log(z_trial)).sum(axis=1)
        good = trial_value <= value[pending] - _ARMIJO * t[pending] * decrease[pending]
        index = np.flatnonzero(pending)
        pending[index[good]] = False
        t[index[~good]] *= 0.5
    return t


def _accurate_residual(e, m1, p, r, z):
    """``c(x) - 1`` without cancellation for every problem, and a bound on its rounding: the
    float64 branch of :func:`._marginal_newton.kkt_residual` with ``bound=True`` (rows with
    ``z >= 0.5`` through ``expm1``; sums over states pairwise, phenotype by phenotype)."""
    total = r.sum(axis=1)
    near = (z >= 0.5)[:, :, None]
    m1_r = np.einsum("kmn,kn->km", m1, r)[:, :, None]
    numerator = np.where(
        near, total[:, None, None] * m1 - m1_r, total[:, None, None] * e - z[:, :, None],
    )
    w = (p / z)[:, :, None]
    numerator *= w
    residual = np.ascontiguousarray(numerator.transpose(0, 2, 1)).sum(axis=2)
    magnitude = np.where(
        near, -total[:, None, None] * m1 - m1_r, total[:, None, None] * e + z[:, :, None],
    )
    magnitude = np.einsum("kmn,kmn->kn", magnitude, np.broadcast_to(w, magnitude.shape))
    return residual, _rounding_factor(p.shape[1], r.shape[1]) * magnitude


def _rounding(hessian, r, support, bound):
    """For every problem, the largest relative change of a mass in use that residual errors
    up to ``bound`` can cause in the Newton step (``|S^-1| (r bound)``, ``S`` the scaled
    system of :func:`_scaled_steps`)."""
    k, n = r.shape
    system = _scaled_systems(hessian, r, support)
    try:
        inverse = np.linalg.inv(system)
    except np.linalg.LinAlgError:
        return np.full(k, np.inf)
    effect = np.einsum("kij,kj->ki", np.abs(inverse[:, :n, :n]), np.where(support, r * bound, 0.0))
    effect = np.where(support, effect, 0.0).max(axis=1)
    return np.where(np.isfinite(effect), effect, np.inf)


def _extended_residual(gaps, betas, p, r):
    """The same residual with the exponentials and sums in ``np.longdouble`` (the extended
    branch of :func:`._marginal_newton.kkt_residual`): next to a transition the residual
    cancels to eight or more digits, and float64 rounding would set the entering mass."""
    exponent = betas.astype(np.longdouble)[:, None, None] * gaps.astype(np.longdouble)
    e = np.exp(exponent)
    m1 = np.expm1(exponent)
    r_ext = r.astype(np.longdouble)
    total = r_ext.sum(axis=1)
    z = np.einsum("kmn,kn->km", e, r_ext)
    near = (z >= 0.5)[:, :, None]
    numerator = np.where(
        near,
        total[:, None, None] * m1 - np.einsum("kmn,kn->km", m1, r_ext)[:, :, None],
        total[:, None, None] * e - z[:, :, None],
    )
    numerator /= z[:, :, None]
    residual = np.einsum("km,kmn->kn", p.astype(np.longdouble), numerator)
    return residual.astype(np.float64)
