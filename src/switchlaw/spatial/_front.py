"""``simulate_front``: an invasion front of a law-governed population, and what it measures."""

from __future__ import annotations

import numpy as np

from .._errors import InputError
from .._validate import as_nonnegative, as_positive
from ._core import DIMENSIONS, Grid, integrate
from ._linear import linear_speed, spreading_speed, zero_jacobian
from ._measure import composition, crossing, fit_speed, log_correction
from ._model import LawTable, check_model, mean_field_system
from ._results import FrontRun

#: A pulled front's speed may differ from the grid's own ``c*`` by this much (relative;
#: common practice, no source: time-stepping and the log-fit leave about 1%).
SPEED_TOLERANCE = 0.02
#: Largest relative change of ``c*`` by the grid that a run accepts (common practice, no source).
GRID_TOLERANCE = 0.02
#: Density at the far boundary, relative to the bulk, that counts as the front feeling it.
BOUNDARY_LEVEL = 1e-4


def _bulk(model, beta, table: LawTable):
    """The largest stable positive equilibrium (density, compartments), or ``None``."""
    stable = [e for e in model.equilibria(beta)[1:] if e.stable]
    if not stable:
        return None
    top = max(stable, key=lambda e: e.density)
    if model.tau is None:
        return top.density, np.array([top.density])
    return top.density, np.asarray(top.compartments, float)


