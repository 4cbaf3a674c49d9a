"""Cells on a lattice that divide, move, die and decide their phenotype with a derived law."""

from __future__ import annotations

import numpy as np

from .._errors import InputError
from .._validate import as_positive, choice
from ._birth_death import _curve, _seed_label
from ._checks import as_count, as_horizon, as_rate_vector, as_replicates, as_seed, as_sizes, as_times
from ._lattice import Lattice
from ._lattice_exact import run_exact
from ._law_use import check_law
from ._results import LatticeRun
from ._rules import Rules
from ._streams import Streams
from ._sweep import run_sweeps

ENGINES = ("sweep", "exact")
#: Default sweep length as a fraction of ``1 / R``, ``R`` the largest total rate of a cell.
SWEEP_FRACTION = 0.1


class LatticeModel:
    """Agents on a 2-D lattice with volume exclusion, driven by a switching law.

    Each site holds at most one cell. A cell of phenotype ``x``

    - divides at rate ``b_x``: it picks one of its neighbour sites at random and places a
      daughter there if that site is free (otherwise nothing happens), so that in mean field
      division runs at ``b_x (1 - rho)``;
    - moves at rate ``m_x`` to a randomly picked neighbour site if it is free (the symmetric
      simple exclusion process);
    - dies at rate ``d_x``;
    - re-decides at rate ``1 / tau``: it counts ``y``, its *actual* number of occupied
      neighbour sites (or passes the count through ``sense``), and adopts phenotype ``j`` with
      probability ``q(j | y, rho)`` of the law at the current density ``rho`` of the lattice.

    Daughters inherit the parent's phenotype and re-decide later like every cell. At a closed
    edge, a move or division across the edge fails.

    Parameters
    ----------
    lattice : Lattice
    division, death, motility : array_like
        Per-phenotype rates (per cell per unit time), finite and >= 0.
    law : SwitchingLaw, optional
        Derived on densities covering [0, 1]. Without a law, cells keep their phenotype.
    tau : float, optional
        Decision timescale (time units); required with a law.
    sense : callable, optional
        ``counts -> states``: maps integer arrays of occupied-neighbour counts to the law's
        state indices (a local signal). By default the count itself is the state, and the law
        must have ``neighbours + 1`` states.
    phenotypes : sequence of str, optional

    Notes
    -----
    Two engines. ``"sweep"`` (the default for time courses) updates the whole lattice in
    random-sequential sweeps of length ``dt``, vectorised over sites and replicates, exact
    within a sweep's ordering and converging to continuous time with error of order ``R dt``
    (see ``switchlaw.stochastic._sweep``); ``"exact"`` simulates continuous time without
    discretisation, one event per replicate per iteration, best for small colonies.

    References
    ----------
    Liggett, T. M. (1985). *Interacting Particle Systems*. Springer (exclusion processes).
    Gillespie, D. T. (1977). *J. Phys. Chem.* 81:2340.
    """

    def __init__(self, lattice, *, division, death, motility, law=None, tau=None, sense=None,
                 phenotypes=None):
        if not isinstance(lattice, Lattice):
            raise InputError(f"`lattice` must be a Lattice (got {type(lattice).__name__})")
        self.lattice = lattice
        division = as_rate_vector(division, "division")
        size = division.size
        death = as_rate_vector(death, "death", size)
        motility = as_rate_vector(motility, "motility", size)
        if size > 127:
            raise InputError(f"`division` must list at most 127 phenotypes (got {size})")
        switch_rate = 0.0
        if law is not None:
            law = check_law(law)
            if len(law.phenotypes) != size:
                raise InputError(
                    f"`division` must have one rate per phenotype of the law ({len(law.phenotypes)}) (got {size})"
                )
            if tau is None:
                raise InputError("`tau` must be given with a law (cells re-decide at rate 1 / tau)")
            switch_rate = 1.0 / as_positive(tau, "tau")
            if sense is None and law.states.size != lattice.size + 1:
                raise InputError(
                    f"`law` decides on {law.states.size} states but a {lattice.neighbourhood} cell has "
                    f"0..{lattice.size} occupied neighbours ({lattice.size + 1} states); give `sense` "
                    "to map counts to states"
                )
            if sense is not None and not callable(sense):
                raise InputError(f"`sense` must be a callable counts -> states (got {type(sense).__name__})")
        elif tau is not None or sense is not None:
            raise InputError("`tau` and `sense` apply only with a `law`")
        self.tau = None if law is None else 1.0 / switch_rate
        self.rules = Rules(division, death, motility, switch_rate, law, sense)
        if phenotypes is None:
            phenotypes = law.phenotypes if law is not None else tuple(str(i) for i in range(size))
        self.phenotypes = tuple(str(p) for p in phenotypes)
        if len(self.phenotypes) != size:
            raise InputError(f"`phenotypes` must name each of the {size} phenotypes (got {len(self.phenotypes)})")

    @property
    def law(self):
        return self.rules.law

    # ------------------------------------------------------------ layouts
    def _codes(self, initial, replicates: int, streams: Streams, phenotype=None) -> np.ndarray:
        """Initial codes (replicates, sites): 0 empty, ``x + 1`` phenotype ``x``.

        A boolean layout gets its phenotypes from ``phenotype`` or, with a law, from each
        cell's first decision on its actual neighbour count at the initial density.
        """
        lattice = self.lattice
        layout = np.asarray(initial)
        if layout.shape == lattice.shape:
            layout = np.broadcast_to(layout, (replicates, *lattice.shape))
        if layout.shape != (replicates, *lattice.shape):
            raise InputError(
                f"`initial` must be a layout of shape {lattice.shape} or ({replicates}, "
                f"{lattice.shape[0]}, {lattice.shape[1]}) (got {layout.shape})"
            )
        layout = layout.reshape(replicates, lattice.sites)
        X = self.rules.phenotypes
        if layout.dtype == bool:
            codes = np.zeros(layout.shape, dtype=np.int8)
            if phenotype is not None:
                x = as_count(phenotype, "phenotype")
                if x >= X:
                    raise InputError(f"`phenotype` must be an index below {X} (got {x})")
                codes[layout] = x + 1
            elif self.law is None:
                raise InputError(
                    "`initial` must give phenotype codes (0 empty, x + 1 for phenotype x), or give "
                    "`phenotype`: without a law nothing decides the first phenotypes"
                )
            else:
                counts = lattice.occupied_neighbours(layout)
                density = layout.sum(axis=1) / lattice.sites
                rr, ss = np.nonzero(layout)
                u = streams.random_counts(np.bincount(rr, minlength=replicates))
                codes[rr, ss] = self.rules.decide(counts[rr, ss], density[rr], u) + 1
            return codes
        if not np.issubdtype(layout.dtype, np.integer):
            raise InputError(f"`initial` must be a boolean or integer layout (got dtype {layout.dtype})")
        if layout.min() < 0 or layout.max() > X:
            bad = int(layout[(layout < 0) | (layout > X)][0])
            raise InputError(f"`initial` codes must be 0 (empty) or 1..{X} (phenotype + 1) (got {bad})")
        return layout.astype(np.int8)

    def _dt(self, dt) -> float:
        top = float(self.rules.rates().sum(axis=1).max())
        if dt is not None:
            return as_positive(dt, "dt")
        return SWEEP_FRACTION / top if top > 0 else np.inf

    # -------------------------------------------------------------- runs
    def simulate(self, initial, *, t_end, times=None, snapshots=None, replicates=1, seed,
                 engine: str = "sweep", dt=None) -> LatticeRun:
        """Run the model from ``initial`` and record densities, phenotype counts and layouts.

        Parameters
        ----------
        initial : array_like
            A boolean layout (phenotypes by the law's first decision) or an integer layout
            (0 empty, ``x + 1`` phenotype ``x``); shape ``(rows, columns)``, or one per
            replicate. :meth:`Lattice.colony` and :meth:`Lattice.scatter` make layouts.
        t_end : float
            End time.
        times : array_like, optional
            Output times in ``[0, t_end]`` (default 101 evenly spaced).
        snapshots : array_like, optional
            Times at which to keep the whole layout (added to the output times).
        replicates : int
        seed : int or numpy.random.SeedSequence
            Each replicate has its own stream.
        engine : {"sweep", "exact"}
        dt : float, optional
            Longest sweep (sweep engine); default ``0.1 / R`` with ``R`` the largest total rate
            of a cell, so that a cell acts in at most about 10 % of its turns.

        Returns
        -------
        LatticeRun
        """
        choice(engine, "engine", ENGINES)
        t_end = as_positive(t_end, "t_end")
        grid = np.linspace(0.0, t_end, 101) if times is None else as_times(times)
        shots = np.empty(0) if snapshots is None else as_times(snapshots, "snapshots")
        for name, values in (("times", grid), ("snapshots", shots)):
            if values.size and values[-1] > t_end:
                raise InputError(f"`{name}` must lie in [0, t_end] (got {float(values[-1])!r} > {t_end!r})")
        outputs = np.union1d(grid, shots)
        snap = np.isin(outputs, shots)
        replicates = as_replicates(replicates)
        streams = Streams(as_seed(seed), replicates)
        codes = self._codes(initial, replicates, streams)
        step = None
        if engine == "sweep":
            step = self._dt(dt)
            recorded, layouts, updates, _ = run_sweeps(
                self.rules, self.lattice, codes, streams, times=outputs, snap=snap,
                dt_max=min(step, float(outputs[-1])) if outputs[-1] > 0 else 1.0)
        else:
            recorded, layouts, updates, _ = run_exact(
                self.rules, self.lattice, codes, streams, times=outputs, snap=snap, t_end=float(outputs[-1]))
        keep = np.isin(outputs, grid)
        stack = (np.stack(layouts) if layouts else np.zeros((0, replicates, self.lattice.sites), dtype=np.int8))
        return LatticeRun(
            times=grid, counts=recorded[:, keep], sites=self.lattice.sites, phenotypes=self.phenotypes,
            snapshot_times=shots, snapshots=stack.reshape(shots.size, replicates, *self.lattice.shape),
            engine=engine, dt=step, seed=_seed_label(seed), site_updates=int(updates),
        )

    def extinction_curve(self, sizes, *, upper=None, t_max=None, replicates, seed,
                         engine: str = "exact", phenotype=None, dt=None):
        """Probability that a colony dies out, against its initial size.

        Each replicate starts from a compact colony of ``n0`` cells at the centre
        (:meth:`Lattice.colony`) whose phenotypes are the law's first decisions on their actual
        neighbour counts (or all ``phenotype``), and runs until it dies out (a *hit*), reaches
        ``upper`` cells, or reaches time ``t_max``.

        Parameters
        ----------
        sizes : array_like of int
            Initial colony sizes, increasing.
        upper : int, optional
            Colony size counted as established (at most the number of sites).
        t_max : float, optional
            Time horizon. At least one of ``upper`` and ``t_max`` is needed.
        replicates : int
            Runs per size.
        seed : int or numpy.random.SeedSequence
            Each size has its own streams, keyed by the size.
        engine : {"exact", "sweep"}
            The sweep engine needs ``t_max``.
        phenotype : int, optional
            Phenotype index of every initial cell.
        dt : float, optional
            Longest sweep (sweep engine).

        Returns
        -------
        ExtinctionCurve
        """
        choice(engine, "engine", ENGINES)
        sizes = as_sizes(sizes)
        self.lattice.colony(int(sizes[-1]))  # the lattice must hold the largest colony
        upper, t_max = as_horizon(upper, t_max, smallest=int(sizes[-1]), largest=self.lattice.sites)
        replicates = as_replicates(replicates)
        root = as_seed(seed)
        hits = np.zeros(sizes.size, dtype=np.int64)
        for k, n0 in enumerate(sizes.tolist()):
            streams = Streams(root, replicates, key=(n0,))
            codes = self._codes(self.lattice.colony(n0), replicates, streams, phenotype)
            if engine == "exact":
                _, _, _, cells = run_exact(self.rules, self.lattice, codes, streams, times=None,
                                           snap=None, t_end=t_max, upper=upper)
            else:
                if t_max is None:
                    raise InputError("`t_max` must be given with engine='sweep'")
                _, _, _, cells = run_sweeps(self.rules, self.lattice, codes, streams,
                                            times=np.array([t_max]), snap=np.array([False]),
                                            dt_max=min(self._dt(dt), t_max), upper=upper)
            hits[k] = int((cells == 0).sum())
        return _curve(sizes, hits, replicates, upper, t_max, engine, seed)

    def mean_field(self, run: LatticeRun, *, mean_field=None, beta=None):
        """The run's density and phenotype fractions beside the mean-field prediction.

        See :func:`switchlaw.stochastic.compare_mean_field`.
        """
        from ._compare import compare_mean_field

        return compare_mean_field(self, run, mean_field=mean_field, beta=beta)

    def __repr__(self) -> str:
        switching = f"law, tau={self.tau:g}" if self.law is not None else "no switching"
        return f"LatticeModel({self.rules.phenotypes} phenotypes on {self.lattice!r}, {switching})"
