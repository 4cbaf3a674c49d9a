"""Space-filling designs: lists of points (not factorial grids) to scan over.

A :class:`Design` holds one row per point. Latin hypercube and scrambled Sobol' points come
from :mod:`scipy.stats.qmc`; the Saltelli design stacks the matrices ``A``, ``B`` and
``A_B^(i)`` that the Sobol' index estimators need (Saltelli et al. 2010).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np

from .._errors import InputError
from .._validate import as_array
from ._seeds import root_seed

#: Kinds of design, as stored in a scan's ``design`` attribute.
DESIGN_KINDS = ("points", "latin-hypercube", "sobol", "saltelli")
#: Dimension and coordinate names a scan reserves for itself.
RESERVED = ("point", "replicate", "seed")


def check_name(name, what: str) -> str:
    """A parameter name: a non-empty string that is not one of :data:`RESERVED`."""
    if not isinstance(name, str) or not name:
        raise InputError(f"{what} names must be non-empty strings (got {name!r})")
    if name in RESERVED:
        raise InputError(f"{what} name {name!r} is reserved by scans (reserved: {', '.join(RESERVED)})")
    return name


@dataclass(frozen=True, repr=False, eq=False)
class Design:
    """Points to scan over, one row per point.

    Attributes
    ----------
    names : tuple of str
        Parameter names, one per column.
    values : ndarray, shape (points, parameters)
        Parameter values (float64).
    kind : str
        ``"points"``, ``"latin-hypercube"``, ``"sobol"`` or ``"saltelli"``.
    base_samples : int
        For a Saltelli design, the number ``N`` of base samples (the design has
        ``N (k + 2)`` points); 0 otherwise.

    Examples
    --------
    >>> design = Design.from_columns({"beta": [0.5, 1.0, 2.0], "death_scale": [1.0, 0.9, 1.1]})
    >>> design
    Design(points: 3 points over beta, death_scale)
    >>> design.point(1)
    {'beta': 1.0, 'death_scale': 0.9}
    """

    names: tuple
    values: np.ndarray
    kind: str = "points"
    base_samples: int = 0

    def __post_init__(self):
        names = tuple(check_name(n, "design parameter") for n in self.names)
        if not names:
            raise InputError("`names` must name at least one parameter (got none)")
        if len(set(names)) != len(names):
            raise InputError(f"`names` must be unique (got {list(names)})")
        values = as_array(self.values, "values", ndim=2)
        if values.shape[1] != len(names):
            raise InputError(
                f"`values` must have one column per name ({len(names)}) (got shape {values.shape})"
            )
        if self.kind not in DESIGN_KINDS:
            raise InputError(f"`kind` must be one of {', '.join(map(repr, DESIGN_KINDS))} (got {self.kind!r})")
        values.setflags(write=False)
        object.__setattr__(self, "names", names)
        object.__setattr__(self, "values", values)

    @classmethod
    def from_columns(cls, columns: Mapping) -> "Design":
        """A design from ``name -> values``, all of the same length (point ``i`` takes entry ``i``)."""
        if not isinstance(columns, Mapping) or not columns:
            raise InputError("`columns` must map at least one parameter name to its values")
        arrays = [as_array(v, f"columns[{k!r}]", ndim=1) for k, v in columns.items()]
        sizes = {a.size for a in arrays}
        if len(sizes) != 1:
            raise InputError(f"`columns` must all have the same length (got lengths {sorted(sizes)})")
        return cls(tuple(columns), np.column_stack(arrays))

    def __len__(self) -> int:
        return self.values.shape[0]

    def point(self, i: int) -> dict:
        """Point ``i`` as ``{name: value}``."""
        return dict(zip(self.names, self.values[i].tolist()))

    def __repr__(self) -> str:
        return f"Design({self.kind}: {len(self)} points over {', '.join(self.names)})"


def _bounds(bounds) -> tuple[tuple, np.ndarray, np.ndarray]:
    if not isinstance(bounds, Mapping) or not bounds:
        raise InputError("`bounds` must map at least one parameter name to (low, high)")
    names, lows, highs = [], [], []
    for name, pair in bounds.items():
        check_name(name, "`bounds`")
        low_high = as_array(pair, f"bounds[{name!r}]", ndim=1)
        if low_high.size != 2 or not low_high[0] < low_high[1]:
            raise InputError(f"`bounds[{name!r}]` must be (low, high) with low < high (got {list(pair)!r})")
        names.append(name)
        lows.append(low_high[0])
        highs.append(low_high[1])
    return tuple(names), np.array(lows), np.array(highs)


def _engine(kind: str, d: int, seed):
    """A scipy.stats.qmc engine seeded with a Generator (``rng=`` from SciPy 1.15, ``seed=`` before)."""
    from scipy.stats import qmc

    cls = {"latin-hypercube": qmc.LatinHypercube, "sobol": qmc.Sobol}[kind]
    generator = np.random.default_rng(root_seed(seed))
    try:
        return cls(d=d, rng=generator)
    except TypeError:
        return cls(d=d, seed=generator)


def _count(n, name: str = "n") -> int:
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
        raise InputError(f"`{name}` must be a positive integer (got {n!r})")
    return int(n)


def _power_of_two(n) -> int:
    n = _count(n)
    if n & (n - 1):
        raise InputError(
            f"`n` must be a power of 2 for Sobol' points, which keeps their balance properties "
            f"(got {n}; nearest {1 << (n.bit_length() - 1)} or {1 << n.bit_length()}); "
            "latin_hypercube takes any size"
        )
    return n


def latin_hypercube(bounds, n, *, seed=0) -> Design:
    """``n`` Latin hypercube points in the box ``bounds`` (McKay, Beckman & Conover 1979).

    Parameters
    ----------
    bounds : mapping
        ``name -> (low, high)``.
    n : int
        Number of points.
    seed : int
        Root seed (same seed, same points).

    Returns
    -------
    Design

    References
    ----------
    McKay, Beckman & Conover (1979), *Technometrics* 21:239.

    Examples
    --------
    >>> design = latin_hypercube({"beta": (0.1, 5.0)}, 4, seed=1)
    >>> sorted(((design.values[:, 0] - 0.1) / 4.9 * 4).astype(int).tolist())  # one per stratum
    [0, 1, 2, 3]
    """
    from scipy.stats import qmc

    names, lows, highs = _bounds(bounds)
    n = _count(n)
    unit = _engine("latin-hypercube", len(names), seed).random(n)
    return Design(names, qmc.scale(unit, lows, highs), kind="latin-hypercube")


def sobol_points(bounds, n, *, seed=0) -> Design:
    """``n`` scrambled Sobol' points in the box ``bounds`` (Sobol' 1967; Owen 1998 scrambling).

    ``n`` must be a power of 2. Same ``seed``, same points.

    References
    ----------
    Sobol' (1967), *USSR Comput. Math. Math. Phys.* 7:86; Owen (1998), *J. Complexity* 14:466.
    """
    from scipy.stats import qmc

    names, lows, highs = _bounds(bounds)
    n = _power_of_two(n)
    unit = _engine("sobol", len(names), seed).random_base2(n.bit_length() - 1)
    return Design(names, qmc.scale(unit, lows, highs), kind="sobol")


def saltelli_design(bounds, n, *, seed=0) -> Design:
    """The design for Sobol' sensitivity indices: ``A``, ``B`` and every ``A_B^(i)``.

    ``A`` and ``B`` are the first and last ``k`` columns of ``n`` scrambled Sobol' points in
    ``2k`` dimensions; ``A_B^(i)`` is ``A`` with column ``i`` taken from ``B``. The design
    stacks ``A, B, A_B^(1), ..., A_B^(k)``: ``n (k + 2)`` points. Pass a scan of it to
    :func:`sobol_indices`.

    Parameters
    ----------
    bounds : mapping
        ``name -> (low, high)``: the inputs are independent and uniform on these ranges.
    n : int
        Base samples, a power of 2.
    seed : int

    References
    ----------
    Saltelli, Annoni, Azzini, Campolongo, Ratto & Tarantola (2010), *Comput. Phys. Commun.*
    181:259.

    Examples
    --------
    >>> design = saltelli_design({"x1": (0, 1), "x2": (0, 1)}, 8, seed=0)
    >>> len(design), design.base_samples
    (32, 8)
    """
    from scipy.stats import qmc

    names, lows, highs = _bounds(bounds)
    n = _power_of_two(n)
    k = len(names)
    unit = _engine("sobol", 2 * k, seed).random_base2(n.bit_length() - 1)
    a, b = unit[:, :k], unit[:, k:]
    blocks = [a, b]
    for i in range(k):
        mixed = a.copy()
        mixed[:, i] = b[:, i]
        blocks.append(mixed)
    return Design(names, qmc.scale(np.vstack(blocks), lows, highs), kind="saltelli", base_samples=n)
