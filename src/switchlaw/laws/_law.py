"""A switching law ``q(x | y, rho)`` derived over a grid of population densities."""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Callable

import numpy as np

from .._errors import InputError
from .._validate import as_array, as_distribution, as_nonnegative, as_positive, choice
from ..decision._budget import budget_policy
from ..decision._costs import beta_from_cost
from ..decision._results import Policy
from ..decision._solve import OBJECTIVES, max_entropy_policy, make_policy, solve_checked
from ._environments import Environment, as_environment
from ._payoffs import payoff_table

ROUTES = ("beta", "cost_per_bit", "bits")


@dataclass(frozen=True, repr=False)
class SwitchingLaw:
    """Phenotype probabilities ``q(x | y, rho)`` on a grid of densities, and what they imply.

    Build one with :func:`derive_law`. Between grid densities the law is interpolated
    linearly in density; at grid points it is exact.

    Attributes
    ----------
    densities : ndarray, shape (k,)
        Grid of population densities (fraction of occupied sites, or the model's density).
    states : ndarray, shape (m,)
        Labels of the states the cell decides on.
    state_values : ndarray, shape (m,) or (m, c)
        Signal value each state stands for.
    phenotypes : tuple of str
    table : ndarray, shape (k, m, n)
        ``table[i, y, x] = q(x | y, densities[i])``.
    state_probs : ndarray, shape (k, m)
        ``p(y | densities[i])``.
    betas : ndarray, shape (k,)
        Sensitivity at each density (nats per payoff unit); constant unless derived from a
        budget, ``inf`` where a budget does not bind.
    information_bits, expected_payoff : ndarray, shape (k,)
        Mutual information between the phenotype and the state the cell decides on (the
        *sensed* state when there is a receptor, ``I(X;S)``), and the expected payoff.
    converged : ndarray of bool, shape (k,)
    objective : str
    route : str
        ``"beta"``, ``"cost_per_bit"`` or ``"bits"``: what the law was derived from.
    setting : float
        The value given for that route.
    """

    densities: np.ndarray
    states: np.ndarray
    state_values: np.ndarray
    phenotypes: tuple
    table: np.ndarray
    state_probs: np.ndarray
    betas: np.ndarray
    information_bits: np.ndarray
    expected_payoff: np.ndarray
    converged: np.ndarray
    objective: str
    route: str
    setting: float
    environment: Callable | None = field(default=None, compare=False)

    # ----------------------------------------------------------------- lookup
    def _bracket(self, density) -> tuple[int, float]:
        rho = float(density)
        lo, hi = self.densities[0], self.densities[-1]
        if not (lo <= rho <= hi):
            raise InputError(
                f"`density` must lie in the law's grid [{lo:g}, {hi:g}] (got {rho!r})"
            )
        i = int(np.searchsorted(self.densities, rho, side="right")) - 1
        i = min(i, self.densities.size - 1)
        if self.densities[i] == rho or i == self.densities.size - 1:
            return i, 0.0
        weight = (rho - self.densities[i]) / (self.densities[i + 1] - self.densities[i])
        return i, weight

    def probs(self, density) -> np.ndarray:
        """``q(x | y, density)`` as a ``[state, phenotype]`` array (exact at grid points)."""
        i, w = self._bracket(density)
        if w == 0.0:
            return self.table[i].copy()
        return (1.0 - w) * self.table[i] + w * self.table[i + 1]

    def state_distribution(self, density) -> np.ndarray:
        """``p(y | density)``: from the environment itself when available, else interpolated."""
        i, w = self._bracket(density)
        if w == 0.0:
            return self.state_probs[i].copy()
        if self.environment is not None:
            return _sensed(self.environment, float(density)).probs
        return (1.0 - w) * self.state_probs[i] + w * self.state_probs[i + 1]

    def fractions(self, density) -> np.ndarray:
        """Mean-field phenotype fractions ``f_x(rho) = sum_y p(y | rho) q(x | y, rho)``.

        Averaged over the state distribution, never the law at the mean state (by Jensen's
        inequality the two differ). A 1-D array of densities gives one row per density.
        """
        if np.ndim(density) == 0:
            return self.state_distribution(density) @ self.probs(density)
        return np.stack([self.fractions(float(rho)) for rho in np.asarray(density, dtype=float)])

    def rates(self, tau, density) -> np.ndarray:
        """Switching rates ``k[y, i, j] = q(j | y, rho) / tau`` for ``i != j`` (diagonal zero).

        ``tau`` is the decision timescale: cells re-decide at rate ``1 / tau``. In each state
        the stationary distribution of these rates is ``q(. | y)``.
        """
        tau = as_positive(tau, "tau")
        q = self.probs(density)
        k = np.repeat(q[:, None, :], q.shape[1], axis=1) / tau
        diagonal = np.arange(q.shape[1])
        k[:, diagonal, diagonal] = 0.0
        return k

    def step_probabilities(self, dt, tau, density) -> np.ndarray:
        """Per-step switching probabilities ``P[y, i, j]`` for a simulator with step ``dt``.

        A cell re-decides at rate ``1 / tau`` and then takes ``j`` with probability
        ``q(j | y)``: the generator is ``K = (1 q^T - I) / tau`` and ``P = expm(K dt)``. ``K`` is
        rank one plus a multiple of the identity, so ``expm(K dt) = e I + (1 - e) 1 q^T`` with
        ``e = exp(-dt / tau)``: ``P[y, i, j] = (1 - e) q(j | y)`` for ``i != j`` and
        ``P[y, i, i] = e + (1 - e) q(i | y)``. Every entry is a sum of non-negative terms, so
        the matrix is stochastic (rows sum to one within round-off) at any ``dt / tau > 0``.

        Parameters
        ----------
        dt : float
            Step length (time units), > 0.
        tau : float
            Decision timescale (same time units), > 0.
        density : float
            Population density at which ``q`` is evaluated.

        Returns
        -------
        numpy.ndarray
            ``P[y, i, j]``, shape (states, phenotypes, phenotypes), entries in [0, 1].

        References
        ----------
        Norris, J. R. (1997). *Markov Chains*, §2.1 (``P(t) = expm(t Q)``).
        """
        dt = as_positive(dt, "dt")
        tau = as_positive(tau, "tau")
        q = self.probs(density)
        stay = math.exp(-dt / tau)
        chance = -math.expm1(-dt / tau)
        steps = np.repeat(q[:, None, :], q.shape[1], axis=1) * chance
        diagonal = np.arange(q.shape[1])
        steps[:, diagonal, diagonal] += stay
        return np.clip(steps, 0.0, 1.0)

    # ---------------------------------------------------------------- outputs
    def to_xarray(self):
        """Labelled copy as an ``xarray.Dataset`` with units and long names."""
        import xarray as xr

        values = self.state_values if self.state_values.ndim == 1 else None
        coords = {
            "density": ("density", self.densities, {"units": "1", "long_name": "population density"}),
            "state": ("state", self.states, {"long_name": "sensed environment state"}),
            "phenotype": ("phenotype", np.array(self.phenotypes, dtype=str), {"long_name": "phenotype"}),
        }
        if values is not None:
            coords["state_value"] = ("state", values, {"long_name": "signal value of the state"})
        fractions = np.einsum("ky,kyx->kx", self.state_probs, self.table)
        data = {
            "probability": (("density", "state", "phenotype"), self.table,
                            {"units": "1", "long_name": "probability q(x | y, density) of adopting a phenotype"}),
            "state_probability": (("density", "state"), self.state_probs,
                                  {"units": "1", "long_name": "probability p(y | density) of the sensed state"}),
            "fraction": (("density", "phenotype"), fractions,
                         {"units": "1", "long_name": "mean-field phenotype fraction"}),
            "beta": ("density", self.betas, {"units": "nats per payoff unit", "long_name": "sensitivity beta"}),
            "information": ("density", self.information_bits, {"units": "bit", "long_name": "mutual information I(X;Y)"}),
            "expected_payoff": ("density", self.expected_payoff, {"units": "payoff unit", "long_name": "expected payoff E[u]"}),
            "converged": ("density", self.converged.astype(np.int8), {"long_name": "solver converged (1) or not (0)"}),
        }
        return xr.Dataset(data, coords=coords, attrs={
            "objective": self.objective, "route": self.route, "setting": float(self.setting),
        })

    def summary(self) -> str:
        """A few readable lines: what the law is and what it does along density."""
        route = {"beta": "beta", "cost_per_bit": "cost per bit", "bits": "budget (bits)"}[self.route]
        lines = [
            f"Switching law ({self.objective}) from {route} = {self.setting:g}",
            f"  {len(self.phenotypes)} phenotypes: {', '.join(self.phenotypes)}",
            f"  {self.states.size} states, {self.densities.size} densities in "
            f"[{self.densities[0]:g}, {self.densities[-1]:g}]",
            f"  information {self.information_bits.min():.4g}–{self.information_bits.max():.4g} bits, "
            f"expected payoff {self.expected_payoff.min():.4g}–{self.expected_payoff.max():.4g}",
        ]
        if not self.converged.all():
            lines.append(f"  NOT converged at {int((~self.converged).sum())} densities")
        return "\n".join(lines)

    def __repr__(self) -> str:
        return (
            f"SwitchingLaw({self.objective}, {self.route}={self.setting:g}, "
            f"{len(self.phenotypes)} phenotypes x {self.states.size} states x "
            f"{self.densities.size} densities)"
        )


