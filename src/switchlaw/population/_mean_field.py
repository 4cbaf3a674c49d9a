"""Mean-field population model with phenotype switching by a derived law.

Compartments (one per phenotype ``x``), density ``rho = sum_x rho_x``:

    rho_x' = a_x(rho) rho_x + (rho f_x(rho) - rho_x) / tau,
    a_x(rho) = b_x (1 - rho) - d_x - c_x rho,

with division into free space ``b_x``, death ``d_x``, optional crowding death ``c_x`` and
cells re-deciding at rate ``1 / tau`` with the law ``q(x | y, rho)`` averaged over
``p(y | rho)`` (``f_x``; domain notes §3–4). In the fast-switching limit (``tau=None``)
``rho_x = rho f_x(rho)`` and ``rho' = rho g(rho)`` with ``g = sum_x f_x a_x``.
"""

from __future__ import annotations

import copy
from collections import OrderedDict
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from .._errors import InputError
from .._validate import as_array, as_nonnegative, as_positive, choice, phenotype_names
from ..decision._costs import beta_from_cost
from ..decision._solve import OBJECTIVES
from ..decision._minimum_information import minimum_information_marginal
from ..decision._solve import max_entropy_policy
from ..laws._law import decision_problem
from ._continuation import BifurcationDiagram, Branch, CriticalPoint, locate_fold, trace_branch
from ._scalar import Equilibrium, derivative, roots_on_unit_interval

REGIMES = ("extinction", "monostable", "weak-allee", "strong-allee")
#: Scalar parameters a model can be continued in.
PARAMETERS = ("beta", "cost_per_bit", "death_scale", "division_scale", "tau")
_CACHE = 4096


def _fold_by_counting(family, value: float, rho: float, lo: float, hi: float):
    """A change in the number of positive equilibria near ``value``, located by bisection."""

    def count(v):
        return len(family.equilibria(v)) - 1

    width = 1e-3 * (hi - lo)
    for _ in range(8):
        a, b = max(lo, value - width), min(hi, value + width)
        n_a, n_b = count(a), count(b)
        if n_a != n_b:
            break
        width *= 3
    else:
        return None
    while b - a > 1e-11 * max(1.0, abs(a)):
        middle = 0.5 * (a + b)
        if count(middle) == n_a:
            a = middle
        else:
            b = middle
    more = a if n_a > n_b else b
    roots = sorted((e.density for e in family.equilibria(more)[1:]), key=lambda r: abs(r - rho))
    density = float(np.mean(roots[:2])) if len(roots) >= 2 else float(rho)
    return family.point(0.5 * (a + b), "fold", density)


def _clip_to_range(H, densities, betas, stable, lo, hi):
    """Replace a final step that left the range by the branch's crossing of its edge."""
    if betas.size >= 2 and not (lo <= betas[-1] <= hi):
        edge = hi if betas[-1] > hi else lo
        w = (edge - betas[-2]) / (betas[-1] - betas[-2])
        guess = densities[-2] + w * (densities[-1] - densities[-2])
        a, b = sorted((densities[-2], densities[-1]))
        a, b = max(a - 1e-3, 1e-12), min(b + 1e-3, 1.0)
        try:
            guess = brentq(lambda r: H(r, edge), a, b, xtol=1e-14)
        except ValueError:
            pass  # no sign change in the bracket: keep the interpolated point
        densities = np.r_[densities[:-1], guess]
        betas = np.r_[betas[:-1], edge]
        stable = np.r_[stable[:-1], stable[-2]]
    keep = (densities > 0) & (densities <= 1)
    return densities[keep], betas[keep], stable[keep]


def _near(branch, rho: float, beta: float, lo: float, hi: float) -> bool:
    """Whether ``(rho, beta)`` lies on an already traced branch (scaled distance < 1e-3)."""
    scaled = np.hypot(branch.densities - rho, (branch.betas - beta) / (hi - lo))
    return bool(scaled.min() < 1e-3)


def _rates(value, name: str, n: int | None = None) -> np.ndarray:
    rates = as_array(value, name, ndim=1)
    if (rates < 0).any():
        i = int(np.argmax(rates < 0))
        raise InputError(f"`{name}` rates must be >= 0; entry {i} is {float(rates[i])!r}")
    if n is not None and rates.size != n:
        raise InputError(f"`{name}` must have one rate per phenotype ({n}) (got {rates.size})")
    return rates


