"""Mean-field population model with phenotype switching by a derived law.

Compartments (one per phenotype ``x``), density ``rho = sum_x rho_x``:

    rho_x' = a_x(rho) rho_x + (rho f_x(rho) - rho_x) / tau,
    a_x(rho) = b_x (1 - rho) - d_x - c_x rho,

with division into free space ``b_x``, death ``d_x``, optional crowding death ``c_x`` and
cells re-deciding at rate ``1 / tau`` with the law ``q(x | y, rho)`` averaged over
``p(y | rho)`` (``f_x``; domain notes §3–4). In the fast-switching limit (``tau=None``)
``rho_x = rho f_x(rho)`` and ``rho' = rho g(rho)`` with ``g = sum_x f_x a_x``.

The model is immutable (a frozen dataclass that pickles); laws derived along the way live in an
explicit :class:`LawCache` that a caller may pass by keyword (``cache=``), never in the model.
Continuation is in ``_diagram.py``, parameter families in ``_family.py``, regime maps in
``_regimes.py`` and the law's fractions with their cache in ``_laws.py``.
"""

from __future__ import annotations

from dataclasses import KW_ONLY, dataclass

import numpy as np

from .._errors import InputError
from .._validate import as_array, as_nonnegative, as_positive, choice, phenotype_names
from ..decision._solve import OBJECTIVES
from ._continuation import BifurcationDiagram, CriticalPoint
from ._family import PARAMETERS, Family
from ._laws import LawCache, law_fractions
from ._regimes import REGIMES, RegimeMap, regime_map
from ._scalar import Equilibrium, derivative, roots_on_unit_interval

__all__ = ["PARAMETERS", "REGIMES", "MeanField", "RegimeMap", "Trajectory"]


def _frozen(values: np.ndarray) -> np.ndarray:
    values = np.array(values, dtype=float)
    values.flags.writeable = False
    return values


def _context(cache) -> LawCache:
    """The caller's cache, or a fresh one for this call only."""
    if cache is None:
        return LawCache()
    if not isinstance(cache, LawCache):
        raise InputError(f"`cache` must be a switchlaw.LawCache (got {type(cache).__name__})")
    return cache


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


