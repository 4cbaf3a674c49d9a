"""Invasion fronts of lattice agents: a seeded strip, its front position and speed, beside the
continuum front of the mean-field reaction–diffusion model."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._errors import InputError
from .._validate import as_positive
from ._checks import as_count, as_replicates

#: Diffusion coefficient per unit motility (lattice spacings^2 per unit time) of a cell that
#: jumps at rate ``m`` to a random neighbour site: mean square displacement per jump / 4 in two
#: dimensions (von Neumann and hexagonal: 1/4; Moore, with diagonals sqrt(2) apart: 3/8).
#: For exclusion processes of one species this is also the collective diffusion coefficient
#: (Liggett 1985); with several species it is the mean-field value.
DIFFUSION_PER_MOTILITY = {"von-neumann": 0.25, "hexagonal": 0.25, "moore": 0.375}


@dataclass(frozen=True, repr=False)
class LatticeFront:
    """A lattice front run (see :func:`lattice_front`).

    Attributes
    ----------
    times : ndarray, shape (k,)
    profiles : ndarray, shape (k, columns)
        Fraction of occupied sites in each column, averaged over rows and replicates.
    positions : ndarray, shape (replicates, k)
        Column (lattice spacings) where a replicate's column density crosses ``level`` x its
        bulk density (the mean density of the first ``strip / 2`` columns).
    speed : float
        Mean over replicates of the slope of the late positions (lattice spacings per unit time).
    speed_se : float
        Its standard error (``nan`` with one replicate).
    continuum_speed, continuum_linear_speed : float
        Speed of the mean-field reaction–diffusion front with diffusion ``DIFFUSION_PER_MOTILITY
        x motility``, and its ``c*`` (``nan`` without a mean-field model).
    continuum : FrontRun or None
    diffusion : ndarray
        The diffusion coefficients given to the continuum run.
    status, message : str
    """

    times: np.ndarray
    profiles: np.ndarray
    positions: np.ndarray
    speed: float
    speed_se: float
    continuum_speed: float
    continuum_linear_speed: float
    continuum: object
    diffusion: np.ndarray
    status: str
    message: str

    def __repr__(self) -> str:
        return (f"LatticeFront(speed {self.speed:.4g} ± {self.speed_se:.2g} lattice spacings per unit time; "
                f"continuum {self.continuum_speed:.4g}, c* {self.continuum_linear_speed:.4g}; {self.status})")


def _crossing(profile: np.ndarray, level: float) -> float:
    above = np.flatnonzero(profile >= level)
    if above.size == 0:
        return float("nan")
    i = int(above[-1])
    if i == profile.size - 1:
        return float(i)
    return float(i + (profile[i] - level) / (profile[i] - profile[i + 1]))


def lattice_front(model, *, t_end, seed, strip=None, replicates: int = 1, frames: int = 51,
                  level: float = 0.5, window: float = 0.5, mean_field=None, beta=None, dx: float = 0.25,
                  engine: str = "sweep", dt=None) -> LatticeFront:
    """Run a lattice front from a fully occupied strip and measure its speed.

    Parameters
    ----------
    model : LatticeModel
        On a lattice with a closed boundary; the front advances along the columns.
    t_end : float
    seed : int or numpy.random.SeedSequence
    strip : int, optional
        Columns occupied at the start (default a tenth of the columns, at least 3).
    replicates, frames : int
    level, window : float
        Front at ``level`` x bulk density; speed fitted over the last ``window`` of the run.
    mean_field : MeanField, optional
        With ``beta``: the continuum front of the same model, on a line as long as the lattice
        (lattice spacings), grid ``dx``, for the same time and from the same strip.

    Returns
    -------
    LatticeFront

    Notes
    -----
    The continuum front carries only the cells' motility as diffusion; daughters placed on a
    neighbour site also spread the population, and a pulled front of discrete cells runs slower
    than its continuum value (Brunet & Derrida 1997), so the two are shown side by side, not
    expected to agree.

    References
    ----------
    Brunet, É. & Derrida, B. (1997). Shift in the velocity of a front due to a cutoff.
    *Phys. Rev. E* 56:2597–2604.
    """
    from ._lattice_model import LatticeModel

    if not isinstance(model, LatticeModel):
        raise InputError(f"`model` must be a LatticeModel (got {type(model).__name__})")
    lattice = model.lattice
    if lattice.boundary != "closed":
        raise InputError("`model` must sit on a lattice with boundary='closed' (a periodic front wraps around)")
    rows, columns = lattice.shape
    t_end = as_positive(t_end, "t_end")
    width = max(columns // 10, 3) if strip is None else as_count(strip, "strip", minimum=2)
    if width >= columns // 2:
        raise InputError(f"`strip` must be below half the columns ({columns // 2}) (got {width})")
    replicates = as_replicates(replicates)
    frames = as_count(frames, "frames", minimum=10)
    for name, value in (("level", level), ("window", window)):
        if not 0.0 < float(value) < 1.0:
            raise InputError(f"`{name}` must lie strictly between 0 and 1 (got {value!r})")
    # Without a law nothing decides the first phenotypes: the strip starts as phenotype 0.
    layout = np.zeros(lattice.shape, dtype=bool if model.law is not None else np.int8)
    layout[:, :width] = 1
    times = np.linspace(0.0, t_end, frames)
    run = model.simulate(layout, t_end=t_end, times=times, snapshots=times, replicates=replicates,
                         seed=seed, engine=engine, dt=dt)
    occupied = (run.snapshots > 0).mean(axis=2)  # (frames, replicates, columns)
    bulk = occupied[:, :, : max(width // 2, 1)].mean(axis=2)
    positions = np.array([[_crossing(occupied[k, r], level * bulk[k, r]) if bulk[k, r] > 0 else np.nan
                           for k in range(frames)] for r in range(replicates)])
    late = times >= (1.0 - window) * t_end
    speeds = []
    messages = []
    for r in range(replicates):
        ok = late & np.isfinite(positions[r])
        if ok.sum() >= 3:
            speeds.append(float(np.polyfit(times[ok], positions[r, ok], 1)[0]))
    status = "ok"
    if len(speeds) < replicates:
        status = "died-out"
        messages.append(f"{replicates - len(speeds)} of {replicates} replicates lost their front")
    reached = (occupied[:, :, -1] > 0).any()
    if reached:
        status = "boundary"
        messages.append("cells reached the far column; widen the lattice")
    speed = float(np.mean(speeds)) if speeds else float("nan")
    se = float(np.std(speeds, ddof=1) / np.sqrt(len(speeds))) if len(speeds) > 1 else float("nan")
    motility = model.rules.rates()[:, 2]
    diffusion = DIFFUSION_PER_MOTILITY[lattice.neighbourhood] * motility
    continuum, c_speed, c_linear = None, float("nan"), float("nan")
    if mean_field is not None:
        if beta is None:
            raise InputError("`beta` must be given with `mean_field`")
        from ..spatial import simulate_front

        try:
            continuum = simulate_front(mean_field, beta, diffusion=diffusion, length=float(columns), dx=dx,
                                       t_end=t_end, occupied=float(width))
            c_speed, c_linear = continuum.speed, continuum.linear_speed
        except InputError as error:
            messages.append(f"continuum front not run: {error}")
    return LatticeFront(
        times=times, profiles=occupied.mean(axis=1), positions=positions, speed=speed, speed_se=se,
        continuum_speed=c_speed, continuum_linear_speed=c_linear, continuum=continuum,
        diffusion=diffusion, status=status, message="; ".join(messages) or f"front speed {speed:.4g}",
    )
