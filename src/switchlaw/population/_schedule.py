"""The mean-field model in an environment that follows a schedule (stress on and off in periods).

Two :class:`~switchlaw.population._mean_field.MeanField` models share the phenotypes: one for
the calm environment and one for the stress (other payoffs, division or death rates). The
schedule says which one holds at each time; the state (density, or the compartments with a
finite decision timescale) carries over continuously from one period to the next.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._errors import InputError
from .._validate import as_nonnegative, as_positive


@dataclass(frozen=True, repr=False)
class ScheduledRun:
    """A trajectory under a stress schedule, and what it says about recovery.

    Attributes
    ----------
    times : ndarray, shape (k,)
        Time units.
    density : ndarray, shape (k,)
        Total density (fraction of sites).
    fractions : ndarray, shape (k, phenotypes)
        Phenotype fractions among cells (NaN where the density is zero).
    stressed : ndarray of bool, shape (k,)
        Whether the stress is on at each output time (the value on the interval that ends there).
    stress_periods : ndarray, shape (cycles, 2)
        Start and end of each stress period.
    growth_per_cycle : ndarray, shape (cycles,)
        ``log(rho(end of cycle) / rho(start of cycle))``: nats per cycle (stress plus the calm
        that follows it).
    fraction_after_stress : ndarray, shape (cycles, phenotypes)
        Phenotype fractions at the end of each stress period.
    regrowth_time : float or None
        Time from the end of the last stress period until the density first returns to
        ``regrowth_density`` (0 if it never fell below); ``None`` when it does not by ``t_end``.
    regrowth_density : float
    success : bool
    message : str
    """

    times: np.ndarray
    density: np.ndarray
    fractions: np.ndarray
    stressed: np.ndarray
    stress_periods: np.ndarray
    growth_per_cycle: np.ndarray
    fraction_after_stress: np.ndarray
    regrowth_time: float | None
    regrowth_density: float
    success: bool
    message: str

    def __repr__(self) -> str:
        regrowth = "never" if self.regrowth_time is None else f"{self.regrowth_time:.4g}"
        return (f"ScheduledRun({self.stress_periods.shape[0]} stress periods, final density "
                f"{self.density[-1]:.4g}, regrowth to {self.regrowth_density:g} after {regrowth}, "
                f"{'ok' if self.success else 'FAILED: ' + self.message})")


def stress_periods(*, on: float, off: float, cycles: int, delay: float = 0.0) -> np.ndarray:
    """``(cycles, 2)`` start and end times of the stress periods of a regular schedule."""
    on = as_positive(on, "on")
    off = as_nonnegative(off, "off")
    delay = as_nonnegative(delay, "delay")
    if isinstance(cycles, bool) or not isinstance(cycles, (int, np.integer)) or cycles < 1:
        raise InputError(f"`cycles` must be a whole number >= 1 (got {cycles!r})")
    starts = delay + np.arange(cycles) * (on + off)
    return np.column_stack([starts, starts + on])


def scheduled_run(calm, stress, beta, initial, *, periods, t_end, regrowth_density,
                  points_per_unit: float = 20.0, rtol: float = 1e-8) -> ScheduledRun:
    """Integrate the mean-field model while the environment switches between calm and stress.

    Parameters
    ----------
    calm, stress : MeanField
        The model without and with the stress; same phenotypes and the same ``tau``.
    beta : float
        Sensitivity of the law (nats per payoff unit); the law is re-derived in each
        environment, so cells under stress switch by the stressed payoffs.
    initial : float
        Initial density in (0, 1].
    periods : array_like, shape (cycles, 2)
        Start and end of each stress period (increasing, not overlapping), within
        ``[0, t_end]``; see :func:`stress_periods`.
    t_end : float
        End of the run (time units).
    regrowth_density : float
        Density the population must return to after the last stress period.
    points_per_unit : float
        Output times per time unit (each period also keeps its two ends).
    rtol : float
        Relative tolerance of ``scipy.integrate.solve_ivp`` (LSODA).

    Returns
    -------
    ScheduledRun

    Notes
    -----
    Each interval of constant environment is integrated on its own with
    :meth:`MeanField.rhs`, starting from the state at the end of the previous interval; in
    the fast-switching limit the state is the density and the phenotype fractions follow the
    law of the current environment at once.
    """
    from scipy.integrate import solve_ivp

    if calm.tau != stress.tau or calm.division.size != stress.division.size:
        raise InputError("`calm` and `stress` must have the same phenotypes and the same tau")
    beta = as_nonnegative(beta, "beta")
    t_end = as_positive(t_end, "t_end")
    rho0 = as_positive(initial, "initial")
    level = as_positive(regrowth_density, "regrowth_density")
    if rho0 > 1 or level > 1:
        raise InputError(f"`initial` and `regrowth_density` must be at most 1 (got {rho0!r}, {level!r})")
    spans = np.asarray(periods, dtype=float).reshape(-1, 2)
    if spans.size == 0 or not np.isfinite(spans).all() or (spans[:, 1] <= spans[:, 0]).any() \
            or (spans[1:, 0] < spans[:-1, 1]).any() or spans[0, 0] < 0 or spans[-1, 1] > t_end:
        raise InputError("`periods` must be increasing, non-overlapping (start, end) pairs within [0, t_end]")
    edges = np.unique(np.concatenate([[0.0, t_end], spans.ravel()]))
    state = np.array([rho0]) if calm.tau is None else rho0 * calm.fractions(rho0, beta)
    times, values, stressed, success, message = [], [], [], True, "ok"
    for a, b in zip(edges[:-1], edges[1:]):
        middle = 0.5 * (a + b)
        on = bool(((spans[:, 0] <= middle) & (middle < spans[:, 1])).any())
        model = stress if on else calm
        grid = np.linspace(a, b, max(2, int(np.ceil((b - a) * points_per_unit)) + 1))
        solution = solve_ivp(lambda t, z, m=model: m.rhs(z, beta), (a, b), state, t_eval=grid,
                             method="LSODA", rtol=rtol, atol=1e-12)
        if not solution.success:
            success, message = False, f"integration failed on [{a:g}, {b:g}]: {solution.message}"
            break
        y = np.clip(solution.y.T, 0.0, None)
        start = 0 if not times else 1
        times.append(solution.t[start:])
        values.append(y[start:])
        stressed += [on] * (y.shape[0] - start)
        state = y[-1]
    times = np.concatenate(times)
    values = np.concatenate(values)
    stressed = np.asarray(stressed, dtype=bool)
    if calm.tau is None:
        density = values[:, 0]
        fractions = np.stack([
            (stress if s else calm).fractions(min(max(float(d), 0.0), 1.0), beta) if d > 0
            else np.full(calm.division.size, np.nan)
            for d, s in zip(density, stressed)
        ])
    else:
        density = values.sum(axis=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            fractions = np.where(density[:, None] > 0, values / density[:, None], np.nan)

    def at(t):
        """Index of the output time ``t`` (every period end is an output time)."""
        return int(np.argmin(np.abs(times - t)))

    cycle_ends = np.append(spans[1:, 0], min(t_end, times[-1]))
    with np.errstate(divide="ignore", invalid="ignore"):
        growth = np.array([np.log(density[at(e)] / density[at(s)]) for s, e in zip(spans[:, 0], cycle_ends)])
    after = np.stack([fractions[at(e)] for e in spans[:, 1]])
    last = at(spans[-1, 1])
    reached = np.nonzero(density[last:] >= level)[0]
    regrowth = None
    if reached.size:
        k = last + int(reached[0])
        if k == last:
            regrowth = 0.0
        else:  # linear interpolation between the two output times around the crossing
            t0, t1, d0, d1 = times[k - 1], times[k], density[k - 1], density[k]
            regrowth = float(t0 + (level - d0) * (t1 - t0) / (d1 - d0) - times[last])
    return ScheduledRun(times=times, density=density, fractions=fractions, stressed=stressed,
                        stress_periods=spans, growth_per_cycle=growth, fraction_after_stress=after,
                        regrowth_time=regrowth, regrowth_density=level, success=success, message=message)