@dataclass(frozen=True, repr=False)
class Trajectory:
    """A solution of the mean-field ODE.

    Attributes
    ----------
    times : ndarray, shape (k,)
    compartments : ndarray, shape (k, phenotypes)
        Phenotype densities (in the fast-switching limit, ``density * fractions``).
    density : ndarray, shape (k,)
    success : bool
    message : str
    """

    times: np.ndarray
    compartments: np.ndarray
    density: np.ndarray
    success: bool
    message: str

    def __repr__(self) -> str:
        return (
            f"Trajectory({self.times.size} times to t={self.times[-1]:.4g}, final density "
            f"{self.density[-1]:.6g}, {'ok' if self.success else 'FAILED: ' + self.message})"
        )


class MeanField:
    """Mean-field dynamics of a population whose cells switch phenotype by a derived law.

    Parameters
    ----------
    payoff, environment :
        As in :func:`switchlaw.derive_law`; the law is re-derived for every beta.
    division, death : array_like, shape (phenotypes,)
        Per-phenotype division rate into free space and death rate (per unit time, >= 0).
    tau : float, optional
        Decision timescale (time units); ``None`` is the fast-switching limit.
    crowding : array_like, optional
        Extra death per unit density (``c_x rho``), default zero.
    objective : {"min-information", "max-entropy"}
    phenotypes : sequence of str, optional

    Notes
    -----
    Regimes (Stephens, Sutherland & Freckleton 1999; Courchamp, Berec & Gascoigne 2008):
    ``"extinction"`` when no positive state is stable; ``"strong-allee"`` when zero is stable
    (per-capita growth at low density negative) and a positive state is stable (bistable);
    ``"weak-allee"`` when zero is unstable and per-capita growth rises near zero;
    ``"monostable"`` otherwise. With finite ``tau`` the growth at zero is the leading
    eigenvalue of the linearisation and "per-capita growth" is the reduced equation
    ``sum_x f_x / (1 - tau a_x) - 1`` whose positive roots are the equilibria.
    """

    def __init__(
        self,
        payoff,
        environment,
        *,
        division,
        death,
        tau=None,
        crowding=None,
        objective: str = "min-information",
        phenotypes=None,
    ):
        self.payoff = payoff
        self.environment = environment
        self.division = _rates(division, "division")
        self.death = _rates(death, "death", self.division.size)
        self.crowding = (
            np.zeros(self.division.size) if crowding is None
            else _rates(crowding, "crowding", self.division.size)
        )
        self.tau = None if tau is None else as_positive(tau, "tau")
        self.objective = choice(objective, "objective", OBJECTIVES)
        self.phenotypes = None if phenotypes is None else phenotype_names(phenotypes)
        if isinstance(payoff, dict):
            phenotype_names(payoff, "payoff")
        self._cache: OrderedDict = OrderedDict()
        self._last_marginal = None

    # ----------------------------------------------------------------- the law
    def fractions(self, density, beta) -> np.ndarray:
        """Mean-field phenotype fractions ``f_x(density)`` of the law at ``beta``."""
        key = (float(density), float(beta))
        if key in self._cache:
            self._cache.move_to_end(key)
            return self._cache[key]
        if not 0.0 <= key[0] <= 1.0:
            raise InputError(f"`density` must be in [0, 1] (got {key[0]!r})")
        f = self._derive_fractions(key[0], as_nonnegative(beta, "beta"))
        if f.size != self.division.size:
            raise InputError(
                f"`division` must have one rate per phenotype ({f.size}) (got {self.division.size})"
            )
        self._cache[key] = f
        if len(self._cache) > _CACHE:
            self._cache.popitem(last=False)
        return f

    def _derive_fractions(self, rho: float, beta: float) -> np.ndarray:
        """``f_x(rho)``: for min-information the optimal marginal itself; else ``p @ q``."""
        env, u, _ = decision_problem(self.payoff, self.environment, rho, self.phenotypes)
        if self.objective == "max-entropy":
            return env.probs @ max_entropy_policy(u, beta, None)
        r, record, _ = minimum_information_marginal(u, env.probs, beta, start=self._last_marginal)
        if record.converged and r.size == u.shape[1]:
            self._last_marginal = r
        return r

    def net_rates(self, density) -> np.ndarray:
        """``a_x(rho) = b_x (1 - rho) - d_x - c_x rho`` per phenotype (per unit time)."""
        return self.division * (1.0 - density) - self.death - self.crowding * density

    def growth(self, density, beta) -> float:
        """Per-capita growth ``g(rho) = sum_x f_x(rho) a_x(rho)`` (fast-switching limit)."""
        return float(self.fractions(density, beta) @ self.net_rates(density))

    def reduced(self, density, beta) -> float:
        """The scalar equation whose positive roots are the equilibria.

        ``g(rho)`` in the fast-switching limit; ``sum_x f_x / (1 - tau a_x) - 1`` with finite
        ``tau`` (``inf`` where ``1 - tau a_x <= 0`` for a phenotype that cells adopt: its
        growth outruns switching there; phenotypes with ``f_x = 0`` do not count).
        """
        if self.tau is None:
            return self.growth(density, beta)
        f = self.fractions(density, beta)
        denominator = 1.0 - self.tau * self.net_rates(density)
        used = f > 0
        if (denominator[used] <= 0).any():
            return np.inf
        return float(f[used] @ (1.0 / denominator[used]) - 1.0)

    # --------------------------------------------------------------- dynamics
    def rhs(self, compartments, beta) -> np.ndarray:
        """Time derivative of the compartments (or of ``[rho]`` in the fast-switching limit)."""
        state = np.clip(np.asarray(compartments, dtype=float), 0.0, None)
        if self.tau is None:
            rho = min(float(state[0]), 1.0)
            return np.array([rho * self.growth(rho, beta)])
        rho = min(float(state.sum()), 1.0)
        f = self.fractions(rho, beta)
        return self.net_rates(rho) * state + (rho * f - state) / self.tau

    def trajectory(self, beta, initial, t_end, *, points: int = 201, rtol: float = 1e-8) -> Trajectory:
        """Integrate the model from ``initial`` (a density, or compartments with finite tau)."""
        from scipy.integrate import solve_ivp

        t_end = as_positive(t_end, "t_end")
        start = np.atleast_1d(np.asarray(initial, dtype=float))
        if self.tau is None:
            if start.size != 1:
                raise InputError("`initial` must be one density in the fast-switching limit")
        elif start.size == 1:
            start = start[0] * self.fractions(start[0], beta)
        if not np.isfinite(start).all() or (start < 0).any() or start.sum() > 1.0:
            raise InputError(f"`initial` must be non-negative with total density <= 1 (got {start})")
        times = np.linspace(0.0, t_end, points)
        solution = solve_ivp(
            lambda t, z: self.rhs(z, beta), (0.0, t_end), start, t_eval=times,
            method="LSODA", rtol=rtol, atol=1e-12,
        )
        values = solution.y.T
        if self.tau is None:
            density = values[:, 0]
            compartments = np.stack([d * self.fractions(min(max(d, 0.0), 1.0), beta) for d in density])
        else:
            compartments = values
            density = values.sum(axis=1)
        return Trajectory(solution.t, compartments, density, bool(solution.success), solution.message)

    # ------------------------------------------------------------- equilibria
    def _jacobian(self, compartments: np.ndarray, beta: float) -> np.ndarray:
        rho = float(compartments.sum())
        f = self.fractions(rho, beta)
        slope = derivative(lambda r: self.fractions(r, beta), rho, step=1e-4)
        a = self.net_rates(rho)
        a_slope = -self.division - self.crowding
        jac = np.diag(a - 1.0 / self.tau)
        jac += np.outer(compartments * a_slope + (f + rho * slope) / self.tau, np.ones(f.size))
        return jac

    def _equilibrium(self, rho: float, beta: float) -> Equilibrium:
        if self.tau is None:
            g = self.growth(rho, beta)
            # A small step keeps the difference on one side of nearby kinks of the law.
            eigen = g + rho * derivative(lambda r: self.growth(r, beta), rho, step=1e-6)
            eigenvalues = np.array([eigen])
            compartments = rho * self.fractions(rho, beta)
        else:
            if rho == 0.0:
                compartments = np.zeros(self.division.size)
            else:
                compartments = rho * self.fractions(rho, beta) / (1.0 - self.tau * self.net_rates(rho))
            eigenvalues = np.linalg.eigvals(self._jacobian(compartments, beta))
        return Equilibrium(
            density=float(rho), stable=bool(np.all(eigenvalues.real < 0)),
            eigenvalues=eigenvalues, compartments=compartments,
        )

    def equilibria(self, beta, *, points: int = 201) -> list[Equilibrium]:
        """Every equilibrium in ``[0, 1]`` at ``beta``, zero first, by increasing density."""
        beta = as_nonnegative(beta, "beta")
        roots = roots_on_unit_interval(lambda r: self.reduced(r, beta), points=points)
        # Brent's method can also converge onto a jump of the reduced equation (where growth
        # outruns switching); keep true roots, judged against the equation's own scale.
        scale = max(abs(self.reduced(r, beta)) for r in np.linspace(0.0, 1.0, 11)
                    if np.isfinite(self.reduced(r, beta))) if roots else 1.0
        roots = [r for r in roots if abs(self.reduced(r, beta)) <= 1e-8 * max(scale, 1e-300)]
        return [self._equilibrium(0.0, beta)] + [self._equilibrium(r, beta) for r in roots]

    def low_density_growth(self, beta) -> float:
        """Growth rate of a rare population: the leading eigenvalue at zero density."""
        return float(np.max(self._equilibrium(0.0, as_nonnegative(beta, "beta")).eigenvalues.real))

    def regime(self, beta, *, points: int = 201) -> str:
        """One of :data:`REGIMES` at ``beta``."""
        found = self.equilibria(beta, points=points)
        if not any(e.stable for e in found[1:]):
            return "extinction"
        if found[0].stable:
            return "strong-allee"
        rising = derivative(lambda r: self.reduced(r, beta), 0.0, step=1e-4) > 0
        return "weak-allee" if rising else "monostable"

    def allee_threshold(self, beta, *, points: int = 201) -> float | None:
        """Density below which the population declines (strong Allee effect), else ``None``."""
        found = self.equilibria(beta, points=points)
        if not found[0].stable:
            return None
        stable = [e.density for e in found[1:] if e.stable]
        unstable = [e.density for e in found[1:] if not e.stable and stable and e.density < stable[0]]
        return unstable[-1] if unstable else None

    # ------------------------------------------------------------ continuation
    def along(self, parameter: str, *, beta=None) -> "_Along":
        """The model as a family in one scalar parameter (see :data:`PARAMETERS`)."""
        choice(parameter, "parameter", PARAMETERS)
        if parameter != "beta" and parameter != "cost_per_bit":
            if beta is None:
                raise InputError(f"`beta` must be given to continue in {parameter!r}")
            beta = as_nonnegative(beta, "beta")
        return _Along(self, parameter, beta)

    def continuation(
        self, start, stop, *, parameter: str = "beta", beta=None, samples: int = 41, ds: float = 0.01
    ) -> BifurcationDiagram:
        """Branches of equilibria for a parameter in ``[start, stop]`` and their critical points.

        Positive branches are followed by pseudo-arclength continuation from the equilibria
        at both ends of the range and from every transcritical point. Transcritical points are
        roots of the low-density growth rate in the parameter (Brent's method, to 1e-12);
        folds are turning points of a branch, located as extrema of ``value(density)``.

        Parameters
        ----------
        start, stop : float
            Range of the parameter.
        parameter : {"beta", "cost_per_bit", "death_scale", "division_scale", "tau"}
            ``*_scale`` multiplies every phenotype's rate; ``tau`` needs a finite-tau model.
        beta : float
            Fixed sensitivity when continuing in another parameter.
        """
        family = self.along(parameter, beta=beta)
        lo = family.check(start, "start")
        hi = family.check(stop, "stop")
        if not hi > lo:
            raise InputError(f"`stop` must exceed `start` (got {lo!r} and {hi!r})")
        grid = np.linspace(lo, hi, samples)
        zero = np.array([family.low_density_growth(v) for v in grid])
        critical = []
        for i in range(samples - 1):
            if zero[i] == 0.0:
                critical.append(family.point(float(grid[i]), "transcritical", 0.0))
            elif zero[i] * zero[i + 1] < 0:
                value = brentq(family.low_density_growth, grid[i], grid[i + 1], xtol=1e-13,
                               rtol=4 * np.finfo(float).eps)
                critical.append(family.point(float(value), "transcritical", 0.0))
        H = family.reduced
        starts = []
        for value, direction in ((lo, (0.0, 1.0)), (hi, (0.0, -1.0))):
            for eq in family.equilibria(value)[1:]:
                starts.append((eq.density, value, direction))
        for point in critical:
            starts.append((1e-9, point.value, (1.0, 0.0)))
        branches = []
        for rho, value, direction in starts:
            if any(_near(branch, rho, value, lo, hi) for branch in branches):
                continue
            densities, values, slopes, ended = trace_branch(
                H, rho, value, direction=direction, beta_min=lo, beta_max=hi, ds=ds
            )
            if self.tau is None:
                # rho' = rho g(rho): the eigenvalue at a positive root is rho g'(rho).
                stable = slopes < 0
            else:
                stable = np.array([family.equilibrium(r, v).stable for r, v in zip(densities, values)])
            densities, values, stable = _clip_to_range(H, densities, values, stable, lo, hi)
            if densities.size == 0:
                continue
            branches.append(Branch(densities, values, stable, ended))
            turns = np.sign(np.diff(values))
            for j in range(1, turns.size):
                if turns[j - 1] != 0 and turns[j] != 0 and turns[j - 1] != turns[j]:
                    rho_f, value_f = locate_fold(
                        H, densities[j - 1], densities[j + 1], values[j], maximum=turns[j - 1] > 0
                    )
                    critical.append(family.point(value_f, "fold", rho_f))
        # A branch whose corrector failed usually ended at a kink of the law (a phenotype
        # entering or leaving), where two branches can meet in a non-smooth fold. Locate such
        # points by counting equilibria on either side and bisecting.
        for branch in branches:
            if branch.failed:
                found = _fold_by_counting(family, branch.values[-1], branch.densities[-1], lo, hi)
                # Two failed branches meeting at one kink give the same point (to ~1e-6).
                if found is not None and all(
                    abs(found.value - c.value) > 1e-5 * max(1.0, abs(c.value)) for c in critical
                ):
                    critical.append(found)
        critical.sort(key=lambda c: c.value)
        # Two branches traced from different starts can share a turning point: keep it once.
        unique = []
        for point in critical:
            if not any(
                point.kind == kept.kind and abs(point.value - kept.value) <= 1e-7 * max(1.0, abs(kept.value))
                for kept in unique
            ):
                unique.append(point)
        critical = unique
        return BifurcationDiagram(
            parameter=parameter, value_range=(lo, hi), branches=tuple(branches),
            zero_values=grid, zero_stable=zero < 0, critical_points=tuple(critical),
        )

    def critical_betas(self, beta_min, beta_max, **options) -> list[CriticalPoint]:
        """Transcritical points and folds for beta in ``[beta_min, beta_max]``, by increasing beta."""
        lo = as_nonnegative(beta_min, "beta_min")
        hi = as_nonnegative(beta_max, "beta_max")
        if not hi > lo:
            raise InputError(f"`beta_max` must exceed `beta_min` (got {lo!r} and {hi!r})")
        return list(self.continuation(lo, hi, **options).critical_points)

    def regime_map(self, betas, parameter: str, values, *, points: int = 201, on_row=None) -> "RegimeMap":
        """Regimes over a grid of beta x a second parameter, from critical-point continuation.

        For each value of the second parameter the critical betas are found by continuation in
        beta (:meth:`critical_betas`); equilibria change only there, so each interval between
        consecutive critical betas is classified at its two ends and midpoint and filled when
        they agree (point by point otherwise: weak Allee vs monostable is decided by the slope
        of growth at zero density, which can change inside an interval). ``on_row(done, total)``,
        if given, is called after each value of the second parameter (for progress bars).
        """
        beta_grid = as_array(betas, "betas", ndim=1)
        value_grid = as_array(values, "values", ndim=1)
        if beta_grid.size < 2 or not (np.diff(beta_grid) > 0).all():
            raise InputError("`betas` must be strictly increasing, at least 2 of them")
        choice(parameter, "parameter", PARAMETERS[2:])
        codes = np.empty((value_grid.size, beta_grid.size), dtype=int)
        curves = []
        for i, value in enumerate(value_grid):
            variant = self.along(parameter, beta=beta_grid[0]).model_at(value)
            found = variant.critical_betas(beta_grid[0], beta_grid[-1])
            curves.append(tuple(found))
            cuts = [beta_grid[0]] + [c.beta for c in found] + [beta_grid[-1]]
            for a, b in zip(cuts[:-1], cuts[1:]):
                inside = np.flatnonzero((beta_grid >= a) & (beta_grid <= b))
                if not inside.size:
                    continue
                # Weak Allee vs monostable turns on the slope of growth at zero density, which
                # is no bifurcation: if the interval's ends disagree, classify every point.
                ends = {variant.regime(beta_grid[j], points=points) for j in (inside[0], inside[-1])}
                ends.add(variant.regime(0.5 * (a + b), points=points))
                if len(ends) == 1:
                    codes[i, inside] = REGIMES.index(ends.pop())
                else:
                    for j in inside:
                        codes[i, j] = REGIMES.index(variant.regime(beta_grid[j], points=points))
            if on_row is not None:
                on_row(i + 1, value_grid.size)
        return RegimeMap(beta_grid, parameter, value_grid, codes, tuple(curves))

    def __repr__(self) -> str:
        limit = "fast switching" if self.tau is None else f"tau={self.tau:g}"
        return f"MeanField({self.division.size} phenotypes, {self.objective}, {limit})"