def _sensed(environment, rho: float) -> Environment:
    """The environment at density ``rho``, carrying that density (for density-dependent payoffs)."""
    env = as_environment(environment(rho) if callable(environment) else environment, "environment")
    return env if env.density is not None else replace(env, density=float(rho))


def decision_problem(payoff, environment, rho: float, phenotypes=None):
    """What the cell faces at density ``rho``: the environment, the payoff over the states it
    decides on (``E[u | sensed state]`` under a receptor) and the phenotype names."""
    env = _sensed(environment, rho)
    table, names = payoff_table(payoff, env, phenotypes, where=f" at density {rho:g}")
    return env, env.sensed_payoff(table), names


def _densities(values) -> np.ndarray:
    grid = as_array(values, "densities", ndim=1)
    if (grid < 0).any() or (grid > 1).any():
        bad = grid[(grid < 0) | (grid > 1)][0]
        raise InputError(f"`densities` must lie in [0, 1] (got {float(bad)!r})")
    if grid.size > 1 and not (np.diff(grid) > 0).all():
        raise InputError("`densities` must be strictly increasing")
    return grid


def derive_law(
    payoff,
    environment,
    *,
    densities,
    beta=None,
    cost_per_bit=None,
    bits=None,
    objective: str = "min-information",
    phenotypes=None,
    reference=None,
) -> SwitchingLaw:
    """Derive the switching law a cell follows at each population density.

    Parameters
    ----------
    payoff : array_like, callable or mapping
        ``[state, phenotype]`` table over the *true* states; or a callable
        ``environment -> table`` (it receives the :class:`Environment` at each density, with
        ``.values`` and ``.states``); or a mapping ``phenotype name -> f(signal value)``
        (:class:`Linear`, :class:`Hill`, :class:`Threshold` or any function).
    environment : callable or Environment
        ``density -> Environment`` (e.g. ``lambda rho: switchlaw.occupancy(6, rho)``), or one
        environment for every density.
    densities : array_like
        Strictly increasing densities in [0, 1].
    beta, cost_per_bit, bits : float
        Exactly one: the sensitivity (nats per payoff unit); a sensing cost (payoff units per
        bit, ``beta = ln 2 / cost``); or an information budget (bits) met at every density,
        each density getting its own multiplier.
    objective : {"min-information", "max-entropy"}
        Min-information uses the self-consistent marginal at each density.
    phenotypes : sequence of str, optional
        Phenotype names (checked against a mapping payoff's keys).
    reference : array_like, optional
        Reference phenotype distribution (max-entropy only).

    Returns
    -------
    SwitchingLaw

    Notes
    -----
    With a noisy receptor the cell decides on the sensed state ``s`` and the payoff it weighs
    is ``E[u(Y, x) | S = s]``. Solutions are warm-started from the neighbouring density.
    """
    grid = _densities(densities)
    given = {name: value for name, value in zip(ROUTES, (beta, cost_per_bit, bits)) if value is not None}
    if len(given) != 1:
        raise InputError(
            "give exactly one of `beta`, `cost_per_bit`, `bits` "
            f"(got {', '.join(given) or 'none'})"
        )
    ((route, setting),) = given.items()
    choice(objective, "objective", OBJECTIVES)
    if route == "beta":
        beta_value = as_nonnegative(setting, "beta")
    elif route == "cost_per_bit":
        beta_value = beta_from_cost(setting)
    else:
        beta_value = None
        setting = as_nonnegative(setting, "bits")
        if objective != "min-information":
            raise InputError("`bits` applies to objective='min-information' only")
    if reference is not None and objective != "max-entropy":
        raise InputError("`reference` applies to objective='max-entropy' only")
    if not callable(environment) and not isinstance(environment, Environment):
        raise InputError(
            "`environment` must be a callable density -> Environment or an Environment "
            f"(got {type(environment).__name__})"
        )
    policies: list[Policy] = []
    state_probs = []
    first_env = None
    names = None
    start = None
    for rho in grid:
        env, u, names = decision_problem(payoff, environment, float(rho), phenotypes)
        if first_env is None:
            first_env = env
        elif env.states.shape != first_env.states.shape or not np.array_equal(env.states, first_env.states):
            raise InputError(
                f"`environment` must give the same states at every density; at density {rho:g} "
                f"it has {env.states.size} states, not {first_env.states.size}"
            )
        p = env.probs
        state_probs.append(p)
        if objective == "max-entropy":
            ref = None if reference is None else as_distribution(reference, "reference")
            if ref is not None and ref.size != u.shape[1]:
                raise InputError(
                    f"`reference` must have one entry per phenotype ({u.shape[1]}) (got {ref.size})"
                )
            q = max_entropy_policy(u, beta_value, ref)
            policy = make_policy(u, p, q, beta=beta_value, objective=objective, converged=True,
                                 iterations=0, status="closed-form", message="softmax")
        elif beta_value is not None:
            policy = solve_checked(u, p, beta_value, start=start)
        else:
            policy = budget_policy(u, p, setting)
        if objective == "min-information" and policy.status == "converged":
            start = policy.marginal
        policies.append(policy)
    values = first_env.decision_values
    return SwitchingLaw(
        densities=grid,
        states=first_env.states,
        state_values=values,
        phenotypes=tuple(names),
        table=np.stack([q.probs for q in policies]),
        state_probs=np.stack(state_probs),
        betas=np.array([q.beta for q in policies]),
        information_bits=np.array([q.information_bits for q in policies]),
        expected_payoff=np.array([q.expected_payoff for q in policies]),
        converged=np.array([q.converged for q in policies]),
        objective=objective,
        route=route,
        setting=float(setting),
        environment=environment if callable(environment) else None,
    )
