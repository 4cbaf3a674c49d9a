"""Frozen result objects of the stochastic stage, each with a short readable repr."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


def _fractions(counts: np.ndarray) -> np.ndarray:
    """Phenotype fractions ``counts / total`` along the last axis; ``nan`` where there are no cells."""
    total = counts.sum(axis=-1, keepdims=True)
    out = np.full(counts.shape, np.nan)
    np.divide(counts, total, out=out, where=total > 0)
    return out


@dataclass(frozen=True, repr=False)
class HittingEstimate:
    """Simulated probability that a birth–death chain hits 0 before ``upper``.

    Attributes
    ----------
    estimate : float
        ``hits / replicates`` over the replicates that finished.
    interval : tuple of float
        95 % Wilson score interval for the probability.
    replicates : int
        Replicates that were absorbed at 0 or ``upper`` (and so count).
    hits : int
        Replicates absorbed at 0.
    n0, upper : int
    method : str
        ``"exact"`` (embedded jump chain) or ``"tau-leap"``.
    seed : int or None
        The integer seed (``None`` when a ``SeedSequence`` was given).
    events : int
        Births and deaths simulated, over all replicates.
    leaps : int
        Tau-leaps taken (0 for the exact method).
    unfinished : int
        Replicates still running when ``max_steps`` was reached (not counted).
    converged : bool
        ``True`` when every replicate finished.
    message : str
    """

    estimate: float
    interval: tuple
    replicates: int
    hits: int
    n0: int
    upper: int
    method: str
    seed: int | None
    events: int
    leaps: int = 0
    unfinished: int = 0
    converged: bool = True
    message: str = ""

    def __repr__(self) -> str:
        lo, hi = self.interval
        tail = "" if self.converged else f", {self.unfinished} unfinished"
        return (
            f"HittingEstimate(P(hit 0 before {self.upper} | n0={self.n0}) = {self.estimate:.4g} "
            f"[{lo:.4g}, {hi:.4g}], {self.replicates} replicates, {self.method}{tail})"
        )


@dataclass(frozen=True, repr=False)
class ExtinctionCurve:
    """Probability of dying out against initial size, with 95 % intervals.

    A replicate counts as extinct when its population reaches zero before it reaches
    ``upper`` cells (if given) and before time ``t_max`` (if given).

    Attributes
    ----------
    sizes : ndarray of int, shape (k,)
    probability : ndarray, shape (k,)
    interval : ndarray, shape (k, 2)
        95 % Wilson score intervals.
    hits : ndarray of int, shape (k,)
        Extinct replicates at each size.
    replicates : int
    threshold : float or None
        Initial size where the estimated probability falls through one half (linear
        interpolation between neighbouring sizes); ``None`` when it does not over ``sizes``.
    threshold_range : tuple
        Where the upper and lower interval bounds fall through one half (either may be
        ``None``): a rough range for ``threshold``.
    upper : int or None
    t_max : float or None
    method : str
    seed : int or None
    """

    sizes: np.ndarray
    probability: np.ndarray
    interval: np.ndarray
    hits: np.ndarray
    replicates: int
    threshold: float | None
    threshold_range: tuple
    upper: int | None
    t_max: float | None
    method: str
    seed: int | None

    def __repr__(self) -> str:
        cross = "never crosses 1/2" if self.threshold is None else f"crosses 1/2 at size {self.threshold:.3g}"
        return (
            f"ExtinctionCurve({self.sizes.size} sizes {self.sizes[0]}..{self.sizes[-1]}, "
            f"P from {self.probability[0]:.3g} to {self.probability[-1]:.3g}, {cross}, "
            f"{self.replicates} replicates each, {self.method})"
        )


@dataclass(frozen=True, repr=False)
class StochasticRun:
    """Replicate trajectories of a well-mixed birth–death–switching process.

    Attributes
    ----------
    times : ndarray, shape (k,)
    counts : ndarray of int, shape (replicates, k, phenotypes)
        Cells of each phenotype at each output time.
    phenotypes : tuple of str
    extinct : ndarray of bool, shape (replicates,)
        Died out by the last output time.
    extinction_time : ndarray, shape (replicates,)
        Time of extinction (``nan`` when the population survived).
    method : str
    seed : int or None
    events : int
        Reactions simulated, over all replicates.
    leaps : int
        Tau-leaps taken (0 for the exact method).
    """

    times: np.ndarray
    counts: np.ndarray
    phenotypes: tuple
    extinct: np.ndarray
    extinction_time: np.ndarray
    method: str
    seed: int | None
    events: int
    leaps: int

    @property
    def total(self) -> np.ndarray:
        """Cells of every phenotype together, shape (replicates, k)."""
        return self.counts.sum(axis=-1)

    @property
    def fractions(self) -> np.ndarray:
        """Phenotype fractions, shape (replicates, k, phenotypes); ``nan`` with no cells."""
        return _fractions(self.counts)

    def __repr__(self) -> str:
        mean = self.total[:, -1].mean()
        return (
            f"StochasticRun({self.counts.shape[0]} replicates, {self.times.size} times to "
            f"t={self.times[-1]:.4g}, mean final size {mean:.4g}, "
            f"{int(self.extinct.sum())} extinct, {self.method})"
        )


@dataclass(frozen=True, repr=False)
class LatticeRun:
    """Replicate runs of the lattice model.

    Attributes
    ----------
    times : ndarray, shape (k,)
    counts : ndarray of int, shape (replicates, k, phenotypes)
    sites : int
        Sites of the lattice.
    phenotypes : tuple of str
    snapshot_times : ndarray, shape (s,)
    snapshots : ndarray of int8, shape (s, replicates, rows, columns)
        Layouts: 0 empty, ``x + 1`` a cell of phenotype ``x``.
    engine : str
        ``"sweep"`` or ``"exact"``.
    dt : float or None
        Largest sweep duration (sweep engine).
    seed : int or None
    site_updates : int
        Turns taken by cells (sweep engine) or events simulated (exact engine).
    """

    times: np.ndarray
    counts: np.ndarray
    sites: int
    phenotypes: tuple
    snapshot_times: np.ndarray
    snapshots: np.ndarray
    engine: str
    dt: float | None
    seed: int | None
    site_updates: int

    @property
    def density(self) -> np.ndarray:
        """Fraction of occupied sites, shape (replicates, k)."""
        return self.counts.sum(axis=-1) / self.sites

    @property
    def fractions(self) -> np.ndarray:
        """Phenotype fractions among cells, shape (replicates, k, phenotypes); ``nan`` with no cells."""
        return _fractions(self.counts)

    def __repr__(self) -> str:
        return (
            f"LatticeRun({self.counts.shape[0]} replicates, {self.times.size} times to "
            f"t={self.times[-1]:.4g}, mean final density {self.density[:, -1].mean():.4g}, "
            f"{self.engine} engine)"
        )


@dataclass(frozen=True, repr=False)
class MeanFieldComparison:
    """Lattice measurements beside the mean-field prediction, and how far apart they are.

    Attributes
    ----------
    times : ndarray, shape (k,)
    measured : ndarray, shape (k,)
        Mean density over replicates.
    standard_error : ndarray, shape (k,)
        Standard error of that mean (``nan`` with one replicate).
    predicted : ndarray, shape (k,)
        Mean-field density.
    discrepancy : ndarray, shape (k,)
        ``measured - predicted``.
    measured_fractions, predicted_fractions : ndarray, shape (k, phenotypes)
    fraction_discrepancy : ndarray, shape (k, phenotypes)
    largest : float
        Largest ``|discrepancy|`` of the density.
    largest_at : float
        Time at which it occurs.
    significant : bool
        Whether ``|discrepancy|`` exceeds three standard errors at some time.
    source : str
        Where the prediction came from (the law's compartment equations, or a ``MeanField``).
    """

    times: np.ndarray
    measured: np.ndarray
    standard_error: np.ndarray
    predicted: np.ndarray
    discrepancy: np.ndarray
    measured_fractions: np.ndarray
    predicted_fractions: np.ndarray
    fraction_discrepancy: np.ndarray
    largest: float
    largest_at: float
    significant: bool
    source: str

    def summary(self) -> str:
        """A few lines: final values, the largest discrepancy and whether it is significant."""
        verdict = "beyond" if self.significant else "within"
        return "\n".join([
            f"Lattice vs mean field ({self.source})",
            f"  final density: measured {self.measured[-1]:.4g} (s.e. {self.standard_error[-1]:.2g}), "
            f"mean field {self.predicted[-1]:.4g}, discrepancy {self.discrepancy[-1]:+.4g}",
            f"  largest |discrepancy| {self.largest:.4g} at t = {self.largest_at:.4g} "
            f"({verdict} 3 standard errors)",
        ])

    def __repr__(self) -> str:
        return (
            f"MeanFieldComparison(final density {self.measured[-1]:.4g} measured vs "
            f"{self.predicted[-1]:.4g} mean field, largest |discrepancy| {self.largest:.3g} "
            f"at t={self.largest_at:.4g}{', significant' if self.significant else ''})"
        )