class _Along:
    """A model seen as a one-parameter family (shares the model's cache of laws)."""

    def __init__(self, model: MeanField, parameter: str, beta):
        self.model = model
        self.parameter = parameter
        self.beta = beta

    def check(self, value, name: str) -> float:
        number = as_nonnegative(value, name)
        if self.parameter in ("cost_per_bit", "tau") and number == 0:
            raise InputError(f"`{name}` must be > 0 for {self.parameter!r} (got {number!r})")
        return number

    def model_at(self, value) -> MeanField:
        if self.parameter in ("beta", "cost_per_bit"):
            return self.model
        variant = copy.copy(self.model)
        if self.parameter == "death_scale":
            variant.death = self.model.death * value
            variant.crowding = self.model.crowding * value
        elif self.parameter == "division_scale":
            variant.division = self.model.division * value
        else:
            if self.model.tau is None:
                raise InputError("continuing in 'tau' needs a model with a finite `tau`")
            variant.tau = float(value)
        return variant

    def beta_at(self, value) -> float:
        if self.parameter == "beta":
            return float(value)
        if self.parameter == "cost_per_bit":
            return beta_from_cost(value)
        return self.beta

    def reduced(self, rho, value):
        if self.parameter == "cost_per_bit" and value <= 0:
            return np.nan
        return self.model_at(value).reduced(rho, self.beta_at(value))

    def low_density_growth(self, value):
        return self.model_at(value).low_density_growth(self.beta_at(value))

    def equilibria(self, value):
        return self.model_at(value).equilibria(self.beta_at(value))

    def equilibrium(self, rho, value):
        return self.model_at(value)._equilibrium(rho, self.beta_at(value))

    def point(self, value: float, kind: str, density: float) -> CriticalPoint:
        return CriticalPoint(self.beta_at(value), kind, density, self.parameter, float(value))


@dataclass(frozen=True, repr=False)
class RegimeMap:
    """Regimes over beta x a second parameter.

    Attributes
    ----------
    betas : ndarray, shape (k,)
    parameter : str
    values : ndarray, shape (v,)
    codes : ndarray of int, shape (v, k)
        Index into :data:`REGIMES`.
    critical : tuple of tuples of CriticalPoint
        The critical betas found for each value of the second parameter.
    """

    betas: np.ndarray
    parameter: str
    values: np.ndarray
    codes: np.ndarray
    critical: tuple

    @property
    def regimes(self) -> np.ndarray:
        """Regime names, shape (v, k)."""
        return np.asarray(REGIMES, dtype=object)[self.codes]

    def __repr__(self) -> str:
        seen = sorted({REGIMES[c] for c in np.unique(self.codes)})
        return (
            f"RegimeMap({self.values.size} {self.parameter} x {self.betas.size} beta, "
            f"regimes: {', '.join(seen)})"
        )