def simulate_front(
    model,
    beta,
    *,
    diffusion,
    length,
    dx,
    t_end,
    seed=None,
    dimension: int = 1,
    level: float = 0.5,
    edge_level: float = 1e-3,
    window: float = 0.5,
    frames: int = 201,
    occupied=None,
    rtol: float = 1e-6,
) -> FrontRun:
    """Invasion of empty space by a population whose cells switch phenotype by a derived law.

    The domain ``[0, length]`` (a line, or the radius of a disc or ball) starts at the bulk
    state (the largest stable equilibrium) for ``x < occupied`` and empty beyond; the
    method of lines with a stiff integrator (BDF with the exact sparse Jacobian) carries it to
    ``t_end``.

    Parameters
    ----------
    model : MeanField
        Division, death, crowding, ``tau`` (``None``: fast switching) and the law.
    beta : float
        Sensitivity of the law (nats per payoff unit).
    diffusion : sequence of float or mapping str -> float
        Per-phenotype diffusion coefficients (length^2 per unit time), >= 0, one positive.
    length, dx : float
        Domain length and grid spacing (length units).
    t_end : float
        Duration (time units).
    seed : int, optional
        Accepted so scan engines can pass one seed to every point function; the continuum run
        is deterministic and does not use it.
    dimension : {1, 2, 3}
        Line, or radially symmetric disc or ball.
    level, edge_level : float
        Front position at ``level`` x bulk density; edge composition at ``edge_level`` x bulk.
    window : float
        Fraction of the run (its end) over which the speed is fitted.
    frames : int
        Saved times.
    occupied : float, optional
        Extent of the initially occupied region (length units; default ``length / 20``).
    rtol : float
        Relative tolerance of the integrator (absolute tolerance ``rtol / 1000``).

    Returns
    -------
    FrontRun

    Notes
    -----
    Pulled fronts approach ``c*`` slowly, ``X(t) = c* t - (d + 2) / (2 lambda*) log t``
    (Ebert & van Saarloos 2000 for ``d = 1``); the speed of a front whose straight-line speed
    does not exceed the grid's ``c*`` by more than 2% is fitted with that term (``"pulled"``),
    a faster one is ``"pushed"``; a front moving less than two cells over the window is
    ``"stalled"``, one moving back or dying out ``"retreating"``.

    References
    ----------
    Ebert, U. & van Saarloos, W. (2000). Front propagation into unstable states: universal
    algebraic convergence towards uniformly translating pulled fronts. *Physica D* 146:1–99.
    Hadeler, K. P. & Rothe, F. (1975). Travelling fronts in nonlinear diffusion equations.
    *J. Math. Biol.* 2:251–263.
    """
    check_model(model)
    beta = as_nonnegative(beta, "beta")
    length = as_positive(length, "length")
    dx = as_positive(dx, "dx")
    t_end = as_positive(t_end, "t_end")
    if dimension not in DIMENSIONS:
        raise InputError(f"`dimension` must be one of {DIMENSIONS} (got {dimension!r})")
    for name, value in (("level", level), ("edge_level", edge_level), ("window", window)):
        if not 0.0 < float(value) < 1.0:
            raise InputError(f"`{name}` must lie strictly between 0 and 1 (got {value!r})")
    if isinstance(frames, bool) or not isinstance(frames, (int, np.integer)) or frames < 20:
        raise InputError(f"`frames` must be an integer >= 20 (got {frames!r})")
    cells = int(round(length / dx))
    if cells < 40:
        raise InputError(f"`length / dx` must give at least 40 cells (got {cells})")
    table = LawTable.of(model, beta)
    linear = spreading_speed(model, beta, diffusion=diffusion, table=table)
    D = linear.diffusion
    f0 = table.fractions[0]
    j0 = zero_jacobian(model, f0)
    d_lin = np.array([f0 @ D]) if model.tau is None else D
    c_star, l_star = linear.speed, linear.decay_rate
    start = max(length / 20.0, 5 * dx) if occupied is None else as_positive(occupied, "occupied")
    if start >= length:
        raise InputError(f"`occupied` must be shorter than `length` ({length:g}) (got {start:g})")

    if np.isfinite(c_star) and c_star > 0:
        c_grid = linear_speed(j0, d_lin, dx=dx)[0]
        error = abs(c_grid - c_star) / c_star
        if error > GRID_TOLERANCE:
            finer = dx * np.sqrt(0.25 * GRID_TOLERANCE / error)
            raise InputError(
                f"`dx` = {dx:g} is too coarse for the front: the grid changes the linear speed by "
                f"{100 * error:.1f}% (leading edge decays over 1/lambda* = {1 / l_star:.3g}); use dx <= {finer:.3g}"
            )
        needed = start + c_star * t_end * (1.0 + GRID_TOLERANCE) + 10.0 / l_star
        if length < needed:
            raise InputError(
                f"`length` = {length:g} is too short for the run: a front at c* = {c_star:.4g} reaches "
                f"the far boundary before t_end = {t_end:g}; use length >= {needed:.4g}"
            )
    else:
        c_grid = c_star  # nan (zero density stable) or 0 (nothing moves at low density)
    rate = abs(linear.low_density_growth)
    too_short = linear.low_density_growth > 0 and t_end < 10.0 / rate

    bulk = _bulk(model, beta, table)
    system = mean_field_system(model, table, D)
    if model.tau is None:
        # Transport Lap(w(rho)) with w = D(rho) rho is diffusion only while w rises with rho.
        top = bulk[0] if bulk is not None else 1.0
        rho = np.linspace(0.0, top, 513)
        slope = system.potential_slope(rho)
        falling = slope < -1e-12 * max(1.0, float(np.abs(slope).max()))
        if falling.any():
            where = float(rho[np.argmax(falling)])
            raise InputError(
                f"fast switching makes D(rho) rho fall with density at rho = {where:.3g} (backward "
                "diffusion: the front equation is ill-posed); give the model a finite `tau`"
            )
    grid = Grid(length, dx, dimension)
    x = grid.centres
    if bulk is None:
        # No stable population: seed at full density and watch it decline.
        seed_state = np.array([1.0]) if model.tau is None else table.fractions[-1]
        bulk_density = float("nan")
    else:
        bulk_density, seed_state = bulk
    initial = np.where((x < start)[:, None], seed_state[None, :], 0.0)
    times = np.linspace(0.0, t_end, int(frames))
    solution = integrate(system, grid, initial, times, rtol=rtol, atol=rtol * 1e-3)
    if model.tau is None:
        rho = np.clip(solution.fields[:, :, 0], 0.0, None)
        fractions, _ = table(rho.ravel())
        profiles = rho[:, :, None] * fractions.reshape(rho.shape + (-1,))
    else:
        profiles = np.clip(solution.fields, 0.0, None)
    times = solution.times
    total = profiles.sum(axis=2)
    reference = bulk_density if np.isfinite(bulk_density) else 1.0
    positions = np.array([crossing(x, n, level * reference) for n in total])

    felt = np.flatnonzero(total[:, -1] > BOUNDARY_LEVEL * reference)
    boundary_time = float(times[felt[0]]) if felt.size else float("nan")
    usable = times < boundary_time if felt.size else np.ones(times.size, bool)
    usable[0] = True  # the initial state, even when it already touches the far end
    alive = usable & np.isfinite(positions)
    last = int(np.flatnonzero(alive)[-1]) if alive.any() else int(np.flatnonzero(usable)[-1])
    t_from = (1.0 - window) * times[last]
    late = usable & (times >= t_from) & (times > 0)
    k = log_correction(l_star, dimension)
    status, messages = "ok", []
    kind, speed, plain = "retreating", float("nan"), float("nan")
    width = float("nan")
    edge = bulk_fractions = np.full(profiles.shape[2], np.nan)

    if not solution.success:
        status = "failed"
        messages.append(f"integrator failed: {solution.message}")
    elif bulk is None or not np.isfinite(positions[last]) or last < times.size - 1 and not felt.size:
        kind = "retreating"
        messages.append("no stable bulk state: the population dies out" if bulk is None
                        else f"the population died out by t = {times[last + 1] if last + 1 < times.size else times[last]:.4g}")
        finite = late & np.isfinite(positions)
        if finite.sum() >= 5:
            speed = plain = float(np.polyfit(times[finite], positions[finite], 1)[0])
    else:
        finite = late & np.isfinite(positions)
        if finite.sum() < 5:
            status = "short"
            messages.append(f"only {int(finite.sum())} front positions in the late window; raise t_end or frames")
        else:
            corrected, plain = fit_speed(times[finite], positions[finite], k)
            span = times[finite][-1] - times[finite][0]
            if abs(plain) * span < 2.0 * dx:
                kind, speed = "stalled", plain
            elif plain < 0:
                kind, speed = "retreating", plain
            elif not np.isfinite(c_grid) or plain > c_grid * (1.0 + SPEED_TOLERANCE):
                kind, speed = "pushed", plain
            else:
                kind, speed = "pulled", corrected
                if abs(corrected - c_grid) > SPEED_TOLERANCE * c_grid:
                    status = "unsettled"
                    messages.append(
                        f"the pulled front has not settled: fitted speed {corrected:.4g} differs from the "
                        f"grid's linear speed {c_grid:.4g} by {100 * abs(corrected / c_grid - 1):.1f}%; "
                        "raise t_end (the transient decays like 1/t)")
        profile, n = profiles[last], total[last]
        outer = crossing(x, n, 0.1 * bulk_density)
        width = outer - positions[last]
        at_edge = crossing(x, n, edge_level * bulk_density)
        edge = composition(x, profile, at_edge)
        bulk_fractions = composition(x, profile, 0.5 * positions[last])
        if status == "ok" and kind != "stalled" and width < 3.0 * dx:
            status = "coarse"
            messages.append(
                f"the front core (0.1 to 0.5 of the bulk) spans {width / dx:.1f} cells; use dx <= {width / 6:.3g}")
    if too_short and status != "failed":
        status = "short"
        messages.append(
            f"`t_end` = {t_end:g} is too short to fit a speed: a front forms over several growth "
            f"times 1/s0 = {1 / rate:.3g}; use t_end >= {10.0 / rate:.3g}")
    if felt.size:
        if status != "failed":
            status = "boundary"
        messages.append(f"the front reached the far boundary at t = {boundary_time:.4g}; "
                        f"speed fitted before that (use a longer `length`)")
    message = "; ".join(messages) if messages else (
        f"{kind} front, speed {speed:.5g} over t in [{t_from:.4g}, {times[last]:.4g}]")
    return FrontRun(
        times=times, x=x, profiles=profiles, positions=positions, speed=float(speed),
        plain_speed=float(plain), linear_speed=float(c_star), decay_rate=float(l_star),
        grid_linear_speed=float(c_grid), kind=kind, width=float(width), edge_fractions=edge,
        bulk_fractions=bulk_fractions, bulk_density=float(bulk_density), phenotypes=linear.phenotypes,
        dimension=int(dimension), beta=beta, window=(float(t_from), float(times[last])),
        boundary_time=boundary_time, status=status, message=message, note=linear.note,
    )
