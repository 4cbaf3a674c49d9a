"""Lattice measurements against the mean-field prediction of the same model."""

from __future__ import annotations

import numpy as np

from .._errors import InputError
from ._results import LatticeRun, MeanFieldComparison, _fractions


def law_compartments(rules, initial: np.ndarray, times: np.ndarray) -> np.ndarray:
    """Mean-field compartments ``rho_x(t)`` of the lattice rules from ``initial`` at ``times[0]``,
    shape (k, phenotypes).

    ``rho_x' = b_x rho_x (1 - rho) - d_x rho_x + (rho f_x(rho) - rho_x) / tau`` with
    ``f_x = sum_y p(y | rho) q(x | y, rho)`` (the law's fractions, averaged over what cells sense): the
    equations of :class:`switchlaw.MeanField` without crowding death. Motility does not enter.
    """
    from scipy.integrate import solve_ivp

    law, b, d, s = rules.law, rules.division, rules.death, rules.switch_rate

    def rhs(t, z):
        z = np.clip(z, 0.0, None)
        rho = min(float(z.sum()), 1.0)
        change = b * z * (1.0 - rho) - d * z
        if law is not None:
            change = change + s * (rho * law.fractions(rho) - z)
        return change

    if times.size == 1 or times[-1] == times[0]:
        return np.tile(np.asarray(initial, dtype=float), (times.size, 1))
    solution = solve_ivp(rhs, (float(times[0]), float(times[-1])), initial, t_eval=times,
                         method="LSODA", rtol=1e-9, atol=1e-12)
    if not solution.success:
        raise RuntimeError(f"mean-field integration failed: {solution.message}")
    return solution.y.T


def compare_mean_field(model, run: LatticeRun, *, mean_field=None, beta=None) -> MeanFieldComparison:
    """Measured density and phenotype fractions beside the mean-field prediction.

    Parameters
    ----------
    model : LatticeModel
        The model that produced ``run``.
    run : LatticeRun
    mean_field : switchlaw.MeanField, optional
        Predict with this model at ``beta`` (its division and death rates must equal the
        lattice's). By default the compartment equations are integrated with the lattice's own
        law (:func:`law_compartments`).
    beta : float, optional
        Sensitivity for ``mean_field``.

    Returns
    -------
    MeanFieldComparison
        The discrepancy ``measured - predicted`` at every output time, its largest size, and
        whether it exceeds three standard errors of the replicate mean. Mean field treats
        neighbour counts as Binomial(N, rho) and ignores the clustering that division into
        neighbouring sites creates, so some discrepancy is expected; it is reported, not
        corrected.
    """
    if not isinstance(run, LatticeRun):
        raise InputError(f"`run` must be a LatticeRun (got {type(run).__name__})")
    rules = model.rules
    sites = run.sites
    compartments = run.counts / sites
    start = compartments[:, 0].mean(axis=0)
    times = run.times
    if mean_field is None:
        predicted = law_compartments(rules, start, times)
        source = "the law's compartment equations"
    else:
        from ..population._mean_field import MeanField

        if not isinstance(mean_field, MeanField):
            raise InputError(f"`mean_field` must be a switchlaw.MeanField (got {type(mean_field).__name__})")
        if beta is None:
            raise InputError("`beta` must be given with `mean_field`")
        same = (mean_field.division.shape == rules.division.shape
                and np.allclose(mean_field.division, rules.division)
                and np.allclose(mean_field.death, rules.death)
                and not np.any(mean_field.crowding))
        if not same:
            raise InputError(
                f"`mean_field` rates (division {mean_field.division.tolist()}, death "
                f"{mean_field.death.tolist()}) must equal the lattice's (division "
                f"{rules.division.tolist()}, death {rules.death.tolist()}) with no crowding"
            )
        if times[0] != 0.0:
            raise InputError("`run` must start at time 0 to be compared with a MeanField")
        initial = start if mean_field.tau is not None else start.sum()
        trajectory = mean_field.trajectory(beta, initial, float(times[-1]), points=2001)
        predicted = np.column_stack([
            np.interp(times, trajectory.times, trajectory.compartments[:, x])
            for x in range(trajectory.compartments.shape[1])
        ])
        source = f"MeanField at beta={float(beta):g}" + (" (fast switching)" if mean_field.tau is None else "")
    density = compartments.sum(axis=2)
    measured = density.mean(axis=0)
    replicates = density.shape[0]
    if replicates > 1:
        standard_error = density.std(axis=0, ddof=1) / np.sqrt(replicates)
    else:
        standard_error = np.full(times.size, np.nan)
    predicted_density = predicted.sum(axis=1)
    discrepancy = measured - predicted_density
    measured_fractions = _mean_fractions(run)
    predicted_fractions = _fractions(predicted)
    worst = int(np.argmax(np.abs(discrepancy)))
    significant = bool(np.any(np.abs(discrepancy) > 3 * standard_error)) if replicates > 1 else False
    return MeanFieldComparison(
        times=times, measured=measured, standard_error=standard_error, predicted=predicted_density,
        discrepancy=discrepancy, measured_fractions=measured_fractions,
        predicted_fractions=predicted_fractions, fraction_discrepancy=measured_fractions - predicted_fractions,
        largest=float(abs(discrepancy[worst])), largest_at=float(times[worst]), significant=significant,
        source=source,
    )


def _mean_fractions(run: LatticeRun) -> np.ndarray:
    """Mean phenotype fractions over the replicates that have cells (``nan`` where none has)."""
    fractions = run.fractions
    present = np.isfinite(fractions[..., 0])
    total = present.sum(axis=0)
    summed = np.where(present[..., None], fractions, 0.0).sum(axis=0)
    out = np.full(summed.shape, np.nan)
    np.divide(summed, total[:, None], out=out, where=total[:, None] > 0)
    return out
