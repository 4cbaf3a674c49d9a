"""Extinction risk of small founding populations of the mean-field model, and clustering on lattices."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._errors import InputError
from .._validate import as_nonnegative
from ._checks import as_count, as_sizes
from ._hitting import hitting_probability
from ._intervals import crossing


@dataclass(frozen=True, repr=False)
class ChainExtinction:
    """Exact extinction probabilities of the mean-field birth–death chain at one beta.

    Attributes
    ----------
    beta : float
        Sensitivity of the law (nats per payoff unit).
    sites : int
        Carrying capacity ``K`` (cells); the density is ``n / K``.
    established : int
        Size counted as established (the chain's ceiling).
    sizes : ndarray of int, shape (k,)
        Founder sizes asked for.
    probability : ndarray, shape (k,)
        ``P(hit 0 before established | n0)`` at each founder size.
    half : float or None
        Founder size where the probability falls through one half (linear interpolation
        between neighbouring whole sizes, over every size from 1 to ``established - 1``);
        ``None`` when it never does.
    """

    beta: float
    sites: int
    established: int
    sizes: np.ndarray
    probability: np.ndarray
    half: float | None

    def __repr__(self) -> str:
        half = "never 1/2" if self.half is None else f"1/2 at {self.half:.4g} cells"
        return (f"ChainExtinction(beta={self.beta:g}, K={self.sites}, established at {self.established}: "
                f"P from {self.probability[0]:.4g} to {self.probability[-1]:.4g}, {half})")


def chain_extinction(model, beta, *, sites, established, sizes) -> ChainExtinction:
    """Exact extinction risk of ``n0`` founders in the mean-field model (fast-switching limit).

    Parameters
    ----------
    model : MeanField
    beta : float
        Sensitivity (nats per payoff unit).
    sites : int
        Carrying capacity ``K`` in cells.
    established : int
        Size counted as established, ``2 <= established <= K``.
    sizes : array_like of int
        Founder sizes, increasing, below ``established``.

    Returns
    -------
    ChainExtinction

    Notes
    -----
    ``n`` cells at density ``rho = n / K`` with the law's mean-field fractions ``f_x(rho)``
    give birth at ``n sum_x f_x b_x (1 - rho)`` and die at ``n sum_x f_x (d_x + c_x rho)``;
    the chance of reaching 0 before ``established`` follows from first-step analysis
    (:func:`hitting_probability`; Karlin & Taylor 1975, ch. 4).

    References
    ----------
    Karlin, S. & Taylor, H. M. (1975). *A First Course in Stochastic Processes*, 2nd ed., ch. 4.
    """
    beta = as_nonnegative(beta, "beta")
    sites = as_count(sites, "sites", minimum=2)
    upper = as_count(established, "established", minimum=2)
    if upper > sites:
        raise InputError(f"`established` must be at most `sites` ({sites}) (got {upper})")
    sizes = as_sizes(sizes)
    if sizes[-1] >= upper:
        raise InputError(f"`sizes` must be below `established` ({upper}) (got {int(sizes[-1])})")
    n = np.arange(upper + 1, dtype=float)
    birth = np.zeros(upper + 1)
    death = np.zeros(upper + 1)
    for k in range(1, upper):
        rho = n[k] / sites
        f = model.fractions(rho, beta)
        birth[k] = n[k] * float(f @ model.division) * (1.0 - rho)
        death[k] = n[k] * float(f @ (model.death + model.crowding * rho))
    every = np.arange(1, upper)
    risk = np.atleast_1d(hitting_probability(birth, death, every, upper))
    return ChainExtinction(
        beta=beta, sites=sites, established=upper, sizes=sizes,
        probability=risk[sizes - 1], half=crossing(every, risk),
    )


def neighbour_clustering(lattice, layout) -> float:
    """Pair correlation of occupied sites at nearest-neighbour distance.

    ``P(a neighbour site is occupied | the site is occupied) / rho``, pooled over every
    occupied site of ``layout`` (one ``(rows, columns)`` layout or a stack): 1 for sites
    occupied independently at random, above 1 when cells cluster, below 1 when they avoid
    each other. Missing neighbours at a closed edge do not count. NaN with fewer than two
    cells.
    """
    occupied = np.asarray(layout) != 0
    flat = occupied.reshape(-1, lattice.sites)
    padded = np.hstack([flat, np.zeros((flat.shape[0], 1), dtype=bool)])
    present = lattice.neighbours < lattice.sites
    pairs = 0.0
    slots = 0.0
    cells = flat.sum()
    for row, full in zip(flat, padded):
        pairs += float((full[lattice.neighbours] & present)[row].sum())
        slots += float(present[row].sum())
    if cells < 2 or slots == 0:
        return float("nan")
    rho = cells / flat.size
    return (pairs / slots) / rho
