"""Frozen result objects of the calibration stage."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np


@dataclass(frozen=True, repr=False)
class Profile:
    """The profile log-likelihood of one free parameter.

    Attributes
    ----------
    parameter : str
    values : ndarray
        Values of the parameter where the profile was evaluated, increasing.
    drops : ndarray
        ``l_max - l_p(value)`` (nats): the fall of the maximised log-likelihood.
    others : ndarray, shape (len(values), free parameters)
        The full parameter vector at each point (the other parameters re-maximised).
    cutoff : float
        The 95% cut-off on ``drops`` (``chi2(1).ppf(0.95) / 2``, Wilks 1938).
    """

    parameter: str
    values: np.ndarray
    drops: np.ndarray
    others: np.ndarray
    cutoff: float

    def __repr__(self) -> str:
        return f"Profile({self.parameter}: {self.values.size} points)"


@dataclass(frozen=True, repr=False)
class Calibration:
    """Maximum-likelihood fit of ``beta`` and payoff parameters to observed phenotypes.

    Attributes
    ----------
    estimates : dict str -> float
        Maximum-likelihood value of each free parameter (``beta`` in nats per payoff unit,
        ``cost_per_bit`` in payoff units per bit, payoff parameters in their own units).
    intervals : dict str -> (float, float)
        95% profile-likelihood intervals; ``-inf``/``inf`` at an end where the profile does not
        cross the cut-off inside the bounds.
    identifiable : dict str -> bool
        ``True`` when the profile crosses the cut-off on both sides inside the bounds.
    standard_errors : dict str -> float
        Wald standard errors from the observed information (``nan`` when it is singular).
    log_likelihood : float
        ``sum n log q`` (nats; each cell an independent categorical observation).
    aic, bic : float
        ``2k - 2l`` (Akaike 1974) and ``k ln N - 2l`` (Schwarz 1978), ``N`` cells.
    deviance, deviance_df, deviance_p_value : float, int, float
        Against the saturated model (a free ``q(x | y)`` per observed state and density).
    alternative : dict
        The free logistic (multinomial logit) in the signal: ``log_likelihood``, ``aic``,
        ``bic``, ``parameters``.
    verdict : str
        One line: which model explains the data better, and by how much.
    law : SwitchingLaw or None
        The law at the estimates over the observed densities (``None`` for one condition
        without a density).
    profiles : dict str -> Profile
    densities : ndarray or None
    phenotypes : tuple of str
    observed_fractions, fitted_fractions : ndarray, shape (conditions, phenotypes)
    fraction_band : ndarray, shape (conditions, phenotypes, 2)
        Pointwise envelope of the fitted fractions over the parameter vectors on the profiles
        that lie inside the 95% cut-off (or the bootstrap's 2.5–97.5% quantiles).
    bootstrap_intervals : dict str -> (float, float) or None
        Percentile intervals from a parametric bootstrap, when asked for.
    bootstrap_estimates : ndarray or None
        The refitted parameter vectors, shape (replicates, free parameters).
    posterior : dict str -> ndarray or None
        NUTS draws of each free parameter (uniform priors on the bounds), when asked for.
    converged : bool
        The projected gradient of the mean log-likelihood per cell, times each parameter's
        scale, is below ``tolerance`` at the estimate, and the best start was reached again.
    status, message : str
    """

    estimates: dict
    intervals: dict
    identifiable: dict
    standard_errors: dict
    log_likelihood: float
    aic: float
    bic: float
    deviance: float
    deviance_df: int
    deviance_p_value: float
    saturated_log_likelihood: float
    alternative: dict
    verdict: str
    law: Any
    profiles: dict
    densities: np.ndarray | None
    phenotypes: tuple
    observed_fractions: np.ndarray
    fitted_fractions: np.ndarray
    fraction_band: np.ndarray
    cells: int
    objective: str
    fixed: dict
    bounds: dict
    bootstrap_intervals: dict | None
    bootstrap_estimates: np.ndarray | None
    posterior: dict | None
    converged: bool
    status: str
    message: str
    tolerance: float
    starts: int
    payoff: Any = field(default=None, compare=False)
    environment: Any = field(default=None, compare=False)

    @property
    def beta(self) -> float:
        """The fitted (or fixed) ``beta`` in nats per payoff unit."""
        from ..decision._costs import beta_from_cost

        if "beta" in self.estimates:
            return self.estimates["beta"]
        if "cost_per_bit" in self.estimates:
            return beta_from_cost(self.estimates["cost_per_bit"])
        if "cost_per_bit" in self.fixed:
            return beta_from_cost(self.fixed["cost_per_bit"])
        return float(self.fixed["beta"])

    @property
    def beta_interval(self) -> tuple:
        """The 95% profile interval of ``beta`` (from ``cost_per_bit``'s when that was fitted)."""
        if "beta" in self.intervals:
            return self.intervals["beta"]
        if "cost_per_bit" in self.intervals:
            lo, hi = self.intervals["cost_per_bit"]
            ln2 = float(np.log(2.0))
            return (ln2 / hi if hi > 0 else 0.0, ln2 / lo if lo > 0 else np.inf)
        return (self.beta, self.beta)

    def summary(self) -> str:
        """A short table of estimates with intervals, the fit and the verdict."""
        lines = [f"Calibration ({self.objective}, {self.cells} cells): {self.status}"]
        for name, value in self.estimates.items():
            lo, hi = self.intervals[name]
            flag = "" if self.identifiable[name] else "  NOT identifiable"
            lines.append(f"  {name:>14} = {value:.6g}   95% profile interval [{lo:.6g}, {hi:.6g}]{flag}")
        lines.append(
            f"  log-likelihood {self.log_likelihood:.6g} nats, AIC {self.aic:.6g}, BIC {self.bic:.6g}; "
            f"deviance {self.deviance:.4g} on {self.deviance_df} df (p = {self.deviance_p_value:.3g})"
        )
        lines.append(f"  {self.verdict}")
        return "\n".join(lines)

    def __repr__(self) -> str:
        shown = ", ".join(f"{k}={v:.6g}" for k, v in self.estimates.items())
        return f"Calibration({shown}; {self.status})"


@dataclass(frozen=True, repr=False)
class PopulationVerdict:
    """What the fitted law does to the population, at the estimate and across the interval.

    Attributes
    ----------
    beta : float
        The fitted beta (nats per payoff unit).
    beta_interval : (float, float)
        Its 95% profile interval (clipped to the fit's bounds where open).
    regime : str
        Regime at the estimate (one of :data:`switchlaw.REGIMES`).
    equilibria : list of Equilibrium
        At the estimate.
    betas, regimes : ndarray, tuple of str
        Betas across the interval and the regime at each.
    critical_betas : list of CriticalPoint
        Transcritical points and folds inside the interval.
    sentence : str
        One line for a report.
    """

    beta: float
    beta_interval: tuple
    regime: str
    equilibria: list
    betas: np.ndarray
    regimes: tuple
    critical_betas: list
    sentence: str

    def __repr__(self) -> str:
        return f"PopulationVerdict({self.sentence})"
