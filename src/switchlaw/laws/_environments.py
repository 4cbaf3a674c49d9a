"""What a cell senses: environment states and their probabilities, possibly seen through a
noisy receptor.

An :class:`Environment` is accepted as ``env`` by :func:`switchlaw.solve`. Environments that
depend on the population density are written as callables ``density -> Environment``, e.g.
``lambda rho: switchlaw.occupancy(6, rho)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .._errors import InputError
from .._validate import as_array, as_distribution, as_positive, as_stochastic_matrix

#: Largest count a Poisson receptor may resolve (its states are 0..count).
MAX_COUNT_STATES = 10_000
#: How far a discretised distribution's bins may fall short of covering its support.
COVERAGE_TOLERANCE = 1e-9


@dataclass(frozen=True, repr=False)
class Environment:
    """States a cell can sense, with their probabilities.

    Attributes
    ----------
    states : ndarray, shape (m,)
        State labels (neighbour counts, bin centres, indices of combined states).
    probs : ndarray, shape (m,)
        Probabilities of the states *the cell decides on* (sensed states if there is a
        receptor).
    values : ndarray, shape (m,) or (m, k)
        Numeric value of the true signal in each true state (bin centres, counts); ``k``
        columns for a product of ``k`` signals.
    kind : str
        ``"occupancy"``, ``"signal"``, ``"empirical"``, ``"product"`` or ``"table"``.
    channel : ndarray, shape (m_true, m), optional
        Receptor channel ``W(s | y)`` from true to sensed states; ``None`` for perfect sensing.
    true_probs : ndarray, optional
        Probabilities of the true states when a receptor is present.
    description : str
    edges : ndarray, optional
        Bin edges of a discretised signal.
    sensed_values : ndarray, optional
        Signal value each sensed state stands for (Poisson counts divided by the gain);
        defaults to ``values`` (see :attr:`decision_values`).
    density : float, optional
        The population density this environment describes, when known.
    """

    states: np.ndarray
    probs: np.ndarray
    values: np.ndarray
    kind: str = "table"
    channel: np.ndarray | None = None
    true_probs: np.ndarray | None = None
    description: str = ""
    edges: np.ndarray | None = field(default=None)
    sensed_values: np.ndarray | None = field(default=None)
    density: float | None = field(default=None)

    @property
    def decision_values(self) -> np.ndarray:
        """The signal value of each state the cell decides on."""
        return self.values if self.sensed_values is None else self.sensed_values

    @property
    def hidden_probs(self) -> np.ndarray:
        """Probabilities of the true states (equal to ``probs`` without a receptor)."""
        return self.probs if self.true_probs is None else self.true_probs

    def sensed_payoff(self, payoff: np.ndarray) -> np.ndarray:
        """Payoff over sensed states: ``E[u(Y, x) | S = s]`` (the table itself without a receptor).

        ``payoff`` is indexed by true states. Sensed states that never occur get the
        prior-averaged payoff.
        """
        if self.channel is None:
            return payoff
        joint = self.true_probs[:, None] * self.channel  # [y, s]
        weight = joint.sum(axis=0)
        prior = self.true_probs @ payoff
        with np.errstate(invalid="ignore", divide="ignore"):
            posterior = (joint.T @ payoff) / weight[:, None]
        return np.where(weight[:, None] > 0, posterior, prior[None, :])

    def __repr__(self) -> str:
        sensing = "" if self.channel is None else ", through a noisy receptor"
        text = self.description or self.kind
        return f"Environment({text}: {self.states.size} states{sensing})"


def _density(value, name: str = "density") -> float:
    try:
        rho = float(value)
    except (TypeError, ValueError):
        raise InputError(f"`{name}` must be a number in [0, 1] (got {value!r})") from None
    if not (0.0 <= rho <= 1.0):
        raise InputError(f"`{name}` must be in [0, 1] (got {rho!r})")
    return rho


#: Largest neighbourhood ``occupancy`` accepts: every count is a state of the decision problem.
MAX_NEIGHBOURS = 100_000


def occupancy(neighbours, density, *, lattice_sites=None) -> Environment:
    """Number of occupied neighbour sites around a cell at population density ``density``.

    Parameters
    ----------
    neighbours : int
        Neighbourhood size ``N`` (4 von Neumann, 6 hexagonal, 8 Moore, or any ``N >= 1``).
    density : float in [0, 1]
        Fraction of occupied sites.
    lattice_sites : int, optional
        Size ``M`` of a finite lattice. Without it the count is Binomial(N, density) (mean
        field); with it, ``K = round(density * M)`` sites are occupied, the focal cell is one
        of them, and its ``N`` neighbours are drawn without replacement from the other
        ``M - 1`` sites: Hypergeometric(M - 1, K - 1, N).

    Returns
    -------
    Environment
        States ``0..N`` (the count), ``values`` equal to the counts.

    Examples
    --------
    >>> env = occupancy(4, 0.5)
    >>> env.probs.round(4).tolist()
    [0.0625, 0.25, 0.375, 0.25, 0.0625]
    """
    from scipy.special import comb

    if isinstance(neighbours, bool) or not isinstance(neighbours, (int, np.integer)):
        raise InputError(f"`neighbours` must be an integer >= 1 (got {neighbours!r})")
    if neighbours < 1:
        raise InputError(f"`neighbours` must be an integer >= 1 (got {neighbours!r})")
    if neighbours > MAX_NEIGHBOURS:
        raise InputError(
            f"`neighbours` must be at most {MAX_NEIGHBOURS:,} (one state per count; got {neighbours!r})"
        )
    rho = _density(density)
    counts = np.arange(neighbours + 1)
    if lattice_sites is None and neighbours > 1000:
        from scipy import stats

        # comb(N, k) overflows past N ~ 1000: scipy's pmf works in log space.
        probs = stats.binom.pmf(counts, neighbours, rho)
        description = f"occupied neighbours of {neighbours}, Binomial at density {rho:g}"
    elif lattice_sites is None:
        # Binomial(N, rho) written out (numpy's 0**0 = 1 keeps rho = 0 and 1 exact); far cheaper
        # than scipy.stats per call, which matters inside continuation loops.
        probs = comb(neighbours, counts) * rho**counts * (1.0 - rho) ** (neighbours - counts)
        description = f"occupied neighbours of {neighbours}, Binomial at density {rho:g}"
    else:
        if isinstance(lattice_sites, bool) or not isinstance(lattice_sites, (int, np.integer)):
            raise InputError(f"`lattice_sites` must be an integer (got {lattice_sites!r})")
        if lattice_sites <= neighbours:
            raise InputError(
                f"`lattice_sites` must exceed `neighbours` ({neighbours}) (got {lattice_sites})"
            )
        from scipy import stats

        occupied = max(int(round(rho * lattice_sites)), 1)
        probs = stats.hypergeom.pmf(counts, lattice_sites - 1, occupied - 1, neighbours)
        description = (
            f"occupied neighbours of {neighbours} on a {lattice_sites}-site lattice "
            f"with {occupied} cells"
        )
    probs = np.clip(probs, 0.0, None)
    return Environment(
        states=counts, probs=probs / probs.sum(), values=counts.astype(float),
        kind="occupancy", description=description, density=rho,
    )


@dataclass(frozen=True)
class GaussianReceptor:
    """The cell senses the signal plus Gaussian noise of standard deviation ``sd`` (signal units)."""

    sd: float

    def channel(self, values: np.ndarray, edges: np.ndarray) -> np.ndarray:
        from scipy import stats

        sd = as_positive(self.sd, "receptor.sd")
        cdf = stats.norm.cdf((edges[None, :] - values[:, None]) / sd)
        cdf[:, 0], cdf[:, -1] = 0.0, 1.0  # noise beyond the outer edges is read as the end bins
        return np.diff(cdf, axis=1)

    def sensed_values(self, values: np.ndarray, edges: np.ndarray) -> np.ndarray:
        return values


@dataclass(frozen=True)
class PoissonReceptor:
    """The cell counts molecules: a Poisson count with mean ``gain * signal``.

    Sensed states are the counts ``0..max_count``; the last one collects every larger count.
    """

    gain: float
    max_count: int | None = None

    def _top(self, values: np.ndarray) -> int:
        from scipy import stats

        if self.max_count is not None:
            top = int(self.max_count)
        else:
            top = int(stats.poisson.ppf(1 - 1e-12, max(self.gain * values.max(), 1e-12))) + 1
        if top > MAX_COUNT_STATES:
            raise InputError(
                f"`receptor` would need {top + 1} count states (gain x largest signal is "
                f"{self.gain * values.max():.3g}); at most {MAX_COUNT_STATES + 1}: lower the gain, "
                "rescale the signal, or set max_count"
            )
        return top

    def channel(self, values: np.ndarray, edges: np.ndarray) -> np.ndarray:
        from scipy import stats

        gain = as_positive(self.gain, "receptor.gain")
        if (values < 0).any():
            raise InputError("`receptor` Poisson counts need a non-negative signal (got a negative bin)")
        counts = np.arange(self._top(values) + 1)
        w = stats.poisson.pmf(counts[None, :], gain * values[:, None])
        w[:, -1] = stats.poisson.sf(counts[-2] if counts.size > 1 else -1, gain * values)
        return w

    def sensed_values(self, values: np.ndarray, edges: np.ndarray) -> np.ndarray:
        return np.arange(self._top(values) + 1, dtype=float) / as_positive(self.gain, "receptor.gain")


def continuous_signal(distribution, edges, *, receptor=None, description: str = "") -> Environment:
    """A continuous signal (nutrient, oxygen, ligand) discretised into bins by exact CDF differences.

    Parameters
    ----------
    distribution : frozen ``scipy.stats`` continuous distribution
        E.g. ``scipy.stats.gamma(a=2, scale=1 + rho)``; its parameters may depend on density.
    edges : array_like, shape (m + 1,)
        Increasing bin edges; may start at ``-inf`` and end at ``inf``. They must cover the
        support: at most 1e-9 of probability may fall outside.
    receptor : GaussianReceptor or PoissonReceptor, optional
        Noisy sensing: the cell decides on the sensed value. Gaussian noise is binned with the
        same edges; Poisson sensing yields count states.
    description : str, optional

    Returns
    -------
    Environment
        ``values`` are the bin centres (the finite edge for a half-infinite bin), ``states``
        the bin indices (or counts under Poisson sensing).
    """
    if not hasattr(distribution, "cdf"):
        raise InputError(
            f"`distribution` must be a frozen scipy.stats distribution (got {type(distribution).__name__})"
        )
    bounds = np.asarray(edges, dtype=float)
    if bounds.ndim != 1 or bounds.size < 2 or np.isnan(bounds).any():
        raise InputError(f"`edges` must be a 1-D array of at least 2 numbers (got {edges!r})")
    if not (np.diff(bounds) > 0).all():
        raise InputError("`edges` must be strictly increasing")
    cdf = distribution.cdf(bounds)
    if not np.isfinite(cdf).all():
        raise InputError(
            "`distribution` parameters are invalid: its CDF is not a number at the edges "
            f"(got {getattr(distribution.dist, 'name', 'distribution')} with {distribution.kwds or distribution.args})"
        )
    outside = float(cdf[0] + (1.0 - cdf[-1]))
    if not outside <= COVERAGE_TOLERANCE:
        raise InputError(
            f"`edges` must cover the distribution's support: {outside:.3g} of the probability "
            f"lies outside [{bounds[0]:g}, {bounds[-1]:g}] (tolerance {COVERAGE_TOLERANCE:g})"
        )
    probs = np.clip(np.diff(cdf), 0.0, None)
    probs[0] += cdf[0]
    probs[-1] += 1.0 - cdf[-1]
    probs /= probs.sum()
    centres = 0.5 * (bounds[1:] + bounds[:-1])
    if not np.isfinite(bounds[0]):
        centres[0] = bounds[1]
    if not np.isfinite(bounds[-1]):
        centres[-1] = bounds[-2]
    text = description or f"{getattr(distribution.dist, 'name', 'signal')} signal in {probs.size} bins"
    if receptor is None:
        return Environment(
            states=np.arange(probs.size), probs=probs, values=centres, kind="signal",
            description=text, edges=bounds,
        )
    channel = as_stochastic_matrix(receptor.channel(centres, bounds), "receptor channel")
    sensed = probs @ channel
    return Environment(
        states=np.arange(sensed.size), probs=sensed, values=centres, kind="signal",
        channel=channel, true_probs=probs, description=text + " (noisy receptor)", edges=bounds,
        sensed_values=receptor.sensed_values(centres, bounds),
    )


#: Binning rules understood by :func:`empirical` (numpy's histogram rules).
BINNING_RULES = ("auto", "fd", "sturges", "doane", "scott", "rice", "sqrt", "stone")


def empirical(samples, *, bins="fd", receptor=None, description: str = "") -> Environment:
    """A histogram of measured samples (e.g. local densities from images).

    Parameters
    ----------
    samples : array_like, 1-D
        Finite measured values.
    bins : str or array_like
        A binning rule (one of :data:`BINNING_RULES`, numpy's definitions; default
        Freedman–Diaconis ``"fd"``) or explicit increasing edges covering every sample.
    receptor : GaussianReceptor or PoissonReceptor, optional
        Noisy sensing of the measured signal, as in :func:`continuous_signal`: the histogram
        gives the true states (bin centres) and their probabilities, the receptor the channel
        ``W(s | y)`` from each bin's centre to the sensed states; the cell decides on ``s``.
    description : str, optional
    """
    data = as_array(samples, "samples", ndim=1)
    if isinstance(bins, str):
        if bins not in BINNING_RULES:
            raise InputError(
                f"`bins` must be one of {', '.join(repr(b) for b in BINNING_RULES)} or edges (got {bins!r})"
            )
        edges = np.histogram_bin_edges(data, bins=bins)
        rule = bins
    else:
        edges = as_array(bins, "bins", ndim=1)
        if edges.size < 2 or not (np.diff(edges) > 0).all():
            raise InputError("`bins` edges must be strictly increasing, at least 2 of them")
        if data.min() < edges[0] or data.max() > edges[-1]:
            raise InputError(
                f"`bins` edges [{edges[0]:g}, {edges[-1]:g}] must cover every sample "
                f"(got samples in [{data.min():g}, {data.max():g}])"
            )
        rule = "given edges"
    counts, edges = np.histogram(data, bins=edges)
    probs = counts / counts.sum()
    centres = 0.5 * (edges[1:] + edges[:-1])
    text = description or f"histogram of {data.size} samples ({rule}, {probs.size} bins)"
    if receptor is None:
        return Environment(states=np.arange(probs.size), probs=probs, values=centres, kind="empirical",
                           edges=edges, description=text)
    if not hasattr(receptor, "channel"):
        raise InputError(f"`receptor` must be a GaussianReceptor or a PoissonReceptor (got {type(receptor).__name__})")
    channel = as_stochastic_matrix(receptor.channel(centres, edges), "receptor channel")
    sensed = probs @ channel
    return Environment(
        states=np.arange(sensed.size), probs=sensed, values=centres, kind="empirical", channel=channel,
        true_probs=probs, edges=edges, description=text + " (noisy receptor)",
        sensed_values=receptor.sensed_values(centres, edges),
    )


def product_environment(*environments: Environment) -> Environment:
    """Independent signals sensed together: states are combinations, probabilities multiply.

    State ``k`` is the combination ``np.unravel_index(k, shape)`` of the components' states;
    ``values[k]`` has one column per component. Receptors are combined as independent
    channels (Kronecker product).
    """
    if not environments:
        raise InputError("`environments` must contain at least one Environment (got none)")
    for i, env in enumerate(environments):
        if not isinstance(env, Environment):
            raise InputError(f"`environments[{i}]` must be an Environment (got {type(env).__name__})")
    probs = np.ones(1)
    hidden = np.ones(1)
    channel = np.ones((1, 1))
    columns = []
    for env in environments:
        probs = np.outer(probs, env.probs).ravel()
        hidden = np.outer(hidden, env.hidden_probs).ravel()
        own = env.channel if env.channel is not None else np.eye(env.probs.size)
        channel = np.kron(channel, own)
        columns.append(env.values if env.values.ndim == 2 else env.values[:, None])
    grids = np.meshgrid(*[np.arange(c.shape[0]) for c in columns], indexing="ij")
    values = np.column_stack(
        [col[g.ravel()] for col, g in zip(columns, grids)]
    )
    noisy = any(env.channel is not None for env in environments)
    sensed = None
    if noisy:
        sensed_columns = [env.decision_values if env.decision_values.ndim == 2 else env.decision_values[:, None]
                          for env in environments]
        sensed_grids = np.meshgrid(*[np.arange(c.shape[0]) for c in sensed_columns], indexing="ij")
        sensed = np.column_stack([col[g.ravel()] for col, g in zip(sensed_columns, sensed_grids)])
    return Environment(
        states=np.arange(probs.size), probs=probs, values=values, kind="product",
        channel=channel if noisy else None, true_probs=hidden if noisy else None,
        sensed_values=sensed,
        description=" x ".join(env.description or env.kind for env in environments),
    )


def as_environment(value, name: str = "environment") -> Environment:
    """An :class:`Environment`, or a plain probability vector wrapped as one."""
    if isinstance(value, Environment):
        if not math.isclose(float(value.probs.sum()), 1.0, abs_tol=1e-9):
            raise InputError(f"`{name}` probabilities must sum to 1 (got {float(value.probs.sum())!r})")
        return value
    probs = as_distribution(value, name)
    return Environment(states=np.arange(probs.size), probs=probs, values=np.arange(probs.size, dtype=float))
