"""The information–payoff curve along a grid of betas, with its phase transitions located."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.linalg.lapack import dgesv as _gesv
from scipy.optimize import brentq
from scipy.special import entr

from .._errors import InputError
from .._validate import as_array, as_distribution, choice
from ..information._measures import NATS_PER_BIT
from ._minimum_information import (
    Prepared,
    first_critical_beta_of,
    minimum_information_marginal,
    solve_marginal,
)
from ._marginal_newton import centred_gram
from ._problem import UNDERFLOW, Gaps, curve_policy, evaluate, max_entropy_policy
from ._results import CriticalBeta, Tradeoff
from ._solve import OBJECTIVES, check_problem, excess_of_log, policy_figures, solve

#: Marginal entries below this count as "not in use" when comparing supports.
SUPPORT_FLOOR = 1e-10
#: Transitions are located to this relative accuracy in beta (payoffs in large units would
#: lose every digit to an absolute tolerance).
BETA_RTOL = 1e-12


def _support(r: np.ndarray) -> frozenset:
    return frozenset(int(i) for i in np.flatnonzero(r > SUPPORT_FLOOR))


#: Newton's method on a transition's joint system gives up after this many steps (the
#: bracketed search then takes over).
_ROOT_STEPS = 40
#: ... and where a partition sum on the smaller support falls below this (its ratios would
#: need the log domain).
_ROOT_Z_FLOOR = 1e-100
#: Where rounding stops the steps from shrinking, the root is taken if beta's last step was
#: below this (relative): float64 resolves the conditions no further (seen: 1.4e-11 in one of
#: 199 roots of random problems; all others reached BETA_RTOL).
_ROOT_NOISE = 1e-10
_sum, _min = np.add.reduce, np.minimum.reduce


def kkt_root(
    gaps: Gaps, support: np.ndarray, x: int, beta: float, r: np.ndarray, lo: float, hi: float
) -> tuple[float | None, np.ndarray, int]:
    """The beta in ``(lo, hi)`` where phenotype ``x`` enters or leaves the optimum over
    ``support``: Newton's method on the Kuhn–Tucker conditions and the transition together,
    ``c_j(r, beta) = 1`` for ``j`` in ``support`` and ``c_x(r, beta) = 1``, in the masses on
    the support and beta at once.

    Started from ``r``, the optimum over ``support`` at ``beta`` (a grid point), it needs no
    solve per step: each step costs a few products over the states on the support's columns
    and ``x``'s. With ``E = exp(beta gaps)``, ``z = E_S r``, ``w = p / z``, the linearisation is
    ``dc_j = -sum_i M_ji dr_i + b_j dbeta`` with ``M_ji = sum_y p(y) E_yj E_yi / z_y^2`` (the
    Hessian of ``F``) and ``b_j = sum_y w_y E_yj (gaps_yj - sum_i r_i gaps_yi E_yi / z_y)``. On
    steps that keep ``sum r = 1`` the Hessian is used in its centred form, as in
    :func:`~._marginal_newton.warm_newton`; the support's rows carry the multiplier of that
    constraint.

    Returns the root, the masses on ``support`` there and the number of steps taken. The root
    is found once beta's step is below :data:`BETA_RTOL` relative, or below
    :data:`_ROOT_NOISE` where the steps stop shrinking at rounding level; it is ``None`` when a
    step leaves the bracket or empties a mass even when shortened, a partition sum is too
    small, or Newton's method does not converge. The caller checks the supports either side.
    """
    k = support.size
    p = gaps.p
    if k < 1 or k > p.size:
        return None, r, 0
    scratch = gaps.scratch
    shape = (k + 1, p.size)
    # Work arrays reused from step to step (fresh ones cost the zeroing of their pages).
    table = np.take(
        gaps.gaps_by_phenotype, np.append(support, x), axis=0,
        out=scratch.get("root_table", shape),
    )
    expo = scratch.get("root_expo", shape)
    weighted = scratch.get("root_weighted", shape)
    scaled = scratch.get("root_scaled", shape)
    root_p = gaps.root_p
    system = np.empty((k + 2, k + 2))
    rhs = np.empty(k + 2)
    previous = np.inf
    for steps in range(1, _ROOT_STEPS + 1):
        np.multiply(table, beta, out=expo)
        np.exp(expo, out=expo)
        z = r @ expo[:k]
        if not _min(z) > _ROOT_Z_FLOOR:
            return None, r, steps
        w = p / z
        c = expo @ w
        np.multiply(table, expo, out=weighted)
        mean_gap = (r @ weighted[:k]) / z
        b = weighted @ w - expo @ (w * mean_gap)
        np.multiply(expo, root_p / z, out=scaled)
        hessian = centred_gram(scaled, c, root_p)
        excess = c - 1.0
        # Unknowns: the relative changes of the masses, the multiplier, the change of beta.
        system[:k, :k] = hessian[:k, :k] * np.multiply.outer(r, r)
        system[:k, k] = r
        system[:k, k + 1] = -r * b[:k]
        system[k, :k] = r
        system[k, k:] = 0.0
        system[k + 1, :k] = (hessian[k, :k] + excess[:k]) * r
        system[k + 1, k] = 0.0
        system[k + 1, k + 1] = -b[k]
        rhs[:k] = r * excess[:k]
        rhs[k] = 0.0
        rhs[k + 1] = excess[k]
        rows = np.abs(system).max(axis=1)
        if not (rows > 0).all():
            return None, r, steps
        solution, info = _gesv(system / rows[:, None], rhs / rows)[2:]
        if info != 0 or not np.isfinite(solution).all():
            return None, r, steps
        relative, change = solution[:k], solution[k + 1]
        t = 1.0
        while True:
            trial_beta = beta + t * change
            trial = r * (1.0 + t * relative)
            if lo < trial_beta < hi and _min(trial) > 0:
                break
            t *= 0.5
            if t < 1e-3:
                return None, r, steps
        size = max(abs(t * change) / trial_beta, float(np.abs(t * relative).max()))
        beta, r = trial_beta, trial / _sum(trial)
        if t == 1.0 and abs(change) <= BETA_RTOL * beta and size <= 1e-8:
            return beta, r, steps
        if size > 0.25 * previous and size <= 1e-8:  # the steps stopped shrinking: rounding
            return (beta if abs(t * change) <= _ROOT_NOISE * beta else None), r, steps
        previous = size
    return None, r, _ROOT_STEPS


class _Locator:
    """Finds the betas between two grid points where the support of the marginal changes.

    Works on distinct phenotype columns. With one phenotype ``x`` changing between supports
    ``S`` and ``S + {x}``, the transition is the root of ``log c_x(beta)`` with the marginal
    optimised over ``S`` alone (the Kuhn–Tucker condition for ``x``): found by
    :func:`kkt_root`, else by Brent's method. Otherwise the interval is bisected on the full
    solution.
    """

    def __init__(self, prepared: Prepared, env: np.ndarray):
        self.payoff = prepared.distinct
        self.env = env
        self.n = self.payoff.shape[1]
        self.gaps = prepared.gaps
        # The locator works on distinct columns already: an identity grouping.
        self.identity = Prepared(
            self.payoff, np.arange(self.n), np.ones(self.n, dtype=int), prepared.gaps
        )
        #: The first critical beta (closed form, set by the caller): a phenotype enters
        #: exactly there; up to it the optimum is one phenotype, with no test.
        self.first = math.inf

    # Both searches below use c(x) and the support only, never a policy: their solves are
    # certified in the objective, with the masses at float64's rounding level (policy=False).

    def full(self, beta: float, start: np.ndarray | None) -> np.ndarray:
        r, _, _ = minimum_information_marginal(
            self.payoff, self.env, beta, start=start, prepared=self.identity, policy=False,
            first=self.first,
        )
        return r

    def on_smaller(
        self, beta: float, smaller: frozenset, start: np.ndarray | None, seen: dict
    ) -> tuple[np.ndarray, np.ndarray, bool]:
        """The optimum over ``smaller`` at ``beta``, ``c`` of every phenotype there, and whether
        the solve converged. ``seen`` maps the betas already solved in this search to their
        marginal and ``c`` (Brent's method asks for its end points again, and the nearest
        solution is the best warm start, else ``start``)."""
        if beta in seen:
            return (*seen[beta], True)
        allowed = np.zeros(self.n, dtype=bool)
        allowed[list(smaller)] = True
        if seen:
            start = seen[min(seen, key=lambda b: abs(b - beta))][0]
        record = solve_marginal(
            self.payoff, self.env, beta, start=start, allowed=allowed, gaps=self.gaps,
            policy=False,
        )
        c = evaluate(self.gaps.at(beta), record.marginal).c
        if record.converged:
            seen[beta] = (record.marginal, c)
        return record.marginal, c, record.converged

    def kkt_excess(
        self, beta: float, smaller: frozenset, x: int, start: np.ndarray, seen: dict
    ) -> float:
        """``log c_x(beta)`` with the marginal optimised over ``smaller`` (see
        :meth:`on_smaller`)."""
        return float(np.log(self.on_smaller(beta, smaller, start, seen)[1][x]))

    def one_change(
        self, beta: float, root: float, smaller: frozenset, x: int, seen: dict, x_in: bool,
        start: np.ndarray | None = None,
    ) -> bool:
        """Whether the optimal support at ``beta`` (or nearer ``root``, see below) is
        ``smaller`` plus ``x`` (``x_in``) or ``smaller`` alone, judged from the optimum over
        ``smaller`` by the Kuhn–Tucker conditions with strict margins: every mass of
        ``smaller`` in use, ``c_j < 1`` for every other phenotype, and ``c_x > 1`` exactly when
        ``x_in``. With strict margins a small entering mass of ``x`` moves none of them
        across, so the support there is the one claimed (convexity: the conditions are
        sufficient; Blahut 1972)."""
        # Brent's method left solutions on that side of the root, closer to it than beta is:
        # the farthest of them serves as well as a new solve at beta (a subinterval of the same
        # window), and costs no solve.
        reach = abs(beta - root)
        window = [b for b in seen if (b - root) * (beta - root) > 0 and abs(b - root) <= reach]
        if window:
            beta = max(window, key=lambda b: abs(b - root))
        marginal, c, converged = self.on_smaller(beta, smaller, start, seen)
        allowed = np.zeros(self.n, dtype=bool)
        allowed[list(smaller)] = True
        if not converged or not (marginal[allowed] > SUPPORT_FLOOR).all():
            return False
        with np.errstate(divide="ignore"):
            log_c = np.log(c)
        others = ~allowed
        others[x] = False
        return bool((log_c[others] < 0).all() and (log_c[x] > 0) == x_in and log_c[x] != 0)

    def between(self, lo: float, r_lo: np.ndarray, hi: float, r_hi: np.ndarray) -> list:
        if (r_lo > SUPPORT_FLOOR).tobytes() == (r_hi > SUPPORT_FLOOR).tobytes():
            return []  # (the common case, without building the sets)
        s_lo, s_hi = _support(r_lo), _support(r_hi)
        changed = s_lo ^ s_hi
        if len(changed) == 1 and hi - lo > BETA_RTOL * hi:
            (x,) = changed
            smaller = s_lo & s_hi
            entering = s_lo == smaller
            if entering and lo == self.first and self.one_change(
                min(lo * (1.0 + 1e-7), hi), lo, smaller, x, {}, x_in=True, start=r_lo
            ):
                # The first critical beta (closed form) is a grid point: x enters there.
                return [self._record(lo, s_lo, s_hi)]
            found = self._joint(lo, r_lo, hi, r_hi, smaller, x, entering)
            if found is None:
                found = self._bracketed(lo, r_lo, hi, r_hi, smaller, x, entering)
            if found is not None:
                return [self._record(found, s_lo, s_hi)]
        if hi - lo <= BETA_RTOL * hi:
            return [self._record(0.5 * (lo + hi), s_lo, s_hi)]
        mid = 0.5 * (lo + hi)
        r_mid = self.full(mid, r_lo)
        return self.between(lo, r_lo, mid, r_mid) + self.between(mid, r_mid, hi, r_hi)

    def _joint(self, lo, r_lo, hi, r_hi, smaller, x, entering) -> float | None:
        """The root by :func:`kkt_root`, if it converges and is the single change (see
        :meth:`_single`); else ``None``. It starts from the grid point whose optimum is over
        ``smaller``, and else from the other one, its masses on ``smaller`` renormalised
        (``c_x`` need not be monotone in beta: Newton's step from one end can point away)."""
        support = np.array(sorted(smaller))
        ends = ((lo, r_lo), (hi, r_hi)) if entering else ((hi, r_hi), (lo, r_lo))
        for beta, start in ends:
            if not beta > 0:
                continue  # at beta = 0 every Kuhn–Tucker condition holds with equality
            r = start[support]
            root, r_root, _ = kkt_root(self.gaps, support, x, beta, r / _sum(r), lo, hi)
            if root is not None:
                start = np.zeros(self.n)
                start[support] = r_root
                return root if self._single(root, lo, hi, smaller, x, entering, {}, start) else None
        return None

    def _bracketed(self, lo, r_lo, hi, r_hi, smaller, x, entering) -> float | None:
        """The root by Brent's method on :meth:`kkt_excess`, each value a solve over
        ``smaller``, if it is the single change (see :meth:`_single`); else ``None``."""
        start = r_lo if entering else r_hi
        seen = {}
        try:
            # At beta = 0 every Kuhn–Tucker condition holds with equality; start just above.
            a = lo if lo > 0 else hi * 1e-12
            f_lo = self.kkt_excess(a, smaller, x, start, seen)
            f_hi = self.kkt_excess(hi, smaller, x, start, seen)
            if f_lo * f_hi < 0:
                beta = brentq(
                    self.kkt_excess, a, hi, args=(smaller, x, start, seen),
                    xtol=1e-300, rtol=BETA_RTOL,
                )
                if self._single(beta, lo, hi, smaller, x, entering, seen, None):
                    return beta
        except (ValueError, FloatingPointError):
            pass
        return None

    def _single(self, beta, lo, hi, smaller, x, entering, seen, start) -> bool:
        """Trust a root only if it is the single change in the interval: just either side
        (1e-7 relative), the supports must be the two end supports."""
        step = 1e-7 * beta
        return self.one_change(
            max(beta - step, lo), beta, smaller, x, seen, x_in=not entering, start=start
        ) and self.one_change(
            min(beta + step, hi), beta, smaller, x, seen, x_in=entering, start=start
        )

    @staticmethod
    def _record(beta: float, before: frozenset, after: frozenset) -> tuple:
        return (float(beta), tuple(sorted(after - before)), tuple(sorted(before - after)))


def tradeoff(
    payoff,
    env,
    betas,
    *,
    objective: str = "min-information",
    reference=None,
) -> Tradeoff:
    """Optimal policies along a grid of betas: the information–payoff trade-off curve.

    Parameters
    ----------
    payoff : array_like, shape (states, phenotypes)
    env : array_like, shape (states,), or an environment with ``.probs``
    betas : array_like, shape (k,)
        Sensitivities (nats per payoff unit), finite and >= 0, in any order.
    objective : {"min-information", "max-entropy"}
    reference : array_like, optional
        Reference phenotype distribution (max-entropy only).

    Returns
    -------
    Tradeoff
        Arrays over ``betas`` (in the order given) and ``critical_betas``: every beta in the
        scanned range where the set of phenotypes in use changes, located to 1e-12 relative in beta
        (Newton's method on the Kuhn–Tucker conditions of the phenotypes in use and of the
        entering or leaving phenotype, with beta as an unknown; Brent's method where that
        does not settle). The first one, where a second phenotype enters, comes from its
        closed form.

    Notes
    -----
    Solutions are warm-started along increasing beta. The active-set Newton solver adds
    phenotypes explicitly when their Kuhn–Tucker condition fails, so a phenotype whose marginal
    was exactly zero at the previous beta is not lost (as it would be under Blahut–Arimoto).
    """
    u, p = check_problem(payoff, env)
    choice(objective, "objective", OBJECTIVES)
    if isinstance(betas, (str, bytes)) or np.asarray(betas).dtype.kind in "USObb":
        if np.asarray(betas).dtype.kind != "O" or any(
            isinstance(b, (str, bytes, bool)) for b in np.ravel(np.asarray(betas, dtype=object))
        ):
            raise InputError(f"`betas` must be real numbers (got {betas!r:.60})")
    grid = as_array(betas, "betas", ndim=1)
    if (grid < 0).any():
        raise InputError(f"`betas` must be >= 0 (got minimum {float(grid.min())!r})")
    order = np.argsort(grid, kind="stable")
    if objective == "max-entropy":
        ref = None
        if reference is not None:
            solve(u, p, 1.0, objective=objective, reference=reference)  # validates it
            ref = as_distribution(reference, "reference")
        sorted_points = [_max_entropy_point(u, p, float(beta), ref) for beta in grid[order]]
    else:
        if reference is not None:
            solve(u, p, 1.0, reference=reference)  # raises the documented error
        ref = None
        prepared = Prepared.build(u, p)
        first = first_critical_beta_of(prepared.distinct, p) if u.shape[1] > 1 else math.inf
        sorted_points = _min_information_points(u, p, grid[order], prepared, first)
    points = [None] * order.size
    for rank, i in enumerate(order):
        points[i] = sorted_points[rank]
    critical = ()
    if objective == "min-information" and u.shape[1] > 1:
        critical = _critical_betas(
            prepared, p, grid[order], [point.marginal for point in sorted_points], first
        )
    return Tradeoff(
        betas=grid,
        information_bits=np.array([point.information_bits for point in points]),
        conditional_entropy_bits=np.array([point.conditional_entropy_bits for point in points]),
        expected_payoff=np.array([point.expected_payoff for point in points]),
        marginals=np.stack([point.marginal for point in points]),
        iterations=np.array([point.iterations for point in points]),
        converged=np.array([point.converged for point in points]),
        critical_betas=critical,
        objective=objective,
        _payoff=u,
        _solver_marginals=np.stack([point.solver_marginal for point in points]),
        _reference=ref,
    )


@dataclass(frozen=True)
class _Point:
    """What a curve keeps of one beta's solution (its policy is rebuilt on request)."""

    marginal: np.ndarray
    solver_marginal: np.ndarray
    information_bits: float
    conditional_entropy_bits: float
    expected_payoff: float
    iterations: int
    converged: bool


#: Numbers per array in the batched figures of a curve (256 kB of float64: the arrays stay
#: in cache, measured 1.5x faster than 8 MB on 300 x 4).
_CHUNK = 2**15


@dataclass(frozen=True)
class _Table:
    """What the figures of every beta share: the payoff over the states that occur, as gaps
    to each state's best payoff and as differences to the best phenotype on average."""

    p: np.ndarray
    gaps: np.ndarray
    to_star: np.ndarray
    star_mean: float

    @classmethod
    def build(cls, u: np.ndarray, p: np.ndarray, fortran: bool = False) -> "_Table":
        """``fortran``: ``to_star`` in Fortran order, to match a solver's exponentials
        (:meth:`figures_at`; the gaps are then not formed)."""
        keep = p > 0
        uk, pk = u[keep], p[keep]
        star = int(np.argmax(p @ u))
        to_star = uk - uk[:, star : star + 1]
        if fortran:
            return cls(pk, None, np.asfortranarray(to_star), float((p @ u)[star]))
        return cls(pk, uk - uk.max(axis=1, keepdims=True), to_star, float((p @ u)[star]))

    def figures_at(self, problem, r: np.ndarray):
        """The figures of :meth:`figures` for one beta from the exponentials a solve at that
        beta left in ``problem`` (a :class:`~._problem.Reduced` over the same columns and
        states; ``to_star`` in the same Fortran order): no exponential is formed again and
        no ratio array unless the terms cancel. ``None`` where a partition sum underflows."""
        expo, p, beta = problem.expo, self.p, problem.beta
        z = expo @ r
        if not _min(z) > UNDERFLOW:
            return None
        scratch = problem.scratch
        work = scratch.get("figures", (expo.shape[1], expo.shape[0])).T
        with np.errstate(divide="ignore"):
            log_z = np.log(z)
        gain = beta * (np.multiply(expo, problem.gaps_by_phenotype.T, out=work) @ r) / z
        information = float((gain - log_z) @ p)
        scale_i = float((np.abs(gain) + np.abs(log_z)) @ p)
        w = p / z
        marginal = r * (w @ expo)
        cross = -float(marginal @ np.log(np.where(r > 0, r, 1.0)))
        entropy = cross - information
        if not (information > 1e-6 * scale_i and entropy > 1e-6 * (abs(cross) + scale_i)):
            # the elementwise forms, on the phenotypes in use (the others add zeros)
            used = np.flatnonzero(r > 0)
            ratio = np.divide(expo[:, used], z[:, None])  # q / r
            information = float((excess_of_log(ratio - 1.0) @ r[used]) @ p)
            entropy = float((entr(ratio * r[used]) @ np.ones(used.size)) @ p)
        payoff = self.star_mean + float((np.multiply(expo, self.to_star, out=work) @ r) @ w)
        return (max(information, 0.0) / NATS_PER_BIT, entropy / NATS_PER_BIT, payoff), marginal

    def figures(self, betas: np.ndarray, marginals: np.ndarray):
        """``I`` (bits), ``H(X|Y)`` (bits), ``E[u]`` and the marginal ``sum_y p(y) q(x|y)`` of
        the Gibbs policies ``q = r exp(beta gaps) / z`` (``betas > 0``), for several betas at
        once in chunks of at most :data:`_CHUNK` numbers: the formulas of
        :func:`policy_figures` in linear domain. The last output marks the betas whose
        partition sums underflow (their policies need the log domain); their figures are NaN.
        """
        k, n = marginals.shape
        out = np.full((k, 3), np.nan)
        fractions = np.zeros((k, n))
        failed = np.zeros(k, dtype=bool)
        size = max(1, _CHUNK // self.gaps.size)
        for lo in range(0, k, size):
            b, r = betas[lo : lo + size], marginals[lo : lo + size]
            ratio = b[:, None, None] * self.gaps
            np.exp(ratio, out=ratio)
            z = (ratio @ r[:, :, None])[..., 0]
            bad = ~(z.min(axis=1) > UNDERFLOW)
            z[bad] = 1.0
            ratio /= z[..., None]  # q / r, in place of the exponentials
            q = ratio * r[:, None, :]
            # I = sum_y p(y) (beta sum_x q g - log z) and H(X|Y) = -sum_x f log r - I, one
            # logarithm per state; trusted where the terms cancel by less than six digits
            # (rounding then moves them by less than 1e-10 relative), else the elementwise
            # forms below, accurate to the last digit however small I or H(X|Y) is.
            with np.errstate(divide="ignore"):
                log_z = np.log(z)
            # sums over the (few) phenotypes as products with ones: numpy's reduction along
            # a short last axis costs several passes, a matrix-vector product one
            ones = np.ones(n)
            gain = b[:, None] * ((q * self.gaps) @ ones)
            information = (gain - log_z) @ self.p
            scale_i = (np.abs(gain) + np.abs(log_z)) @ self.p
            marginal = self.p @ q
            cross = -(marginal * np.log(np.where(r > 0, r, 1.0))).sum(axis=1)
            entropy = cross - information
            trusted = (information > 1e-6 * scale_i) & (entropy > 1e-6 * (np.abs(cross) + scale_i))
            careful = np.flatnonzero(~trusted)
            if careful.size:
                # phi(q / r - 1) weighted by r: zero for phenotypes not in use
                information[careful] = (
                    excess_of_log(ratio[careful] - 1.0) @ r[careful, :, None]
                )[..., 0] @ self.p
                entropy[careful] = (entr(q[careful]) @ ones) @ self.p
            del ratio
            chunk = out[lo : lo + size]
            chunk[:, 0] = np.maximum(information, 0.0) / NATS_PER_BIT
            chunk[:, 1] = entropy / NATS_PER_BIT
            chunk[:, 2] = self.star_mean + ((q * self.to_star) @ ones) @ self.p
            fractions[lo : lo + size] = marginal
            chunk[bad] = np.nan
            failed[lo : lo + size] = bad
        return out, fractions, failed


def _point(u, p, beta, q, solver_marginal, marginal, iterations, converged) -> _Point:
    information, entropy, payoff = policy_figures(u, p, q)
    return _Point(
        p @ q if marginal is None else marginal, solver_marginal, information, entropy, payoff,
        iterations, converged,
    )


def _max_entropy_point(u, p, beta: float, reference) -> _Point:
    q = max_entropy_policy(u, beta, reference)
    return _point(u, p, beta, q, np.full(u.shape[1], np.nan), None, 0, True)


def _min_information_points(u, p, sorted_betas, prepared: Prepared, first: float) -> list:
    """Min-information solutions along increasing betas, each warm-started from the last.

    The steps of :func:`switchlaw.solve` at each beta, with the problem's set-up shared and
    the deterministic test replaced by the first critical beta ``first``. Each policy is
    formed, summarised and dropped (the curve rebuilds it on request); a closed form (one
    phenotype, or its duplicates, or beta zero) is the same marginal in every state, so its
    figures need no policy.
    """
    points = []
    solved = []  # the last four solver points, as _Solved
    # A table of a chunk or more and no duplicate columns: each beta's figures from the
    # exponentials its solve left behind, right after it (batches would hold one beta each).
    direct = {}
    table = None
    if u.size >= _CHUNK and prepared.distinct.shape[1] == u.shape[1]:
        table = _Table.build(u, p, fortran=True)
    for beta in sorted_betas:
        beta = float(beta)
        r, record, status = minimum_information_marginal(
            u, p, beta, start=_predict(solved, beta), prepared=prepared, first=first
        )
        closed = status == "closed-form"
        if not closed:
            solved = solved[-3:] + [_Solved.of(beta, r)]
            if table is not None and beta > 0:
                found = table.figures_at(prepared.gaps.at(beta), r)
                if found is not None:
                    direct[len(points)] = found
        points.append((beta, r, record, closed))
    # Smaller tables: the figures of the solver points in batches (one array operation per
    # quantity for many betas). Closed forms take theirs below; underflowing partition sums
    # (either path) go through the policy itself.
    gibbs = [] if table is not None else [
        i for i, (_, _, _, closed) in enumerate(points) if not closed
    ]
    figures = np.zeros((0, 3))
    if gibbs:
        figures, fractions, failed = _Table.build(u, p).figures(
            np.array([points[i][0] for i in gibbs]), np.stack([points[i][1] for i in gibbs])
        )
    batched = {i: j for j, i in enumerate(gibbs) if not failed[j]}
    means = p @ u
    result = []
    for i, (beta, r, record, closed) in enumerate(points):
        if i in direct:
            (information, entropy, payoff), fractions_i = direct[i]
            result.append(_Point(
                fractions_i, r, information, entropy, payoff, record.iterations,
                record.converged,
            ))
        elif i in batched:
            j = batched[i]
            information, entropy, payoff = figures[j]
            result.append(_Point(
                fractions[j], r, information, entropy, payoff, record.iterations,
                record.converged,
            ))
        elif closed:
            # q(x|y) = r(x) in every state: no information, H(X|Y) = H(r)
            result.append(_Point(
                r, r, 0.0, float(entr(r).sum()) / NATS_PER_BIT, float(r @ means),
                record.iterations, record.converged,
            ))
        else:
            q = curve_policy(u, beta, "min-information", r)
            result.append(
                _point(u, p, beta, q, r, None, record.iterations, record.converged)
            )
    return result


@dataclass(frozen=True)
class _Solved:
    """A solver point as the predictor uses it: log beta, the marginal, its logs (zero where
    not in use), and its support as bytes (compared without numpy)."""

    log_beta: float
    marginal: np.ndarray
    logs: np.ndarray
    support: bytes

    @classmethod
    def of(cls, beta: float, marginal: np.ndarray) -> "_Solved":
        used = marginal > 0
        logs = np.log(np.where(used, marginal, 1.0))  # zero where not in use
        return cls(math.log(beta) if beta > 0 else -math.inf, marginal, logs, used.tobytes())


def _predict(solved: list, beta: float) -> np.ndarray | None:
    """Warm start at ``beta``: the polynomial through the last (up to four) solutions in log
    mass against log beta, where they share a support (a third-order predictor along the
    curve: on a grid of 100 betas the first Newton step then starts about 1e-5 from the
    solution), else the last solution."""
    if not solved:
        return None
    last = solved[-1]
    points = [point for point in solved if point.support == last.support]
    t = math.log(beta) if beta > 0 else -math.inf
    if len(points) < 2 or points[-1] is not last or t == last.log_beta or not math.isfinite(
        points[0].log_beta
    ):
        return last.marginal
    # fewer points where the step out is longer than the span they cover (betas bunched near
    # a transition, then a far grid point): high-degree extrapolation would run wild
    while len(points) > 2 and t - points[-1].log_beta > points[-1].log_beta - points[0].log_beta:
        points = points[1:]
    x = [point.log_beta for point in points]
    weights = []
    for i, xi in enumerate(x):  # Lagrange weights of the interpolating polynomial at t
        weight = 1.0
        for j, xj in enumerate(x):
            if j != i:
                weight *= (t - xj) / (xi - xj)
        weights.append(weight)
    combined = np.array(weights) @ np.array([point.logs for point in points])
    start = np.exp(np.minimum(combined, 0.0))  # a mass is at most one (and exp cannot overflow)
    start[~(last.marginal > 0)] = 0.0
    total = _sum(start)
    return start / total if math.isfinite(total) and total > 0 else last.marginal


def _critical_betas(prepared: Prepared, p, grid, sorted_marginals, first: float) -> tuple:
    """Locate support changes between consecutive grid betas (distinct phenotypes only);
    ``first`` is the first critical beta."""
    distinct, inverse = prepared.distinct, prepared.inverse
    locator = _Locator(prepared, p)
    merged = prepared.merge

    # The first transition has a closed form (Kuhn–Tucker conditions): add it to the points
    # between which changes are located, so that it is never missed, and report it exactly.
    locator.first = first
    points = [(float(b), merged(r)) for b, r in zip(grid, sorted_marginals)]
    if grid[0] < first < grid[-1]:
        points.append((first, locator.full(first, None)))
        points.sort(key=lambda item: item[0])
    found = []
    for (lo, r_lo), (hi, r_hi) in zip(points[:-1], points[1:]):
        if lo < hi:
            found += locator.between(lo, r_lo, hi, r_hi)
    exact = [False] * len(found)
    if found and first > 0:
        nearest = int(np.argmin([abs(f[0] - first) for f in found]))
        if abs(found[nearest][0] - first) <= 1e-6 * first:
            found[nearest] = (first,) + found[nearest][1:]
            exact[nearest] = True
    groups = [np.flatnonzero(inverse == g) for g in range(distinct.shape[1])]

    def expand(indices):
        return tuple(sorted(int(i) for g in indices for i in groups[g]))

    return tuple(
        CriticalBeta(beta=b, entering=expand(e), leaving=expand(l), exact=exact)
        for (b, e, l), exact in sorted(zip(found, exact))
    )
