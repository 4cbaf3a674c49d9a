"""Result objects of the growth stage: frozen, with a one-line summary."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..information import NATS_PER_BIT


def _fmt(value: float) -> str:
    return f"{value:.6g}"


@dataclass(frozen=True, repr=False)
class BetHedging:
    """The growth-optimal strategy in environments independent across generations.

    Attributes
    ----------
    strategy : ndarray
        Phenotype fractions ``(phenotypes,)`` without a cue, or the policy
        ``[cue_state, phenotype]`` with one.
    growth_rate : float
        Its long-run growth rate (nats per generation).
    gap_nats : float
        Certified bound on how far ``growth_rate`` lies below the optimum (nats per
        generation).
    converged, iterations, message :
        Solver outcome; ``iterations`` adds up over cue states.

    It also unpacks as ``strategy, growth_rate = bet_hedging(...)``.
    """

    strategy: np.ndarray
    growth_rate: float
    gap_nats: float
    converged: bool
    iterations: int
    message: str

    def __iter__(self):
        return iter((self.strategy, self.growth_rate))

    def __repr__(self) -> str:
        return (
            f"BetHedging(growth {_fmt(self.growth_rate)} nats/generation, certified within "
            f"{self.gap_nats:.2g}, strategy shape {self.strategy.shape}, "
            f"{'converged' if self.converged else 'not converged'}, {self.iterations} iterations)"
        )


@dataclass(frozen=True, repr=False)
class CueValue:
    """What a cue is worth in long-run growth, beside what it tells about the environment.

    Attributes
    ----------
    value_nats : float
        Optimal growth with the cue minus optimal growth without it (nats per generation).
    information_bits : float
        Mutual information ``I(E; C)`` between environment and cue (bits); the value never
        exceeds it, once converted to nats, and equals it when fitness is diagonal.
    with_cue, without_cue : BetHedging
        The two optimal strategies.
    """

    value_nats: float
    information_bits: float
    with_cue: BetHedging
    without_cue: BetHedging

    @property
    def value_bits(self) -> float:
        """``value_nats`` in bits per generation."""
        return self.value_nats / NATS_PER_BIT

    def __repr__(self) -> str:
        return (
            f"CueValue({_fmt(self.value_bits)} bits/generation of growth from a cue carrying "
            f"I(E;C) = {_fmt(self.information_bits)} bits)"
        )


@dataclass(frozen=True, repr=False)
class GrowthEstimate:
    """A long-run growth rate, exact or estimated from one long simulated history.

    Attributes
    ----------
    rate : float
        Long-run growth rate: nats per generation (discrete generations) or per unit time
        (continuous time). ``-inf`` when the lineage dies out.
    standard_error : float
        Standard error of ``rate`` from batch means (0 when exact).
    method : str
        ``"closed form"``, ``"spectral radius"``, ``"principal eigenvalue"`` or
        ``"simulation"``.
    samples : int
        Generations or environment epochs simulated after the burn-in (0 when exact).
    batches : int
        Batches behind the standard error (0 when exact).
    message : str
    """

    rate: float
    standard_error: float
    method: str
    samples: int = 0
    batches: int = 0
    message: str = ""

    @property
    def exact(self) -> bool:
        return self.method != "simulation"

    def __repr__(self) -> str:
        if self.exact:
            return f"GrowthEstimate({_fmt(self.rate)}, exact by {self.method})"
        return (
            f"GrowthEstimate({_fmt(self.rate)} ± {self.standard_error:.2g} (1 s.e.), "
            f"{self.samples} samples in {self.batches} batches)"
        )


@dataclass(frozen=True, repr=False)
class SensingTradeoff:
    """Long-run growth of the switchlaw law at each beta, and the beta worth paying for.

    Attributes
    ----------
    betas : ndarray, shape (k,)
        Sensitivities scanned (nats per payoff unit).
    growth_rate : ndarray, shape (k,)
        Long-run growth of the law at each beta (nats per generation).
    information_bits : ndarray, shape (k,)
        Information the law uses, ``I(X; C)`` between cue and phenotype (bits per
        generation).
    net_growth : ndarray, shape (k,)
        ``growth_rate - cost_per_bit * information_bits`` (nats per generation).
    cost_per_bit : float
        Sensing cost (nats of growth per bit).
    best_beta, best_growth_rate, best_information_bits, best_net_growth : float
        The optimum after refining the best grid point (the best budget is
        ``best_information_bits``).
    best_policy : ndarray, shape (cue states, phenotypes)
        The law at ``best_beta``.
    message : str
    """

    betas: np.ndarray
    growth_rate: np.ndarray
    information_bits: np.ndarray
    net_growth: np.ndarray
    cost_per_bit: float
    best_beta: float
    best_growth_rate: float
    best_information_bits: float
    best_net_growth: float
    best_policy: np.ndarray
    message: str

    def __repr__(self) -> str:
        return (
            f"SensingTradeoff({self.betas.size} betas, cost {_fmt(self.cost_per_bit)} nats/bit: "
            f"best beta {_fmt(self.best_beta)}, growth {_fmt(self.best_growth_rate)}, "
            f"I {_fmt(self.best_information_bits)} bits, net {_fmt(self.best_net_growth)})"
        )


@dataclass(frozen=True, repr=False)
class SwitchingOptimum:
    """Growth-optimal constant switching rates (stochastic switching, no sensing).

    Attributes
    ----------
    rates : ndarray, shape (phenotypes, phenotypes)
        Switching-rate generator ``rates[from, to]`` (per unit time; diagonal = minus the
        row sum).
    growth_rate : GrowthEstimate
        Long-run growth with those rates (per unit time).
    sensing_growth_rate : float
        Growth of a population that senses the environment at no cost and always takes the
        best phenotype at once (per unit time).
    break_even_cost : float
        ``sensing_growth_rate - growth_rate.rate``: a sensing cost per unit time above which
        optimal stochastic switching grows faster than sensing.
    converged, iterations, message :
        Optimiser outcome.
    """

    rates: np.ndarray
    growth_rate: GrowthEstimate
    sensing_growth_rate: float
    break_even_cost: float
    converged: bool
    iterations: int
    message: str

    def __repr__(self) -> str:
        n = self.rates.shape[0]
        off = self.rates[~np.eye(n, dtype=bool)]
        return (
            f"SwitchingOptimum(growth {_fmt(self.growth_rate.rate)}, switching rates "
            f"{np.array2string(off, precision=4, separator=', ')}, break-even sensing cost "
            f"{_fmt(self.break_even_cost)}, {'converged' if self.converged else 'not converged'})"
        )
