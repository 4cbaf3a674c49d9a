"""Result objects of the decision solvers: frozen, labelled, with a readable summary."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ._problem import curve_policy


def _fmt(value: float) -> str:
    return f"{value:.6g}"


@dataclass(frozen=True, repr=False)
class Policy:
    """A phenotype decision policy ``q(x | y)`` and what it achieves.

    Attributes
    ----------
    probs : ndarray, shape (states, phenotypes)
        ``probs[y, x] = q(x | y)``; every row sums to one.
    marginal : ndarray, shape (phenotypes,)
        Phenotype fractions ``r(x) = sum_y p(y) q(x | y)``.
    information_bits : float
        Mutual information ``I(X; Y)`` between state and phenotype (bits).
    conditional_entropy_bits : float
        ``H(X | Y)`` (bits).
    expected_payoff : float
        ``E[u] = sum_y p(y) sum_x q(x|y) u(y, x)`` (payoff units).
    beta : float
        Sensitivity: the Lagrange multiplier that weighs expected payoff against information
        in ``I(X;Y) - beta E[u]`` (nats per payoff unit); ``inf`` when a budget does not bind.
    objective : str
        ``"min-information"`` or ``"max-entropy"``.
    converged, iterations, status, message :
        Solver outcome. ``status`` is one of ``"converged"``, ``"closed-form"``,
        ``"budget-slack"``, ``"not-converged"``.
    gap_nats : float
        Certified upper bound on the objective's distance from its optimum (nats); 0 for
        closed forms; NaN for conic solves (the conic solver reports its own tolerances).
    method : str
        Which algorithm produced the policy.
    """

    probs: np.ndarray
    marginal: np.ndarray
    information_bits: float
    conditional_entropy_bits: float
    expected_payoff: float
    beta: float
    objective: str
    converged: bool
    iterations: int
    status: str
    message: str
    gap_nats: float = 0.0
    method: str = ""

    @property
    def phenotypes_in_use(self) -> tuple[int, ...]:
        """Indices of phenotypes with a positive marginal."""
        return tuple(int(i) for i in np.flatnonzero(self.marginal > 0))

    def __repr__(self) -> str:
        m, n = self.probs.shape
        return (
            f"Policy({self.objective}, beta={_fmt(self.beta)}, {m} states x {n} phenotypes, "
            f"I={_fmt(self.information_bits)} bits, E[u]={_fmt(self.expected_payoff)}, "
            f"{self.status}, {self.iterations} iterations)"
        )


@dataclass(frozen=True, repr=False)
class CriticalBeta:
    """A beta where the set of phenotypes in use changes.

    Attributes
    ----------
    beta : float
        Location (nats per payoff unit).
    entering, leaving : tuple of int
        Phenotypes that start / stop being used as beta increases through ``beta``.
    exact : bool
        True for the closed-form first critical beta (Kuhn–Tucker conditions, Blahut 1972).
    """

    beta: float
    entering: tuple[int, ...]
    leaving: tuple[int, ...]
    exact: bool = False

    def __repr__(self) -> str:
        parts = []
        if self.entering:
            parts.append(f"enter {list(self.entering)}")
        if self.leaving:
            parts.append(f"leave {list(self.leaving)}")
        return f"CriticalBeta({self.beta:.10g}: {', '.join(parts)})"


@dataclass(frozen=True, repr=False)
class Tradeoff:
    """Solutions along a grid of betas: the information–payoff curve.

    The curve keeps one marginal per beta, not one policy: a policy is rebuilt on request
    (:meth:`probs_at`) from the payoff table and its marginal, exactly as
    :func:`switchlaw.solve` forms it, so a long curve on a large table holds a few arrays of
    the table's size instead of one per beta.

    Attributes
    ----------
    betas : ndarray, shape (k,)
    information_bits, conditional_entropy_bits, expected_payoff : ndarray, shape (k,)
    marginals : ndarray, shape (k, phenotypes)
        ``r(x) = sum_y p(y) q(x | y)`` of each policy.
    iterations : ndarray of int, shape (k,)
    converged : ndarray of bool, shape (k,)
    critical_betas : tuple of CriticalBeta
        In increasing order, every beta in ``[betas.min(), betas.max()]`` where the set of
        phenotypes in use changes, each located to about 1e-12 relative in beta (transitions that both
        start and end between two neighbouring grid points are not seen).
    objective : str
    probs : ndarray, shape (k, states, phenotypes)
        Every policy, rebuilt on each access (``k`` times the payoff table's memory; prefer
        :meth:`probs_at` on large tables).
    """

    betas: np.ndarray
    information_bits: np.ndarray
    conditional_entropy_bits: np.ndarray
    expected_payoff: np.ndarray
    marginals: np.ndarray
    iterations: np.ndarray
    converged: np.ndarray
    critical_betas: tuple = field(default=())
    objective: str = "min-information"
    #: What rebuilds a policy: the payoff table over the states decided on, the solver's
    #: marginal per beta (min-information) and the reference distribution (max-entropy).
    _payoff: np.ndarray | None = field(default=None, repr=False)
    _solver_marginals: np.ndarray | None = field(default=None, repr=False)
    _reference: np.ndarray | None = field(default=None, repr=False)

    def probs_at(self, index: int) -> np.ndarray:
        """The policy ``q(x | y)`` at ``betas[index]``, shape (states, phenotypes)."""
        k = self.betas.size
        if not -k <= index < k:
            raise IndexError(f"`index` must be in [{-k}, {k}) (got {index!r})")
        return curve_policy(
            self._payoff, float(self.betas[index]), self.objective,
            self._solver_marginals[index], self._reference,
        )

    @property
    def probs(self) -> np.ndarray:
        """Every policy, shape (k, states, phenotypes), rebuilt from the marginals."""
        return np.stack([self.probs_at(i) for i in range(self.betas.size)])

    def to_xarray(self, *, states=None, phenotypes=None):
        """Labelled copy as an ``xarray.Dataset`` with units and long names."""
        import xarray as xr

        k = self.betas.size
        m, n = self._payoff.shape
        states = np.arange(m) if states is None else np.asarray(states)
        phenotypes = np.arange(n) if phenotypes is None else np.asarray(phenotypes)
        coords = {
            "beta": ("beta", self.betas, {"units": "nats per payoff unit",
                                          "long_name": "sensitivity beta (Lagrange multiplier of the payoff term)"}),
            "state": ("state", states, {"long_name": "environment state"}),
            "phenotype": ("phenotype", phenotypes, {"long_name": "phenotype"}),
        }
        data = {
            "information": ("beta", self.information_bits,
                            {"units": "bit", "long_name": "mutual information I(X;Y)"}),
            "conditional_entropy": ("beta", self.conditional_entropy_bits,
                                    {"units": "bit", "long_name": "conditional entropy H(X|Y)"}),
            "expected_payoff": ("beta", self.expected_payoff,
                                {"units": "payoff unit", "long_name": "expected payoff E[u]"}),
            "policy": (("beta", "state", "phenotype"), self.probs,
                       {"units": "1", "long_name": "probability q(x|y) of phenotype given state"}),
            "marginal": (("beta", "phenotype"), self.marginals,
                         {"units": "1", "long_name": "phenotype fraction r(x)"}),
            "iterations": ("beta", self.iterations, {"long_name": "solver iterations"}),
            "converged": ("beta", self.converged.astype(np.int8),
                          {"long_name": "solver converged (1) or not (0)"}),
        }
        return xr.Dataset(
            data,
            coords=coords,
            attrs={
                "objective": self.objective,
                "critical_betas": np.array([c.beta for c in self.critical_betas], dtype=float),
            },
        )

    def __repr__(self) -> str:
        k = self.betas.size
        m, n = self._payoff.shape
        crit = ", ".join(f"{c.beta:.6g}" for c in self.critical_betas) or "none"
        return (
            f"Tradeoff({self.objective}, {k} betas in [{_fmt(self.betas.min())}, "
            f"{_fmt(self.betas.max())}], {m} states x {n} phenotypes, "
            f"I up to {_fmt(self.information_bits.max())} bits, critical betas: {crit})"
        )


@dataclass(frozen=True, repr=False)
class Capacity:
    """Capacity of a sensing channel ``W(s | y)``.

    Attributes
    ----------
    bits : float
        Channel capacity ``max_p I(Y; S)`` (bits per use).
    input : ndarray
        A capacity-achieving input distribution over ``y``.
    gap_bits : float
        Certified width of the bracket ``[lower, upper]`` on the capacity (bits).
    converged, iterations, message :
        Solver outcome.
    """

    bits: float
    input: np.ndarray
    gap_bits: float
    converged: bool
    iterations: int
    message: str

    def __repr__(self) -> str:
        return (
            f"Capacity({_fmt(self.bits)} bits, certified within {self.gap_bits:.2g} bits, "
            f"{self.iterations} iterations)"
        )
