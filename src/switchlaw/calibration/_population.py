"""The fitted beta and its interval carried through to the mean-field population model."""

from __future__ import annotations

import numpy as np

from .._errors import InputError
from ..laws._environments import Environment
from ..population._mean_field import MeanField
from ._results import Calibration, PopulationVerdict


def population_verdict(
    calibration: Calibration,
    *,
    division,
    death,
    tau=None,
    crowding=None,
    samples: int = 9,
    points: int = 201,
) -> PopulationVerdict:
    """Regime, equilibria and critical betas at the fitted beta and across its 95% interval.

    Parameters
    ----------
    calibration : Calibration
        A fit whose environment is a callable ``density -> Environment``.
    division, death, tau, crowding :
        As in :class:`switchlaw.MeanField` (per unit time).
    samples : int
        Betas across the interval at which the regime is evaluated (ends included).
    points : int
        Grid points for the equilibrium search (as in :meth:`MeanField.equilibria`).

    Returns
    -------
    PopulationVerdict

    Notes
    -----
    The payoff parameters stay at their estimates while beta runs over its interval; an
    interval end that is open (not identifiable) is replaced by the fit's bound for beta.
    Transcritical points and folds inside the interval come from
    :meth:`MeanField.critical_betas` (pseudo-arclength continuation).
    """
    if not isinstance(calibration, Calibration):
        raise InputError(f"`calibration` must be a Calibration (got {type(calibration).__name__})")
    if isinstance(calibration.environment, Environment) or not callable(calibration.environment):
        raise InputError("`calibration` must have been fitted with a callable density -> Environment")
    if isinstance(samples, bool) or not isinstance(samples, (int, np.integer)) or samples < 2:
        raise InputError(f"`samples` must be an integer >= 2 (got {samples!r})")
    model = MeanField(calibration.payoff, calibration.environment, division=division, death=death,
                      tau=tau, crowding=crowding, objective=calibration.objective,
                      phenotypes=None)
    beta = calibration.beta
    lo, hi = calibration.beta_interval
    name = "beta" if "beta" in calibration.bounds else "cost_per_bit"
    if not np.isfinite(lo) or not np.isfinite(hi):
        if name == "beta":
            low_bound, high_bound = calibration.bounds["beta"]
        elif name in calibration.bounds:
            c_lo, c_hi = calibration.bounds["cost_per_bit"]
            low_bound, high_bound = np.log(2.0) / c_hi, np.log(2.0) / c_lo
        else:
            low_bound = high_bound = beta
        lo = lo if np.isfinite(lo) else low_bound
        hi = hi if np.isfinite(hi) else high_bound
    regime = model.regime(beta, points=points)
    equilibria = model.equilibria(beta, points=points)
    if hi > lo:
        betas = np.unique(np.concatenate([np.linspace(lo, hi, samples), [beta]]))
        regimes = tuple(model.regime(b, points=points) for b in betas)
        critical = model.critical_betas(lo, hi)
    else:
        betas, regimes, critical = np.array([beta]), (regime,), []
    sentence = _sentence(beta, (lo, hi), regime, betas, regimes, critical)
    return PopulationVerdict(beta=float(beta), beta_interval=(float(lo), float(hi)), regime=regime,
                             equilibria=equilibria, betas=betas, regimes=regimes,
                             critical_betas=critical, sentence=sentence)


def _sentence(beta, interval, regime, betas, regimes, critical) -> str:
    lo, hi = interval
    head = f"At the fitted beta = {beta:.4g} the population is {regime}"
    seen = list(dict.fromkeys(regimes))
    if len(seen) == 1 and not critical:
        return f"{head}; across its 95% interval [{lo:.4g}, {hi:.4g}] it stays {regime}."
    crossings = ", ".join(f"a {c.kind} at beta = {c.value:.4g}" for c in critical)
    spans = " -> ".join(seen)
    text = f"{head}; across its 95% interval [{lo:.4g}, {hi:.4g}] it spans {spans}"
    return text + (f" and crosses {crossings}." if crossings else ".")
