"""Well-mixed birth–death–switching process: cells divide, die and switch phenotype."""

from __future__ import annotations

import numpy as np

from .._deprecation import renamed_keyword
from .._errors import InputError
from .._validate import as_positive, choice
from ._chain import BLOCK, METHODS, _seed_label
from ._checks import as_count, as_counts, as_horizon, as_rate_vector, as_replicates, as_seed, as_sizes, as_times
from ._intervals import crossing, wilson_interval
from ._law_use import check_law, fraction_table
from ._network import Network, run_network
from ._results import ExtinctionCurve, StochasticRun
from ._streams import Streams


class BirthDeathSwitching:
    """Cells of several phenotypes divide into free space, die and switch phenotype.

    Reactions, for each phenotype ``x`` (``n_x`` cells, ``n = sum_x n_x``):

    - division ``x -> 2x`` at rate ``b_x n_x (1 - n / K)`` (``b_x n_x`` without a capacity);
    - death ``x -> 0`` at rate ``d_x n_x``;
    - switching ``i -> j`` at rate ``n_i k_ij(n)``.

    With a law, cells re-decide at rate ``1 / tau`` and adopt ``j`` with the law's mean-field
    fraction at the current density: ``k_ij = f_j(n / K) / tau`` with
    ``f_j = sum_y p(y | rho) q(j | y, rho)`` (:meth:`SwitchingLaw.fractions`). In a well-mixed
    population a cell's sensed state is a draw from the law's environment at that density, so
    this is the exact rate of ``i -> j`` averaged over what the cell senses. Re-decisions that
    keep the phenotype change nothing and are not simulated.

    Parameters
    ----------
    division, death : array_like
        Per-phenotype rates ``b_x``, ``d_x`` (per cell per unit time), finite and >= 0.
    carrying_capacity : int, optional
        Carrying capacity ``K`` in cells; the density is ``n / K``. Required with a law.
        ``capacity=`` is its old name, deprecated.
    law : SwitchingLaw, optional
        Derived on densities covering [0, 1]; needs ``tau``.
    tau : float, optional
        Decision timescale (time units): cells re-decide at rate ``1 / tau``.
    switching : callable, optional
        Instead of a law: ``counts -> rates`` with ``counts`` of shape (rows, phenotypes) and
        rates of shape (rows, phenotypes, phenotypes), ``rates[r, i, j]`` the per-cell rate of
        ``i -> j`` (the diagonal is ignored). A negative or non-finite rate is an error naming
        the state.
    phenotypes : sequence of str, optional
        Names (default: the law's, else ``"0"``, ``"1"``, ...).

    References
    ----------
    Gillespie, D. T. (1977). *J. Phys. Chem.* 81:2340. Cao, Y., Gillespie, D. T. & Petzold,
    L. R. (2006). *J. Chem. Phys.* 124:044109.

    Examples
    --------
    A single phenotype without a capacity is Kendall's linear birth–death process:

    >>> model = BirthDeathSwitching(division=[1.0], death=[0.5])
    >>> run = model.simulate([10], t_end=1.0, replicates=200, seed=1)
    >>> run.counts.shape
    (200, 101, 1)
    """

    @renamed_keyword("capacity", "carrying_capacity")
    def __init__(self, *, division, death, carrying_capacity=None, law=None, tau=None, switching=None,
                 phenotypes=None):
        self.division = as_rate_vector(division, "division")
        size = self.division.size
        self.death = as_rate_vector(death, "death", size)
        self.carrying_capacity = (None if carrying_capacity is None
                                  else as_count(carrying_capacity, "carrying_capacity", minimum=1))
        if law is not None and switching is not None:
            raise InputError("give either `law` (with `tau`) or `switching`, not both")
        self.law = None if law is None else check_law(law)
        self.switching = switching
        if switching is not None and not callable(switching):
            raise InputError(f"`switching` must be a callable counts -> rates (got {type(switching).__name__})")
        self.tau = None
        self._fractions = None
        if self.law is not None:
            if tau is None:
                raise InputError("`tau` must be given with a law (cells re-decide at rate 1 / tau)")
            self.tau = as_positive(tau, "tau")
            if self.carrying_capacity is None:
                raise InputError("`carrying_capacity` must be given with a law: the law reads the density n / carrying_capacity")
            if len(self.law.phenotypes) != size:
                raise InputError(
                    f"`division` must have one rate per phenotype of the law ({len(self.law.phenotypes)}) (got {size})"
                )
            self._fractions = fraction_table(self.law, np.arange(self.carrying_capacity + 1) / self.carrying_capacity)
        elif tau is not None:
            raise InputError("`tau` applies only with a `law`")
        if phenotypes is None:
            phenotypes = self.law.phenotypes if self.law is not None else tuple(str(i) for i in range(size))
        self.phenotypes = tuple(str(p) for p in phenotypes)
        if len(self.phenotypes) != size:
            raise InputError(f"`phenotypes` must name each of the {size} phenotypes (got {len(self.phenotypes)})")
        pairs = [(i, j) for i in range(size) for j in range(size) if i != j]
        self._from = np.array([i for i, _ in pairs], dtype=np.int64)
        self._to = np.array([j for _, j in pairs], dtype=np.int64)
        eye = np.eye(size, dtype=np.int64)
        switch_rows = (eye[self._to] - eye[self._from]) if pairs else np.empty((0, size), dtype=np.int64)
        self._stoichiometry = np.vstack([eye, -eye, switch_rows])
        self._g = self._order_table()

    # ------------------------------------------------------------------ rates
    def _order_table(self) -> np.ndarray | None:
        """Leap-condition factor per size: 2 with crowding (second order), raised where the
        law's fractions change faster than linearly with density."""
        base = 2.0 if self.carrying_capacity is not None else 1.0
        if self._fractions is None:
            return None
        f = self._fractions
        n = np.arange(f.shape[0], dtype=float)[:, None]
        slope = np.gradient(f, axis=0)
        elastic = np.zeros_like(f)
        np.divide(np.abs(n * slope), f, out=elastic, where=f > 1e-12)
        return np.maximum(base, 1.0 + elastic.max(axis=1))

    def _switch_rates(self, x: np.ndarray) -> np.ndarray:
        """Per-cell switching rates for each (from, to) pair, shape (rows, pairs)."""
        if self._from.size == 0:
            return np.zeros((x.shape[0], 0))
        if self.law is not None:
            n = np.clip(x.sum(axis=1), 0, self.carrying_capacity)
            return self._fractions[n][:, self._to] / self.tau
        if self.switching is None:
            return np.zeros((x.shape[0], self._from.size))
        rates = np.asarray(self.switching(x.copy()), dtype=np.float64)
        size = x.shape[1]
        if rates.shape != (x.shape[0], size, size):
            raise InputError(
                f"`switching` must return rates of shape (rows, {size}, {size}) (got {rates.shape})"
            )
        chosen = rates[:, self._from, self._to]
        bad = ~np.isfinite(chosen) | (chosen < 0)
        if bad.any():
            r, k = (int(v) for v in np.argwhere(bad)[0])
            raise InputError(
                f"`switching` rates must be finite and >= 0; at state {tuple(int(c) for c in x[r])} "
                f"the rate {self._from[k]} -> {self._to[k]} is {float(chosen[r, k])!r}"
            )
        return chosen

    def propensities(self, x: np.ndarray) -> np.ndarray:
        """Rates of every reaction at counts ``x`` (rows, phenotypes): divisions, deaths, switches."""
        x = np.asarray(x, dtype=np.int64)
        n = x.sum(axis=1)
        k = self.carrying_capacity
        crowd = np.ones(x.shape[0]) if k is None else np.clip(1.0 - n / k, 0.0, None)
        births = self.division * x * crowd[:, None]
        deaths = self.death * x
        switches = x[:, self._from] * self._switch_rates(x)
        return np.hstack([births, deaths, switches])

    def _network(self, upper: int | None) -> Network:
        capacity = self.carrying_capacity
        g_table = self._g
        base = 2.0 if capacity is not None else 1.0

        def order(x):
            if g_table is None:
                return np.full(x.shape, base)
            return np.repeat(g_table[np.clip(x.sum(axis=1), 0, capacity)][:, None], x.shape[1], axis=1)

        def stop(x):
            n = x.sum(axis=1)
            return (n == 0) if upper is None else (n == 0) | (n >= upper)

        def invalid(x):
            bad = (x < 0).any(axis=1)
            if capacity is not None:
                bad |= x.sum(axis=1) > capacity
            return bad

        def room(x):
            n = x.sum(axis=1).astype(float)
            return n if upper is None else np.minimum(n, upper - n)

        return Network(self._stoichiometry, self.propensities, order, stop, invalid, room)

    # -------------------------------------------------------------- simulation
    def _initial(self, initial) -> np.ndarray:
        counts = as_counts(initial, "initial")
        if counts.shape != (self.division.size,):
            raise InputError(
                f"`initial` must give a cell count per phenotype ({self.division.size}) (got shape {counts.shape})"
            )
        if self.carrying_capacity is not None and counts.sum() > self.carrying_capacity:
            raise InputError(f"`initial` must total at most `carrying_capacity` ({self.carrying_capacity}) (got {int(counts.sum())})")
        return counts

    def simulate(self, initial, *, t_end, times=None, replicates, seed, method: str = "exact",
                 epsilon: float = 0.03, max_steps: int = 10_000_000) -> StochasticRun:
        """Run replicates from ``initial`` counts and record them at ``times``.

        Parameters
        ----------
        initial : array_like of int
            Cells of each phenotype at time 0.
        t_end : float
            End time (time units of the rates).
        times : array_like, optional
            Output times in ``[0, t_end]`` (default 101 evenly spaced).
        replicates : int
        seed : int or numpy.random.SeedSequence
        method : {"exact", "tau-leap"}
            Gillespie's direct method, or tau-leaping with error control ``epsilon`` (the
            expected relative change of each propensity within a leap, Cao, Gillespie & Petzold
            2006), leaps short enough not to jump to extinction (mean plus three standard
            deviations of the change in size at most the size), and exact steps where fewer
            than 10 events are expected or fewer than 10 cells are present.
        max_steps : int
            Iterations at most; a run still going then raises an error.

        Returns
        -------
        StochasticRun
        """
        choice(method, "method", METHODS)
        start = self._initial(initial)
        t_end = as_positive(t_end, "t_end")
        grid = np.linspace(0.0, t_end, 101) if times is None else as_times(times)
        if grid[-1] > t_end:
            raise InputError(f"`times` must lie in [0, t_end] (got {float(grid[-1])!r} > {t_end!r})")
        replicates = as_replicates(replicates)
        root = as_seed(seed)
        streams = Streams(root, replicates, block=BLOCK)
        outcome = run_network(
            self._network(None), np.tile(start, (streams.padded, 1)), streams, method=method,
            t_end=t_end, times=grid, epsilon=as_positive(epsilon, "epsilon"),
            max_steps=as_count(max_steps, "max_steps", minimum=1),
        )
        if not outcome.finished[:replicates].all():
            raise InputError(f"`max_steps` ({max_steps}) was reached before t_end; raise it or use tau-leaping")
        extinct = outcome.stopped[:replicates]
        return StochasticRun(
            times=grid, counts=outcome.recorded[:replicates], phenotypes=self.phenotypes,
            extinct=extinct, extinction_time=np.where(extinct, outcome.stop_time[:replicates], np.nan),
            method=method, seed=_seed_label(seed), events=outcome.events, leaps=outcome.leaps,
        )

    def extinction_curve(self, sizes, *, upper=None, t_max=None, replicates, seed,
                         composition=None, method: str = "exact", epsilon: float = 0.03,
                         max_steps: int = 10_000_000) -> ExtinctionCurve:
        """Probability of dying out against the initial number of cells.

        Each replicate starts with ``n0`` cells whose phenotypes are a multinomial draw from
        ``composition`` (default: the law's fractions at density ``n0 / K``, the composition of
        cells that have just decided), and runs until it dies out (a *hit*), reaches ``upper``
        cells, or reaches time ``t_max``.

        Parameters
        ----------
        sizes : array_like of int
            Initial sizes, increasing, ``>= 1``.
        upper : int, optional
            Size counted as safe (at most the capacity).
        t_max : float, optional
            Time horizon. At least one of ``upper`` and ``t_max`` is needed.
        replicates : int
            Runs per size.
        seed : int or numpy.random.SeedSequence
            Each size has its own streams (keyed by the size), so its estimate does not depend
            on which other sizes are asked for.
        composition : array_like, optional
            Phenotype probabilities of the initial cells.
        method : {"exact", "tau-leap"}

        Returns
        -------
        ExtinctionCurve
            With 95 % Wilson intervals and the size where the probability crosses one half.
        """
        choice(method, "method", METHODS)
        sizes = as_sizes(sizes)
        upper, t_max = as_horizon(upper, t_max, smallest=int(sizes[-1]), largest=self.carrying_capacity)
        if self.carrying_capacity is not None and sizes[-1] > self.carrying_capacity:
            raise InputError(f"`sizes` must be at most `capacity` ({self.carrying_capacity}) (got {int(sizes[-1])})")
        replicates = as_replicates(replicates)
        root = as_seed(seed)
        epsilon = as_positive(epsilon, "epsilon")
        max_steps = as_count(max_steps, "max_steps", minimum=1)
        mix = self._composition(composition)
        network = self._network(upper)
        hits = np.zeros(sizes.size, dtype=np.int64)
        for k, n0 in enumerate(sizes.tolist()):
            streams = Streams(root, replicates, block=BLOCK, key=(n0,))
            probs = mix(n0)
            initial = np.vstack([
                streams.generators[b].multinomial(n0, probs, size=streams.block) for b in range(streams.blocks)
            ])
            outcome = run_network(network, initial, streams, method=method, t_end=t_max,
                                  epsilon=epsilon, max_steps=max_steps)
            if not outcome.finished[:replicates].all():
                raise InputError(f"`max_steps` ({max_steps}) was reached at size {n0}; raise it or give `t_max`")
            extinct = outcome.stopped & (outcome.counts.sum(axis=1) == 0)
            hits[k] = int(extinct[:replicates].sum())
        return _curve(sizes, hits, replicates, upper, t_max, method, seed)

    def _composition(self, composition):
        size = self.division.size
        if composition is not None:
            from .._validate import as_distribution

            probs = as_distribution(composition, "composition")
            if probs.size != size:
                raise InputError(f"`composition` must have one entry per phenotype ({size}) (got {probs.size})")
            return lambda n0: probs
        if self._fractions is not None:
            return lambda n0: self._fractions[n0] / self._fractions[n0].sum()
        if size == 1:
            return lambda n0: np.ones(1)
        raise InputError("`composition` must be given: without a law nothing says which phenotypes the first cells have")

    def __repr__(self) -> str:
        switching = (f"law, tau={self.tau:g}" if self.law is not None
                     else "callable switching" if self.switching is not None else "no switching")
        capacity = "no capacity" if self.carrying_capacity is None else f"capacity {self.carrying_capacity}"
        return f"BirthDeathSwitching({self.division.size} phenotypes, {capacity}, {switching})"


def _curve(sizes, hits, replicates, upper, t_max, method, seed) -> ExtinctionCurve:
    """An :class:`ExtinctionCurve` from extinct counts per size."""
    probability = hits / replicates
    interval = wilson_interval(hits, replicates)
    return ExtinctionCurve(
        sizes=sizes, probability=probability, interval=interval, hits=hits, replicates=replicates,
        threshold=crossing(sizes, probability),
        threshold_range=(crossing(sizes, interval[:, 0]), crossing(sizes, interval[:, 1])),
        upper=upper, t_max=t_max, method=method, seed=_seed_label(seed),
    )