@dataclass(frozen=True, repr=False, eq=False)
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
    The model is immutable: change a parameter with ``dataclasses.replace(model, death=...)``.
    Every method that derives laws takes ``cache=`` (a :class:`LawCache`) to share them between
    calls; without it each call uses a fresh cache of its own, so two threads or a worker
    process given the same model get the same numbers.

    Regimes (Stephens, Sutherland & Freckleton 1999; Courchamp, Berec & Gascoigne 2008):
    ``"extinction"`` when no positive state is stable; ``"strong-allee"`` when zero is stable
    (per-capita growth at low density negative) and a positive state is stable (bistable);
    ``"weak-allee"`` when zero is unstable and per-capita growth rises near zero;
    ``"monostable"`` otherwise. With finite ``tau`` the growth at zero is the leading
    eigenvalue of the linearisation and "per-capita growth" is the reduced equation
    ``sum_x f_x / (1 - tau a_x) - 1`` whose positive roots are the equilibria.
    """

    payoff: object
    environment: object
    _: KW_ONLY
    division: np.ndarray
    death: np.ndarray
    tau: float | None = None
    crowding: np.ndarray | None = None
    objective: str = "min-information"
    phenotypes: object = None

    def __post_init__(self):
        def put(name, value):
            object.__setattr__(self, name, value)

        division = _rates(self.division, "division")
        put("division", _frozen(division))
        put("death", _frozen(_rates(self.death, "death", division.size)))
        put("crowding", _frozen(
            np.zeros(division.size) if self.crowding is None
            else _rates(self.crowding, "crowding", division.size)
        ))
        put("tau", None if self.tau is None else as_positive(self.tau, "tau"))
        put("objective", choice(self.objective, "objective", OBJECTIVES))
        put("phenotypes", None if self.phenotypes is None else phenotype_names(self.phenotypes))
        if isinstance(self.payoff, dict):
            phenotype_names(self.payoff, "payoff")

    def __setstate__(self, state):
        for name, value in state.items():
            if name in ("division", "death", "crowding"):
                value = _frozen(value)
            object.__setattr__(self, name, value)

    # ----------------------------------------------------------------- the law
    def fractions(self, density, beta, *, cache=None) -> np.ndarray:
        """Mean-field phenotype fractions ``f_x(density)`` of the law at ``beta``.

        ``density`` may be one density (result shape ``(phenotypes,)``) or a vector of them
        (shape ``(k, phenotypes)``, all derived in one call).
        """
        if isinstance(density, (float, int, np.floating, np.integer)):  # one density: fast path
            rho = float(density)
            if not 0.0 <= rho <= 1.0:
                raise InputError(f"`density` must be in [0, 1] (got {rho!r})")
            return law_fractions(self, np.array([rho]), as_nonnegative(beta, "beta"), _context(cache))[0]
        rho = np.asarray(density, dtype=float)
        if rho.ndim > 1:
            raise InputError(f"`density` must be a number or a vector (got shape {rho.shape})")
        outside = ~((rho >= 0.0) & (rho <= 1.0))
        if outside.any():
            raise InputError(f"`density` must be in [0, 1] (got {float(np.atleast_1d(rho)[np.atleast_1d(outside)][0])!r})")
        f = law_fractions(self, np.atleast_1d(rho), as_nonnegative(beta, "beta"), _context(cache))
        return f[0] if rho.ndim == 0 else f

    def _derive_fractions(self, rho: float, beta: float) -> np.ndarray:
        """``f_x(rho)`` of one density without a cache (subclasses may replace the law here)."""
        return law_fractions(self, np.array([float(rho)]), float(beta), LawCache())[0]

    _derive_fractions.default_law = True  # a subclass that replaces it derives its own law

    def net_rates(self, density) -> np.ndarray:
        """``a_x(rho) = b_x (1 - rho) - d_x - c_x rho`` per phenotype (per unit time).

        Shape ``(phenotypes,)`` for one density, ``(k, phenotypes)`` for a vector.
        """
        rho = density if isinstance(density, float) else np.asarray(density, dtype=float)[..., None]
        return self.division * (1.0 - rho) - self.death - self.crowding * rho

    def growth(self, density, beta, *, cache=None):
        """Per-capita growth ``g(rho) = sum_x f_x(rho) a_x(rho)`` (fast-switching limit).

        A float for one density, an array for a vector of densities.
        """
        f = self.fractions(density, beta, cache=cache)
        if f.ndim == 1:
            return float(f @ self.net_rates(density))
        return np.einsum("kx,kx->k", f, self.net_rates(density))

    def reduced(self, density, beta, *, cache=None):
        """The scalar equation whose positive roots are the equilibria.

        ``g(rho)`` in the fast-switching limit; ``sum_x f_x / (1 - tau a_x) - 1`` with finite
        ``tau`` (``inf`` where ``1 - tau a_x <= 0`` for a phenotype that cells adopt: its
        growth outruns switching there; phenotypes with ``f_x = 0`` do not count). One
        density gives a float, a vector of densities an array (evaluated in one call).
        """
        if self.tau is None:
            return self.growth(density, beta, cache=cache)
        f = self.fractions(density, beta, cache=cache)
        denominator = 1.0 - self.tau * self.net_rates(density)
        if f.ndim == 1:
            used = f > 0
            if (denominator[used] <= 0).any():
                return np.inf
            return float(f[used] @ (1.0 / denominator[used]) - 1.0)
        used = f > 0
        outrun = (used & (denominator <= 0)).any(axis=-1)
        safe = np.where(used & (denominator > 0), denominator, 1.0)
        value = np.einsum("...x,...x->...", np.where(used, f, 0.0), 1.0 / safe) - 1.0
        value = np.where(outrun, np.inf, value)
        return float(value) if value.ndim == 0 else value

    # --------------------------------------------------------------- dynamics
    def rhs(self, compartments, beta, *, cache=None) -> np.ndarray:
        """Time derivative of the compartments (or of ``[rho]`` in the fast-switching limit)."""
        state = np.clip(np.asarray(compartments, dtype=float), 0.0, None)
        if self.tau is None:
            rho = min(float(state[0]), 1.0)
            return np.array([rho * self.growth(rho, beta, cache=cache)])
        rho = min(float(state.sum()), 1.0)
        f = self.fractions(rho, beta, cache=cache)
        return self.net_rates(rho) * state + (rho * f - state) / self.tau

    def trajectory(
        self, beta, initial, t_end, *, points: int = 201, rtol: float = 1e-8, cache=None
    ) -> Trajectory:
        """Integrate the model from ``initial`` (a density, or compartments with finite tau)."""
        from scipy.integrate import solve_ivp

        cache = _context(cache)
        t_end = as_positive(t_end, "t_end")
        start = np.atleast_1d(np.asarray(initial, dtype=float))
        if self.tau is None:
            if start.size != 1:
                raise InputError("`initial` must be one density in the fast-switching limit")
        elif start.size == 1:
            start = start[0] * self.fractions(start[0], beta, cache=cache)
        if not np.isfinite(start).all() or (start < 0).any() or start.sum() > 1.0:
            raise InputError(f"`initial` must be non-negative with total density <= 1 (got {start})")
        times = np.linspace(0.0, t_end, points)
        solution = solve_ivp(
            lambda t, z: self.rhs(z, beta, cache=cache), (0.0, t_end), start, t_eval=times,
            method="LSODA", rtol=rtol, atol=1e-12,
        )
        values = solution.y.T
        if self.tau is None:
            density = values[:, 0]
            compartments = density[:, None] * self.fractions(np.clip(density, 0.0, 1.0), beta, cache=cache)
        else:
            compartments = values
            density = values.sum(axis=1)
        return Trajectory(solution.t, compartments, density, bool(solution.success), solution.message)

    # ------------------------------------------------------------- equilibria
    def _jacobian(self, compartments: np.ndarray, beta: float, cache: LawCache) -> np.ndarray:
        rho = float(compartments.sum())
        f = self.fractions(rho, beta, cache=cache)
        slope = derivative(lambda r: self.fractions(r, beta, cache=cache), rho, step=1e-4, vectorised=True)
        a = self.net_rates(rho)
        a_slope = -self.division - self.crowding
        jac = np.diag(a - 1.0 / self.tau)
        jac += np.outer(compartments * a_slope + (f + rho * slope) / self.tau, np.ones(f.size))
        return jac

    def _equilibrium(self, rho: float, beta: float, cache: LawCache) -> Equilibrium:
        if self.tau is None:
            g = self.growth(rho, beta, cache=cache)
            # A small step keeps the difference on one side of nearby kinks of the law.
            eigen = g + rho * derivative(lambda r: self.growth(r, beta, cache=cache), rho, step=1e-6,
                                         vectorised=True)
            eigenvalues = np.array([eigen])
            compartments = rho * self.fractions(rho, beta, cache=cache)
        else:
            if rho == 0.0:
                compartments = np.zeros(self.division.size)
            else:
                compartments = (rho * self.fractions(rho, beta, cache=cache)
                                / (1.0 - self.tau * self.net_rates(rho)))
            eigenvalues = np.linalg.eigvals(self._jacobian(compartments, beta, cache))
        return Equilibrium(
            density=float(rho), stable=bool(np.all(eigenvalues.real < 0)),
            eigenvalues=eigenvalues, compartments=compartments,
        )

    def equilibria(self, beta, *, points: int = 201, cache=None) -> list[Equilibrium]:
        """Every equilibrium in ``[0, 1]`` at ``beta``, zero first, by increasing density.

        The reduced equation is scalar in the total density (with finite ``tau`` too), so it is
        sampled on ``points`` densities in one vector call and polished by Brent's method.
        """
        beta = as_nonnegative(beta, "beta")
        cache = _context(cache)

        def H(r):
            return self.reduced(r, beta, cache=cache)

        roots = roots_on_unit_interval(H, points=points, many=H)
        # Brent's method can also converge onto a jump of the reduced equation (where growth
        # outruns switching); keep true roots, judged against the equation's own scale.
        if roots:
            coarse = np.abs(H(np.linspace(0.0, 1.0, 11)))
            scale = float(np.max(coarse[np.isfinite(coarse)]))
        else:
            scale = 1.0
        roots = [r for r in roots if abs(H(r)) <= 1e-8 * max(scale, 1e-300)]
        return [self._equilibrium(0.0, beta, cache)] + [self._equilibrium(r, beta, cache) for r in roots]

    def low_density_growth(self, beta, *, cache=None) -> float:
        """Growth rate of a rare population: the leading eigenvalue at zero density."""
        found = self._equilibrium(0.0, as_nonnegative(beta, "beta"), _context(cache))
        return float(np.max(found.eigenvalues.real))

    def regime(self, beta, *, points: int = 201, cache=None) -> str:
        """One of :data:`REGIMES` at ``beta``."""
        cache = _context(cache)
        found = self.equilibria(beta, points=points, cache=cache)
        if not any(e.stable for e in found[1:]):
            return "extinction"
        if found[0].stable:
            return "strong-allee"
        rising = derivative(lambda r: self.reduced(r, beta, cache=cache), 0.0, step=1e-4, vectorised=True) > 0
        return "weak-allee" if rising else "monostable"

    def allee_threshold(self, beta, *, points: int = 201, cache=None) -> float | None:
        """Density below which the population declines (strong Allee effect), else ``None``."""
        found = self.equilibria(beta, points=points, cache=cache)
        if not found[0].stable:
            return None
        stable = [e.density for e in found[1:] if e.stable]
        unstable = [e.density for e in found[1:] if not e.stable and stable and e.density < stable[0]]
        return unstable[-1] if unstable else None

    # ------------------------------------------------------------ continuation
    def along(self, parameter: str, *, beta=None, cache=None) -> Family:
        """The model as a family in one scalar parameter (see :data:`PARAMETERS`).

        The family's members share ``cache`` (a fresh :class:`LawCache` if not given, kept
        as the family's ``cache`` attribute).
        """
        choice(parameter, "parameter", PARAMETERS)
        if parameter != "beta" and parameter != "cost_per_bit":
            if beta is None:
                raise InputError(f"`beta` must be given to continue in {parameter!r}")
            beta = as_nonnegative(beta, "beta")
        return Family(self, parameter, beta, _context(cache))

    def continuation(
        self, start, stop, *, parameter: str = "beta", beta=None, samples: int = 41, ds: float = 0.01,
        cache=None, on_progress=None,
    ) -> BifurcationDiagram:
        """Branches of equilibria for a parameter in ``[start, stop]`` and their critical points.

        Positive branches are followed by pseudo-arclength continuation from the equilibria
        at both ends of the range and from every transcritical point. Transcritical points are
        roots of the low-density growth rate in the parameter (Brent's method, to 1e-12);
        folds are turning points of a branch, located as extrema of ``value(density)``. With
        finite ``tau`` the stability of branch points comes from full Jacobians at a few
        points of each stretch between sign changes of ``dH/drho`` (see
        ``_diagram.branch_stability``).

        Parameters
        ----------
        start, stop : float
            Range of the parameter.
        parameter : {"beta", "cost_per_bit", "death_scale", "division_scale", "tau"}
            ``*_scale`` multiplies every phenotype's rate; ``tau`` needs a finite-tau model.
        beta : float
            Fixed sensitivity when continuing in another parameter.
        cache : LawCache, optional
            Laws to reuse and keep (a fresh cache for this call if not given).
        on_progress : callable, optional
            ``on_progress(done, total)`` after each sample of the zero state and each branch
            (for a progress line with the time left); ``done == total`` at the end.
        """
        from ._diagram import diagram

        family = self.along(parameter, beta=beta, cache=cache)
        return diagram(family, start, stop, finite_tau=self.tau is not None, samples=samples, ds=ds,
                       on_progress=on_progress)

    def critical_betas(self, beta_min, beta_max, **options) -> list[CriticalPoint]:
        """Transcritical points and folds for beta in ``[beta_min, beta_max]``, by increasing beta."""
        lo = as_nonnegative(beta_min, "beta_min")
        hi = as_nonnegative(beta_max, "beta_max")
        if not hi > lo:
            raise InputError(f"`beta_max` must exceed `beta_min` (got {lo!r} and {hi!r})")
        return list(self.continuation(lo, hi, **options).critical_points)

    def regime_map(
        self, betas, parameter: str, values, *, points: int = 201, on_row=None, cache=None
    ) -> RegimeMap:
        """Regimes over a grid of beta x a second parameter, from critical-point continuation.

        For each value of the second parameter the critical betas are found by continuation in
        beta (:meth:`critical_betas`); equilibria change only there, so each interval between
        consecutive critical betas is classified at its two ends and midpoint and filled when
        they agree (point by point otherwise: weak Allee vs monostable is decided by the slope
        of growth at zero density, which can change inside an interval). ``on_row(done, total)``,
        if given, is called after each value of the second parameter (for progress bars).
        Every row shares one :class:`LawCache` (``cache``, or a fresh one): the law does not
        depend on rates or ``tau``, so it is derived once per density and beta for the map.
        """
        return regime_map(self, betas, parameter, values, points=points, on_row=on_row,
                          cache=_context(cache))

    def __repr__(self) -> str:
        limit = "fast switching" if self.tau is None else f"tau={self.tau:g}"
        return f"MeanField({self.division.size} phenotypes, {self.objective}, {limit})"
