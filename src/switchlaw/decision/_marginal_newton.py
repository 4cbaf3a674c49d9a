"""Sequential quadratic programming on the marginal ``r`` for the minimum-information problem.

Plain Blahut–Arimoto alternation slows to thousands of iterations where the set of phenotypes
in use changes. The problem is convex in ``r`` alone, with one variable per phenotype (see
:mod:`._problem`). Each outer step minimises the second-order model of ``F`` over the simplex
exactly, with a primal active-set method (phenotypes leave and enter the support exactly,
with exact zeros), then backtracks along the step. The same scheme is used for maximum-
likelihood mixture weights (Kim, Carbonetto, Stephens & Anitescu 2020, J. Comput. Graph.
Stat. 29:261); here the outer iterations converge quadratically near the optimum.

Stopping rule. The bound ``F(r) - min F <= log max_x c(x)`` (Blahut 1972) certifies the
objective, not the policy: just past a critical beta ``F`` is nearly flat in the entering
phenotype's mass, so a gap of 1e-12 nats allows that mass to be many times too large. The solve
therefore ends with Newton steps on the settled support whose right-hand side is the
Kuhn–Tucker residual ``c(x) - 1`` computed without cancellation (``expm1`` of the payoff gaps),
and reports convergence only once the Newton correction of every marginal mass in use is below
:data:`POLICY_RTOL` relative (Newton's method converges quadratically, so the correction bounds
the remaining error to first order; Nocedal & Wright 2006, Thm. 3.5), or has reached the
rounding level of float64 (at most :data:`NOISE_RTOL` relative). The float64 residual comes
with a worst-case bound on its rounding error; where the bound could move a mass in use by
more than :data:`POLICY_RTOL`, the residual is recomputed in extended precision.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from scipy.linalg.blas import dgemm as _gemm
from scipy.linalg.lapack import dgesv as _gesv
from scipy.optimize import brentq

from ._problem import Evaluation, Reduced, Scratch, evaluate, objective

#: Predicted decreases below this (relative to ``1 + |F|``) are beyond the resolution of
#: ``F`` in float64, so the line search cannot judge them; the full step is taken.
_FLOOR = 1e-13
_ARMIJO = 1e-4
#: Ratios ``exp(beta u) / Z`` are capped here before forming the Hessian (no overflow).
_RATIO_CAP = 1e100
#: An unused phenotype with ``c(x)`` above this is far outside the quadratic model's reach
#: (its entry changes ``log Z`` non-quadratically); it enters by an exact line search instead.
_FAR = 2.0
#: Relative ridge added to the model Hessian (it is singular along tied phenotypes).
_RIDGE = 1e-12
#: A policy is certified once the Newton correction of every marginal mass in use is below
#: this, relative to the mass.
POLICY_RTOL = 1e-10
#: ... or, when rounding stops the corrections from shrinking (entering masses below about
#: 1e-6), once they are below this.
NOISE_RTOL = 1e-9
#: Newton corrections tried at most once the objective gap is below tolerance.
_FINISH_STEPS = 12
#: A phenotype in use with ``c(x)`` below this is taken out of use by the finish (with the gap
#: below 1e-12 its mass is then below 1e-9; see :func:`finish`).
_LEAVING = 1.0 - 1e-3


@dataclass(frozen=True)
class MarginalResult:
    """Outcome of an iterative solve on the marginal."""

    marginal: np.ndarray
    gap_nats: float
    iterations: int
    converged: bool
    message: str
    #: True when the objective is certified but the policy is not (float64 rounding or the
    #: iteration limit on a nearly flat objective): Blahut–Arimoto cannot do better.
    policy_uncertified: bool = False


def _gap(c: np.ndarray, allowed: np.ndarray) -> float:
    return float(np.log(max(c[allowed].max(), 1.0)))


def simplex_qp(hessian: np.ndarray, linear: np.ndarray, *, max_iter: int | None = None) -> np.ndarray:
    """Minimise ``w' H w / 2 + b' w`` over the probability simplex (primal active set).

    Starts at the best vertex and frees one coordinate at a time while its multiplier is
    negative; a step that would turn a coordinate negative stops at the boundary and fixes it
    at zero. ``H`` must be positive definite on the simplex's tangent space.
    """
    k = linear.size
    max_iter = max_iter or 10 * k + 10
    start = int(np.argmin(0.5 * np.diag(hessian) + linear))
    w = np.zeros(k)
    w[start] = 1.0
    free = np.zeros(k, dtype=bool)
    free[start] = True
    for _ in range(max_iter):
        index = np.flatnonzero(free)
        size = index.size
        system = np.empty((size + 1, size + 1))
        system[:size, :size] = hessian[np.ix_(index, index)]
        system[:size, size] = -1.0
        system[size, :size] = 1.0
        system[size, size] = 0.0
        rhs = np.empty(size + 1)
        rhs[:size] = -linear[index]
        rhs[size] = 1.0
        try:
            solution = np.linalg.solve(system, rhs)
        except np.linalg.LinAlgError:
            solution = np.linalg.lstsq(system, rhs, rcond=None)[0]
        candidate, level = solution[:size], solution[size]
        if (candidate >= 0).all():
            w[:] = 0.0
            w[index] = candidate
            multipliers = hessian @ w + linear - level
            multipliers[free] = 0.0
            entering = int(np.argmin(multipliers))
            if multipliers[entering] >= -1e-14 * (1.0 + abs(level)):
                return w
            free[entering] = True
            continue
        current = w[index]
        falling = candidate < current
        ratios = np.full(size, np.inf)
        ratios[falling] = current[falling] / (current[falling] - candidate[falling])
        blocking = int(np.argmin(ratios))
        step = min(1.0, ratios[blocking])
        w[index] = current + step * (candidate - current)
        w[index[blocking]] = 0.0
        free[index[blocking]] = False
        np.maximum(w, 0.0, out=w)
        w /= w.sum()
    return w


def _enter(problem: Reduced, r: np.ndarray, ev: Evaluation, x: int) -> np.ndarray | None:
    """Move mass toward phenotype ``x`` along ``e_x - r`` with an exact line search."""
    b = ev.ratio[:, x] - 1.0  # capped at 1e300 by evaluate(); b / (1 + t b) stays finite
    p = problem.p

    def slope(t: float) -> float:
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            return float(-(p @ (b / (1.0 + t * b))))

    if not slope(0.0) < 0:
        return None  # no resolvable descent along e_x - r: leave it to the quadratic model
    t_hi = 1.0 - 1e-12
    end = slope(t_hi)
    if np.isfinite(end) and end <= 0:
        t = 1.0
    else:
        t = brentq(slope, 0.0, t_hi, xtol=1e-300, rtol=4 * np.finfo(float).eps, maxiter=2000)
    trial = (1.0 - t) * r
    trial[x] += t
    return trial / trial.sum()


def gram(rows: np.ndarray) -> np.ndarray:
    """``rows @ rows.T`` (a few rows over the states) by BLAS ``dgemm`` on contiguous memory:
    numpy's matmul hands ``A @ A.T`` to a routine measured 2-6x slower at these shapes
    whenever the rows fit in cache (equal on larger ones)."""
    if rows.flags.c_contiguous:
        return _gemm(1.0, rows.T, rows.T, trans_a=1)
    if rows.flags.f_contiguous:
        return _gemm(1.0, rows, rows, trans_b=1)
    return rows @ rows.T


def hessian_of(problem: Reduced, ratio: np.ndarray) -> np.ndarray:
    """``sum_y p(y) (ratio(y,x) - 1) (ratio(y,x') - 1)``: the Hessian of ``F`` in ``r``,
    ``sum_y p(y) ratio(y,x) ratio(y,x')``, up to terms ``a 1' + 1 a'`` that vanish on every
    step that keeps ``sum r = 1``. Every step and quadratic model here is such a step, and
    this form keeps the curvature along the simplex when it is tiny (small beta: the ratios
    are ``1 + O(beta)`` and the plain form buries an ``O(beta^2)`` curvature under the
    rounding of entries of order one)."""
    centred = ratio - 1.0
    centred *= problem.root_p[:, None]
    return gram(centred.T)


def centred_gram(scaled: np.ndarray, c: np.ndarray, root_p: np.ndarray) -> np.ndarray:
    """:func:`hessian_of` from ``scaled = sqrt(p) e / z`` (phenotypes x states; a transposed
    view will do) and ``c = sum_y p e / z``: the plain Gram matrix minus ``c 1' + 1 c' - 1 1'``
    (``sum p = 1``); where that cancels to fewer than six digits (small beta), formed from
    ``sqrt(p) (e / z - 1)`` itself, ``scaled`` overwritten with it."""
    plain = gram(scaled)
    hessian = plain - c[:, None] - c[None, :] + 1.0
    if not (hessian.diagonal() > 1e-6 * plain.diagonal()).all():
        scaled -= root_p
        hessian = gram(scaled)
    return hessian


def _expm1_gaps(problem: Reduced, columns: np.ndarray, every: bool) -> np.ndarray:
    """``expm1(beta gaps)`` on ``columns``, phenotypes x states in C order, in the work array
    ``"m1"`` (``every``: ``columns`` is every phenotype, in order). Row by row from
    :attr:`~._problem.Reduced.gaps_by_phenotype`: no gather of columns."""
    by_phenotype = problem.gaps_by_phenotype
    m1 = problem.scratch.get("m1", (columns.size, by_phenotype.shape[1]))
    if every:
        np.multiply(by_phenotype, problem.beta, out=m1)
    else:
        for i, j in enumerate(columns):
            np.multiply(by_phenotype[j], problem.beta, out=m1[i])
    return np.expm1(m1, out=m1)


def _bordered_solve(
    system: np.ndarray, rhs: np.ndarray, border: float, *, always: bool = False,
    fallback: bool = True,
) -> np.ndarray | None:
    """Solve ``[A b; b' 0] x = rhs`` (``A`` the leading ``k x k`` block of ``system``, ``b``
    its border, largest entry ``border``), in place of ``system`` and ``rhs``.

    Where the diagonal of ``A`` spans many orders of magnitude (a mass whose states are all
    improbable gives its row entries of 1e-114 beside entries of order one) or is tiny beside
    the border (small beta), LU loses the solution: the system is then equilibrated
    symmetrically by that diagonal first (Higham 2002, §7.3); ``always`` does so in any case.
    LAPACK's ``gesv`` directly (numpy's solve wraps it at five times the cost, which dominates
    on small tables); a failed or non-finite solve is redone by least squares, or gives
    ``None`` without ``fallback``.
    """
    k = system.shape[0] - 1
    diagonal = system.diagonal()[:k]
    scale = None
    smallest = _min(diagonal)
    if always or not (
        smallest > 1e-8 * _max(diagonal) and smallest > 1e-8 * border * border
    ):
        scale = np.ones(k + 1)
        positive = diagonal > 0
        scale[:k][positive] = 1.0 / np.sqrt(np.maximum(diagonal[positive], 1e-280))
        system *= np.multiply.outer(scale, scale)
        rhs *= scale if rhs.ndim == 1 else scale[:, None]
    solution, info = _gesv(system, rhs)[2:]
    if info != 0 or not np.isfinite(solution).all():
        if not fallback:
            return None
        solution = np.linalg.lstsq(system, rhs, rcond=None)[0]
    if scale is not None:
        solution *= scale if solution.ndim == 1 else scale[:, None]
    return solution


def _support_newton_step(
    r: np.ndarray, c: np.ndarray, hessian: np.ndarray | None = None,
    error: np.ndarray | None = None, scaled: np.ndarray | None = None,
):
    """Newton step on a fixed support, keeping ``sum r = 1``, in scaled variables ``d = r y``.

    The scaled Hessian ``sum_y p(y) q(x|y) q(x'|y) = r(x) H(x,x') r(x')`` stays well conditioned
    when the marginal spans many orders of magnitude, so this is the accurate step once the
    support is settled. ``hessian`` is ``H`` on the support; ``scaled`` is the scaled Hessian
    itself (then ``hessian`` is not read).

    With ``error`` (a bound on the rounding error of each entry of ``c``) it returns
    ``(step, rounding)``: ``rounding`` bounds the relative change of any mass that errors up to
    ``error`` in ``c`` can cause, ``|S^-1| (r error)`` with ``S`` the scaled system (its inverse
    comes from the same factorisation as the step).
    """
    k = r.size
    system = np.empty((k + 1, k + 1))
    if scaled is not None:
        system[:k, :k] = scaled
    else:
        block = np.multiply(hessian, r, out=system[:k, :k])
        block *= r[:, None]
    system[:k, k] = r
    system[k, :k] = r
    system[k, k] = 0.0
    if error is None:
        rhs = np.empty(k + 1)
        np.multiply(r, c, out=rhs[:k])
        rhs[k] = 0.0
    else:
        rhs = _identity_rhs(k)
        np.multiply(r, c, out=rhs[:k, 0])
    solution = _bordered_solve(system, rhs, _max(r))
    if error is None:
        return r * solution[:k]
    step = r * solution[:k, 0]
    effect = float(_max(np.abs(solution[:k, 1 : k + 1]) @ (r * error)))
    return step, (effect if effect < np.inf else np.inf)  # (NaN: no bound)


#: ``eye(k + 1, k + 2, 1)`` in Fortran order per size: a right-hand side and the columns of
#: the identity, for a step and the inverse of its system from one factorisation.
_IDENTITY_RHS: dict = {}


def _identity_rhs(k: int) -> np.ndarray:
    """A fresh copy of ``eye(k + 1, k + 2, 1)`` in Fortran order (first column to fill)."""
    found = _IDENTITY_RHS.get(k)
    if found is None:
        found = _IDENTITY_RHS[k] = np.eye(k + 1, k + 2, 1, order="F")
    return found.copy(order="F")


def _capped_ratio(ev: Evaluation, index: np.ndarray) -> np.ndarray:
    """``exp(beta u) / Z`` on the columns in ``index``, capped at 1e100 (no overflow in ``H``);
    no copy when every column is used and nothing needs capping."""
    ratio = ev.ratio if index.size == ev.ratio.shape[1] else ev.ratio[:, index]
    if ratio.max() > _RATIO_CAP:
        ratio = np.minimum(ratio, _RATIO_CAP)
    return ratio


def _direction_hessian(problem: Reduced, ev: Evaluation, index: np.ndarray) -> np.ndarray:
    """:func:`hessian_of` on the columns in ``index``. Where no row is in log domain and no
    ratio needs the cap (every ``1 / Z <= 1e100``), formed from the table itself as
    ``sqrt(p) (e / Z - 1)``: the same terms without the ratio array, its cap and its
    maximum (three passes over the table fewer)."""
    if not ev.low.any():
        inverse_z = np.exp(-ev.log_z)
        if _max(inverse_z) <= _RATIO_CAP:
            root_p = problem.root_p
            expo = problem.expo
            columns = expo if index.size == expo.shape[1] else expo[:, index]
            scaled = columns * (root_p * inverse_z)[:, None]
            scaled -= root_p[:, None]
            return gram(scaled.T)
    return hessian_of(problem, _capped_ratio(ev, index))


def _direction(problem: Reduced, ev: Evaluation, r: np.ndarray, index: np.ndarray, tol: float):
    """The step for the phenotypes in ``index``: Newton on the support when it is settled,
    otherwise the minimiser of the quadratic model over the simplex.

    The Hessian over ``index`` is formed once (one pass over the states) and serves both.
    """
    support = r > 0
    hessian = _direction_hessian(problem, ev, index)
    c = ev.c[index]
    # c - 1 instead of c on the right-hand side: the constant only shifts the multiplier of
    # sum r = 1, and near the optimum it would swamp the differences that set the step.
    excess = c - 1.0
    on_support = hessian if support.all() else hessian[np.ix_(support, support)]
    if not (c[~support] > 1.0 + tol).any():
        step = _support_newton_step(r[support], excess[support], on_support)
        if _usable(step, r[support], excess[support]):
            direction = np.zeros(index.size)
            direction[support] = step
            return direction
    model = hessian.copy()
    model[np.diag_indices_from(model)] += _RIDGE * np.trace(model) / index.size
    w = simplex_qp(model, -c - model @ r)
    if np.array_equal(w > 0, support):
        step = _support_newton_step(r[support], excess[support], on_support)
        if _usable(step, r[support], excess[support]):
            direction = np.zeros(index.size)
            direction[support] = step
            return direction
    return w - r


def _usable(step: np.ndarray, r: np.ndarray, excess: np.ndarray) -> bool:
    """A Newton step on the support is taken only if it is finite, keeps every mass
    non-negative and descends (``sum (c - 1) step > 0``). On a nearly singular Hessian (more
    phenotypes in use than states that tell them apart) it can be none of these; the
    minimiser of the model over the simplex is then the step."""
    return bool(np.isfinite(step).all() and (r + step >= 0).all() and excess @ step > 0)


#: Unit roundoff of float64.
_UNIT = np.finfo(float).eps / 2


def _rounding_factor(states: int, phenotypes: int) -> float:
    """Units of roundoff in the float64 residual's error bound: ``phenotypes + 5`` for
    forming each term (a dot product over the phenotypes, ``expm1``, a product, a difference
    and a quotient; Higham 2002, §3.1) and ``log2(states) + 16`` for the pairwise sum."""
    return (phenotypes + 5 + math.ceil(math.log2(max(states, 2))) + 16) * _UNIT


def kkt_residual(
    problem: Reduced, ev: Evaluation, r: np.ndarray, *, extended: bool = False,
    columns: np.ndarray | None = None, bound: bool = False,
):
    """``c(x) - 1`` for the phenotypes in ``columns`` (default all, which must include every
    phenotype in use), without the cancellation of forming ``c`` first.

    ``c(x) - 1 = sum_y p(y) (e(y,x) - z(y)) / z(y)`` with ``e = exp(beta gaps)`` and
    ``z = e @ r``, for the marginal ``r / sum(r)`` (a rounding error in ``sum r`` would
    otherwise shift every residual by it). Where ``z(y)`` is near one both terms are near
    one, so the numerator is formed as ``S expm1(beta gaps(y,x)) - expm1(beta gaps) @ r`` with
    ``S = sum r``; elsewhere as ``S e - z``. Rows in log domain use ``exp(beta u) / Z - 1``.

    ``extended=True`` evaluates the residual in the platform's extended precision
    (``np.longdouble``; iterative refinement with a more precise residual, Higham 2002,
    ch. 12): next to a transition the residual is a sum of terms that cancel to eight or more
    digits, and in float64 its rounding then dominates the entering mass.

    ``bound=True`` (float64 only) returns ``(residual, error bound)``: a bound on the
    rounding error of every float64 residual, ``_rounding_factor`` times the sum over states
    of the absolute values that enter each term (every ``expm1`` is <= 0, so those sums are
    matrix–vector products, no extra pass over the table).
    """
    rows = ~ev.low
    columns = np.arange(r.size) if columns is None else columns
    r_col = r[columns]
    if extended:
        residual = _extended_residual(problem, np.flatnonzero(rows), columns, r_col)
    else:
        scratch = problem.scratch
        if rows.all():
            # No copy of the table's columns (a strided gather costs several passes): the
            # residual reads the rows it needs from the whole table, and z = expo @ r with
            # r zero outside ``columns``.
            every = columns.size == r.size  # (then columns is every phenotype, in order)
            m1_t = _expm1_gaps(problem, columns, every)
            residual, error = _accurate_residual(
                problem.expo, m1_t, problem.p, r_col, problem.expo @ r, scratch,
                None if every else columns,
            )
        else:
            e = problem.expo[np.ix_(rows, columns)]
            m1_t = np.expm1(problem.beta * problem.gaps_by_phenotype[np.ix_(columns, rows)])
            residual, error = _accurate_residual(
                e, m1_t, problem.p[rows], r_col, e @ r_col, scratch
            )
    if ev.low.any():
        low_ratio = ev.ratio[ev.low][:, columns]
        residual = residual + problem.p[ev.low] @ (low_ratio - 1.0)
        if not extended:
            error = error + _rounding_factor(problem.p.size, columns.size) * (
                problem.p[ev.low] @ (low_ratio + 1.0)
            )
    residual = np.asarray(residual, dtype=np.float64)
    if bound and not extended:
        return residual, error
    return residual


def _extended_residual(problem: Reduced, rows: np.ndarray, columns: np.ndarray, r: np.ndarray):
    """The linear-domain rows of :func:`kkt_residual` in extended precision, one
    transcendental per entry: ``expm1`` where the row's partition sum is near one (there
    ``z = S + expm1 @ r``), ``exp`` elsewhere. Phenotype by phenotype (contiguous rows); the
    transcendentals, the costly part (extended precision has no vector ``exp``), are kept
    for the next call at the same beta (a finish takes several steps there)."""
    ld = np.longdouble
    beta = problem.beta
    r_ext = r.astype(ld)
    total = r_ext.sum()
    near = (problem.expo[:, columns] @ r)[rows] >= 0.5  # which form; either is exact

    def tables():
        by_phenotype = problem.gaps_by_phenotype[columns]
        if rows.size < by_phenotype.shape[1]:
            by_phenotype = by_phenotype[:, rows]
        exponents = by_phenotype.astype(ld)
        exponents *= ld(beta)
        if near.all():
            return np.expm1(exponents, out=exponents), exponents[:, :0]
        if not near.any():
            return exponents[:, :0], np.exp(exponents, out=exponents)
        return np.expm1(exponents[:, near]), np.exp(exponents[:, ~near])

    key = (beta, columns.tobytes(), rows.tobytes(), near.tobytes())
    m1, e = problem.scratch.latest("extended", key, tables)
    p = problem.p[rows]
    residual = np.zeros(columns.size, dtype=ld)
    if m1.shape[1]:
        m_r = r_ext @ m1
        numerator = m1 * total
        numerator -= m_r
        residual += numerator @ (p[near].astype(ld) / (total + m_r))
    if e.shape[1]:
        z = r_ext @ e
        numerator = e * total
        numerator -= z
        residual += numerator @ (p[~near].astype(ld) / z)
    return residual


def _correction(problem: Reduced, ev: Evaluation, r: np.ndarray, index, extended: bool = False):
    """The support, the Newton correction of its masses (accurate residual), and the largest
    relative change of a mass that float64 rounding of the residual could cause (0 when the
    residual is in extended precision)."""
    support = index[r[index] > 0]
    scaled = _scaled_hessian(problem, ev, r, support)
    if extended:
        residual = kkt_residual(problem, ev, r, extended=True, columns=support)
        step = _support_newton_step(r[support], residual, scaled=scaled)
        return support, step, 0.0
    residual, error = kkt_residual(problem, ev, r, columns=support, bound=True)
    step, rounding = _support_newton_step(r[support], residual, error=error, scaled=scaled)
    return support, step, rounding


def _scaled_hessian(problem: Reduced, ev: Evaluation, r: np.ndarray, support: np.ndarray):
    """``r(x) H(x,x') r(x') = sum_y p(y) (q(x|y) - r(x)) (q(x'|y) - r(x'))`` on the support
    (the centred form of :func:`hessian_of`), from the policy ``q = r exp(beta gaps) / z``
    itself (every entry in [0, 1], so nothing overflows and nothing needs capping, however
    small a mass or a state probability)."""
    ratio = ev.ratio
    every = support.size == ratio.shape[1]  # (then support is every phenotype, in order)
    q = ratio * r if every else ratio[:, support] * r[support]
    if ev.low.any():
        with np.errstate(divide="ignore"):
            q[ev.low] = np.exp(
                problem.log_terms(r, ev.low)[:, support] - ev.log_z[ev.low, None]
            )
    q -= r[support]  # the centred form (see hessian_of)
    q *= problem.root_p[:, None]
    return gram(q.T)


def emptied(problem: Reduced, ev: Evaluation, r: np.ndarray, index) -> np.ndarray:
    """Phenotypes in use that a Newton correction would drive to zero or below."""
    support, step, _ = _correction(problem, ev, r, index)
    return support[r[support] + step <= 0]


#: Masses a Newton step would give to a phenotype out of use below this are not worth its
#: entry (the objective gap already bounds what they change).
_DUST = 1e-12


def _entering(problem: Reduced, ev: Evaluation, r: np.ndarray, index: np.ndarray):
    """The marginal with the phenotypes out of use whose ``c(x) > 1`` given the masses of one
    Newton step on the support with them (unscaled variables, centred Hessian), when one of
    those masses exceeds :data:`_DUST`; else ``None``."""
    # c(x) itself rounds 1 + 1e-17 to one: candidates near one are judged by the accurate
    # residual
    out = index[(r[index] == 0) & (ev.c[index] > 1.0 - 1e-8)]
    if not out.size:
        return None
    support = index[r[index] > 0]
    residual = kkt_residual(problem, ev, r, columns=np.concatenate([support, out]))
    wanted = residual[support.size :] > 0
    if not wanted.any():
        return None
    out = out[wanted]
    residual = np.concatenate([residual[: support.size], residual[support.size :][wanted]])
    columns = np.concatenate([support, out])
    hessian = hessian_of(problem, _capped_ratio(ev, columns))
    k = columns.size
    system = np.zeros((k + 1, k + 1))
    system[:k, :k] = hessian
    system[:k, k] = 1.0
    system[k, :k] = 1.0
    rhs = np.zeros(k + 1)
    rhs[:k] = residual
    # (equilibrated: the curvature can be 1e-17 beside constraints of one)
    step = _bordered_solve(system, rhs, 1.0, always=True, fallback=False)
    if step is None:
        return None
    step = step[:k]
    gained = step[support.size :]
    if not gained.max() > _DUST:
        return None
    trial = r.copy()
    trial[columns] = np.maximum(r[columns] + step, 0.0)
    if not (trial[support] > 0).all():  # a larger change: leave it to the steps that follow
        trial[support] = r[support]
        trial[out] = np.maximum(step[support.size :], 0.0)
    return trial / trial.sum()


def _rescaled(problem: Reduced, r: np.ndarray, x: int) -> np.ndarray | None:
    """The marginal with phenotype ``x``'s mass ``s`` at the exact minimum of ``F`` along
    ``s e_x + (1 - s) r_others`` (the other masses keep their proportions): the root of
    ``sum_y p(y) (e(y,x) - z'(y)) / (s e(y,x) + (1 - s) z'(y))``, a decreasing function of
    ``s`` (``F`` is convex), by Brent's method to full relative precision (``s = 0`` when the
    slope is negative already at 1e-300); ``None`` when it is not negative at ``r(x)``, or
    where a row has neither ``e(y,x)`` nor ``z'(y)`` above zero (log domain)."""
    others = r.copy()
    others[x] = 0.0
    rest = others.sum()
    if not rest > 0:
        return None
    z_rest = problem.expo @ (others / rest)
    e = problem.expo[:, x]
    if ((e == 0) & (z_rest == 0)).any():
        return None  # a row in log domain for both: left to the general method
    p = problem.p

    def slope(share: float) -> float:
        with np.errstate(divide="ignore", over="ignore"):
            return float(p @ ((e - z_rest) / (share * e + (1.0 - share) * z_rest)))

    low, high = 1e-300, float(r[x])
    if not (high > low and slope(high) < 0):
        return None
    if slope(low) <= 0:
        share = 0.0  # the optimum along this line has x out of use
    else:
        share = brentq(slope, low, high, xtol=1e-300, rtol=4 * np.finfo(float).eps, maxiter=2000)
    out = others / rest * (1.0 - share)
    out[x] = share
    return out


def _finish_step(
    problem: Reduced, ev: Evaluation, r: np.ndarray, index: np.ndarray, extended: bool
):
    """Newton correction on the support with the accurate residual.

    Returns ``(new r, relative size of the correction, relative rounding bound)``;
    ``new r`` is ``None`` when the correction would drive a phenotype in use to zero or
    below (the support is not settled to the policy tolerance; phenotypes outside already
    have ``c(x) <= e^tol`` from the gap test).
    """
    support, step, rounding = _correction(problem, ev, r, index, extended)
    if not np.isfinite(step).all() or (r[support] + step <= 0).any():
        return None, np.inf, rounding
    trial = r.copy()
    trial[support] += step
    size = float(np.max(np.abs(step) / r[support]))
    return trial / trial.sum(), size, rounding


def finish(
    problem: Reduced, ev: Evaluation, r: np.ndarray, index, allowed, tol: float,
    policy: bool = True,
):
    """Newton finish from a marginal whose objective gap is below ``tol``.

    Returns ``(r, ev, gap, size, certified, steps)``: the last marginal whose gap is still
    below ``tol``, the relative size of the last Newton correction (an estimate of the
    remaining relative error of every mass in use, Newton's method converging
    quadratically), and the number of Newton corrections formed.

    ``policy=False`` settles for the float64 rounding level of the residual (no extended
    precision): for callers that need ``c(x)`` or the support, never a reported policy.
    """
    gap = _gap(ev.c, allowed)
    previous = np.inf
    # Next to a transition a mass in use is set by a residual that cancels to many digits;
    # where the float64 residual's rounding bound could move a mass by more than a share of
    # the tolerance, the residual is recomputed in extended precision from then on.
    extended = False
    size = np.inf
    steps = 0
    for _ in range(_FINISH_STEPS):
        # A phenotype out of use with c(x) > 1 (within the gap) enters if the Newton step
        # with it gives it a mass above _DUST: on a flat objective (small beta, or just past
        # a transition) a residual of 1e-17 can stand for a mass of one half.
        entering = _entering(problem, ev, r, index)
        if entering is not None:
            entering_ev = evaluate(problem, entering)
            entering_gap = _gap(entering_ev.c, allowed)
            if entering_gap > tol:  # the step was outside the model's reach: not certified
                return r, ev, gap, np.inf, False, steps
            r, ev, gap, previous = entering, entering_ev, entering_gap, np.inf
            continue
        # A phenotype in use has c(x) = 1 at the optimum. With the gap below tol, one with
        # c(x) < _LEAVING holds a mass below tol / (1 - _LEAVING) (since sum_x r c = 1): it
        # is taken as a zero the steps before did not reach and leaves exactly, if the gap
        # over every phenotype stays below tol without it. Then its exact mass is below about
        # tol as well (dropping it raises its own c(x) by about its mass times
        # H(x,x) >= c(x)^2), so a mass reported as zero is below 1e-12 at the optimum.
        leaving = index[(r[index] > 0) & (ev.c[index] < _LEAVING)]
        if leaving.size and leaving.size < (r > 0).sum():
            dropped = r.copy()
            dropped[leaving] = 0.0
            dropped /= dropped.sum()
            dropped_ev = evaluate(problem, dropped)
            dropped_gap = _gap(dropped_ev.c, allowed)
            if dropped_gap <= tol:
                r, ev, gap, previous = dropped, dropped_ev, dropped_gap, np.inf
                continue
        if (r[index] > 0).sum() - 1 > problem.p.size:
            # More phenotypes in use than states plus one: the Hessian (rank at most the
            # number of states) is singular along the simplex (dimension one less than the
            # phenotypes in use), so no Newton correction measures the distance to the
            # optimum; nothing is certified.
            return r, ev, gap, np.nan, False, steps
        trial, size, rounding = _finish_step(problem, ev, r, index, extended)
        steps += 1
        if trial is None:
            # The correction would empty a phenotype in use that belongs (dropping it fails
            # the gap test): its mass is orders of magnitude too large for Newton's steps.
            # It is set by the exact one-dimensional optimum along its own direction.
            gone = emptied(problem, ev, r, index)
            rescaled = _rescaled(problem, r, int(gone[0])) if gone.size else None
            if rescaled is None:
                return r, ev, gap, np.inf, False, steps
            rescaled_ev = evaluate(problem, rescaled)
            rescaled_gap = _gap(rescaled_ev.c, allowed)
            if rescaled_gap > tol:
                return r, ev, gap, np.inf, False, steps
            r, ev, gap, previous = rescaled, rescaled_ev, rescaled_gap, np.inf
            continue
        if policy and rounding > POLICY_RTOL:
            extended, previous = True, np.inf
            continue
        if size <= POLICY_RTOL:
            return r, ev, gap, size, True, steps
        if size > 0.25 * previous:  # the corrections stopped shrinking: rounding level
            if size <= NOISE_RTOL or not policy:
                return r, ev, gap, size, True, steps
            if extended:
                return r, ev, gap, size, False, steps
            extended, previous = True, np.inf
            continue
        trial_ev = evaluate(problem, trial)
        trial_gap = _gap(trial_ev.c, allowed)
        if trial_gap > tol:
            return r, ev, gap, size, False, steps
        previous = size
        r, ev, gap = trial, trial_ev, trial_gap
    return r, ev, gap, size, False, steps


#: The general method hands a marginal to the warm path's steps (on a support they have not
#: tried) once its objective gap is below this (nats): Newton's method then converges
#: within a few steps, each a fraction of the cost of a general one.
_HANDOFF = 1e-2
#: The warm path hands over to the general method after this many Newton steps ...
_WARM_STEPS = 10
#: ... and once a partition sum falls below this (ratios ``exp(beta u) / Z`` would then
#: need the cap of the general path; ``1 / _RATIO_CAP``).
_WARM_Z_FLOOR = 1.0 / _RATIO_CAP
#: Steps smaller than this (relative), or no longer shrinking, are followed by steps with the
#: accurate residual (the next step of Newton's method then reaches the certified size).
_WARM_ACCURATE = 1e-3
#: After a step smaller than this (relative), the next step keeps the Hessian of the step
#: before (a chord step): it differs by about the step's size, which then scales the next
#: correction by ``1 + O(1e-5)`` and leaves its use as a certificate intact.
_CHORD = 1e-5


#: Reductions called as ufunc methods (the array methods add two Python frames per call,
#: which on small tables costs as much as the arithmetic).
_sum, _min, _max = np.add.reduce, np.minimum.reduce, np.maximum.reduce


def _accurate_residual(expo, m1_t, p, r, z, scratch: Scratch, support=None):
    """``c(x) - 1`` on the columns of ``expo`` without cancellation, and its rounding bound:
    the float64 branch of :func:`kkt_residual` with ``bound=True``, element for element, with
    ``m1_t = expm1(beta gaps).T`` (phenotypes x states, C order) on the same columns and
    ``z = expo @ r`` given (every row in linear domain). Temporaries live in ``scratch``; the
    terms are formed phenotype by phenotype, so their sums over states are pairwise.
    ``support``: the columns of ``expo`` that ``m1_t`` and ``r`` describe (default: all)."""
    total = _sum(r)
    w = p / z
    m1_r = r @ m1_t
    numerator = np.multiply(m1_t, total, out=scratch.get("numerator", m1_t.shape))
    numerator -= m1_r
    # |S expm1 - expm1 @ r| <= -S expm1 - expm1 @ r (every expm1 <= 0)
    magnitude = -(m1_t @ w) * total - w @ m1_r
    far = (z < 0.5).nonzero()[0]
    if far.size:
        # S e - z there: the same value as S expm1 - expm1 @ r, without losing e to rounding;
        # |S e - z| <= S e + z <= 2 S - S expm1 - expm1 @ r, so the bound above needs 2 S w
        expo_far = expo[far].T if support is None else expo[far][:, support].T
        numerator[:, far] = total * expo_far - z[far]
        magnitude += 2.0 * total * _sum(w[far])
    numerator *= w
    return numerator.sum(axis=1), _rounding_factor(p.size, r.size) * magnitude


def _plain_error(c, residual, w, z, k: int) -> np.ndarray:
    """A bound on the rounding error of ``c - 1`` formed as ``w @ e - 1`` (``w = p / z``,
    ``z = e @ r`` by BLAS products in any order, ``r`` normalised in float64) against the
    residual of the exact exponentials at the normalised marginal, as
    :func:`kkt_residual`'s extended form computes it. Each term ``w(y) e(y,x)`` carries
    ``k + 3`` roundings (the product for ``z``, a quotient, a product, ``exp`` itself), the sum
    over ``m`` states ``m - 1`` more (Higham 2002, §3.1: any order of summation), ``sum r = 1``
    another ``k + 1``; rounding ``beta * gaps`` moves ``exp`` by at most ``|x| e^x u <=
    e^-1 u`` in absolute terms, which reaches ``c`` through ``e`` (``sum_y w(y) / e``) and
    through ``z`` (at most ``c / (e min z)`` relative); the final subtraction is exact between
    one half and two (Sterbenz), else one more rounding."""
    m = w.size
    top = float(_min(z))
    spread = _sum(w)
    bound = (m + 2 * k + 5) * c + (c / top + spread) / math.e + np.abs(residual)
    return (1.01 * _UNIT) * bound


def warm_newton(
    problem: Reduced, start: np.ndarray, allowed: np.ndarray, tol: float, policy: bool = True
) -> tuple[MarginalResult | np.ndarray | None, int]:
    """Newton's method on the support of a warm start, with the certificate of :func:`finish`.

    Along a curve the previous beta's marginal usually has the right support, and plain
    Newton steps on it converge quadratically with none of the general method's model
    minimisation, line search or full-width temporaries: per step one product with
    ``exp(beta gaps)`` on the support, the gradient, and the ``k x k`` Hessian from one
    scaled copy of the support's columns. Once the steps are small they use the accurate
    residual of :func:`kkt_residual`, and the marginal is certified under exactly the rule
    of :func:`finish`: objective gap (every allowed phenotype) at most ``tol`` and a Newton
    correction of every mass in use at most :data:`POLICY_RTOL` relative.

    ``policy=False``: as :func:`finish` with that option (float64 rounding level suffices).

    Returns the certified result; or a marginal (full length) from which the general method
    should go on, with the support unsettled or the finish needing extended precision; or
    ``None`` when the warm start is of no use; and the number of Newton steps taken.
    """
    n = problem.n_phenotypes
    used = allowed & (start > 0)
    support = used.nonzero()[0]
    k = support.size
    if k < 2 or k - 1 > problem.p.size:
        return None, 0  # (more phenotypes in use than states plus one: see finish)
    unused = (allowed & ~used).nonzero()[0]
    expo, p, scratch = problem.expo, problem.p, problem.scratch
    m = p.size
    # With most phenotypes in use the products run over every column (their marginal
    # entries zero), which costs less than copying the support's columns out of the table.
    wide = 2 * k >= n and k < n  # (with every phenotype in use the columns are the table)
    if wide or k == n:
        columns = expo
    else:
        columns = np.take(expo.T, support, axis=0, out=scratch.get("columns", (k, m))).T
    others = None if wide or not unused.size else expo[:, unused]
    root_p = problem.root_p
    # (Fortran order like the table: the scaling by a number per state runs along columns)
    scaled = scratch.get("scaled", (columns.shape[1], m)).T
    r = start[support]
    r = r / _sum(r)
    padded = np.zeros(n) if wide else None
    m1 = None
    exact_form = False  # c - 1 without cancellation (kkt_residual's float64 form)
    hessian = None
    accurate = False
    previous = np.inf
    moved = False

    def full(marginal):
        out = np.zeros(n)
        out[support] = marginal
        return out

    def handover(steps):
        return (full(r) if moved else None), steps

    def products(marginal):
        """``z``, ``w = p / z``, ``c`` on the columns of ``columns``, ``c`` on the support and
        outside it, at ``marginal`` (on the support); ``None`` when a ``z`` is too small."""
        if wide:
            padded[support] = marginal
            z = columns @ padded
        else:
            z = columns @ marginal
        if not _min(z) >= _WARM_Z_FLOOR:
            return None
        w = p / z
        every = w @ columns
        if wide:
            return z, w, every, every[support], every[unused] if unused.size else None
        return z, w, every, every, None if others is None else w @ others

    for steps in range(_WARM_STEPS):
        found = products(r)
        if found is None:
            return handover(steps)
        z, w, every, c, outside = found
        if outside is not None and _max(outside) > _FAR:
            return handover(steps)  # a phenotype far outside wants in: the support changes
        residual = c - 1.0
        if accurate and exact_form:
            residual, error = _accurate_residual(
                columns, m1, p, r, z, scratch, support if wide else None
            )
        elif accurate:
            error = _plain_error(c, residual, w, z, k)
        if hessian is None or previous > _CHORD:
            np.multiply(columns, (root_p / z)[:, None], out=scaled)
            hessian = centred_gram(scaled.T, every, root_p)
            if wide:
                hessian = hessian[support][:, support]
        if accurate:
            step, rounding = _support_newton_step(r, residual, hessian, error)
            if policy and rounding > POLICY_RTOL and not exact_form:
                # c - 1 as formed cannot resolve the step: the form without cancellation
                exact_form = True
                m1 = _expm1_gaps(problem, support, k == n)
                residual, error = _accurate_residual(
                    columns, m1, p, r, z, scratch, support if wide else None
                )
                step, rounding = _support_newton_step(r, residual, hessian, error)
            if policy and rounding > POLICY_RTOL:
                return handover(steps)  # the finish needs the residual in extended precision
        else:
            step = _support_newton_step(r, residual, hessian)
        trial = r + step
        size = float(_max(np.abs(step / r)))
        # Newton's correction must keep every mass in use positive (else the support moves).
        if not (_min(trial) > 0 and size < np.inf):
            return handover(steps)
        if accurate:
            if outside is not None and _max(outside) > 1.0:
                # settled on the support, but another phenotype's Kuhn–Tucker condition
                # fails (however slightly): the finish decides whether it enters
                return handover(steps)
            if size <= POLICY_RTOL:
                # The corrected marginal, if its own gap is certified: Newton's step leaves
                # an error of the order of the correction squared, so it is the better of
                # the two, and costs two products to check instead of another step.
                corrected = trial / _sum(trial)
                found = products(corrected)
                if found is not None:
                    c_new, outside_new = found[3], found[4]
                    top = float(_max(c_new))
                    gap = math.log(top) if top > 1.0 else 0.0
                    if gap <= tol and (outside_new is None or _max(outside_new) <= 1.0):
                        return MarginalResult(
                            full(corrected), gap, steps + 1, True,
                            "certified gap below tolerance; Newton correction "
                            f"{size:.2g} relative (applied)",
                        ), steps + 1
            top = float(_max(c))
            gap = math.log(top) if top > 1.0 else 0.0
            if (size <= POLICY_RTOL or not policy and size > 0.25 * previous) and gap <= tol:
                return MarginalResult(
                    full(r), gap, steps, True,
                    f"certified gap below tolerance; Newton correction {size:.2g} relative",
                ), steps
            if size > 0.25 * previous:
                return handover(steps)  # rounding level: the general finish decides
        r = trial / _sum(trial)
        moved = True
        accurate = accurate or size < _WARM_ACCURATE or size > 0.25 * previous
        previous = size
    return handover(_WARM_STEPS)


def newton_marginal(
    problem: Reduced,
    start: np.ndarray,
    *,
    allowed: np.ndarray | None = None,
    tol: float = 1e-12,
    max_iter: int = 200,
    warm: bool = False,
    policy: bool = True,
) -> MarginalResult:
    """Minimise ``F(r)`` over the simplex (optionally over phenotypes in ``allowed`` only).

    Parameters
    ----------
    problem : Reduced
    start : (n,) starting marginal; entries outside ``allowed`` are ignored.
    allowed : (n,) bool mask of phenotypes that may be used (default: all).
    tol : stop once ``log max_x c(x) <= tol`` (nats of objective).
    max_iter : outer (Newton) iterations.
    warm : ``start`` is a warm start (a nearby beta's marginal): try :func:`warm_newton` on
        its support first.
    policy : certify the policy (every mass in use to :data:`POLICY_RTOL`, extended precision
        where float64 cannot resolve it). ``False`` certifies the objective gap and takes the
        masses to float64's rounding level only: for internal callers that use ``c(x)`` or
        the support, never for a reported policy.
    """
    n = problem.n_phenotypes
    allowed = np.ones(n, dtype=bool) if allowed is None else allowed
    done = 0
    tried = None  # the support the warm path last worked on, as bytes
    if warm:
        tried = (allowed & (start > 0)).tobytes()
        outcome, done = warm_newton(problem, start, allowed, tol, policy)
        if isinstance(outcome, MarginalResult):
            return outcome
        if outcome is not None:
            start = outcome
    index = allowed.nonzero()[0]
    r = np.where(allowed, start, 0.0)
    r = r / r.sum()
    ev = evaluate(problem, r)
    gap = _gap(ev.c, allowed)
    iteration = done
    for iteration in range(done + 1, done + max_iter + 1):
        if gap <= _HANDOFF:
            # On a support the warm path has not tried, its steps finish at a fraction of
            # the cost of the general method's, under the same certificate; it hands back
            # where a phenotype may enter or leave, or rounding needs extended precision.
            support = (r > 0).tobytes()
            if support != tried:
                tried = support
                outcome, steps = warm_newton(problem, r, allowed, tol, policy)
                if isinstance(outcome, MarginalResult):
                    return replace(outcome, iterations=iteration - 1 + steps)
        if gap <= tol:
            r, ev, gap, size, certified, steps = finish(
                problem, ev, r, index, allowed, tol, policy
            )
            iteration += steps
            if certified:
                return MarginalResult(
                    r, gap, iteration - 1, True,
                    f"certified gap below tolerance; Newton correction {size:.2g} relative",
                )
            why = (
                f"the policy is resolved only to {size:.2g} relative"
                if np.isfinite(size)
                else "more phenotypes in use than states plus one (a singular Hessian)"
                if np.isnan(size)
                else "a Newton correction would empty a phenotype in use"
            )
            return MarginalResult(
                r, gap, iteration - 1, False,
                f"certified gap {gap:.2g} nats, but {why} (nearly flat objective)",
                policy_uncertified=True,
            )
        unused = index[r[index] == 0]
        if unused.size and ev.c[unused].max() > _FAR:
            entered = _enter(problem, r, ev, int(unused[np.argmax(ev.c[unused])]))
            if entered is not None:
                r = entered
                ev = evaluate(problem, r)
                gap = _gap(ev.c, allowed)
                continue
        direction = _direction(problem, ev, r[index], index, tol)
        # The gradient is -c; along a direction with sum zero only c - 1 counts (no cancellation).
        decrease = float((ev.c[index] - 1.0) @ direction)
        # Below float resolution the sign of the predicted decrease is noise: take the step.
        unresolved = abs(decrease) < _FLOOR * (1.0 + abs(ev.objective))
        if not (decrease > 0 or unresolved) or not np.any(direction):
            break
        t = 1.0
        accepted = None
        while t >= 1e-12:
            trial = np.zeros(n)
            trial[index] = np.maximum(r[index] + t * direction, 0.0)
            trial /= trial.sum()
            if unresolved or objective(problem, trial) <= ev.objective - _ARMIJO * t * decrease:
                accepted = trial
                break
            t *= 0.5
        if accepted is None:
            break
        r = accepted
        ev = evaluate(problem, r)
        gap = _gap(ev.c, allowed)
    return MarginalResult(
        r, gap, iteration, False, f"Newton stopped with certified gap {gap:.3g} nats"
    )
