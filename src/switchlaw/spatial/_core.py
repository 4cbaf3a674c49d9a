"""Method of lines for reaction–diffusion systems on a line, a disc or a ball.

Finite volumes on cells of width ``dx`` with centres ``r_i = (i + 1/2) dx``; the flux through
the face at radius ``r`` is weighted by its area ``r^(d-1)`` and each cell's change is divided by
its volume ``(r_out^d - r_in^d) / d``, so the radially symmetric Laplacian
``u'' + (d - 1) u' / r`` needs no special case at the origin (the face there has zero area).
Both ends are closed (no flux). Unknowns are ordered cell by cell, species within a cell, so
the Jacobian is banded (bandwidth = number of species) and is assembled exactly as a sparse
matrix for the stiff integrator (``scipy.integrate.solve_ivp``, BDF).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

DIMENSIONS = (1, 2, 3)


@dataclass(frozen=True)
class Grid:
    """Cells of width ``dx`` covering ``[0, length]`` in ``dimension`` (1: line, 2/3: radius)."""

    length: float
    dx: float
    dimension: int = 1

    @property
    def cells(self) -> int:
        return int(round(self.length / self.dx))

    @property
    def centres(self) -> np.ndarray:
        return (np.arange(self.cells) + 0.5) * self.dx

    def laplacian(self):
        """Sparse finite-volume Laplacian with closed ends (CSR, shape (cells, cells))."""
        from scipy import sparse

        n, dx, d = self.cells, self.dx, self.dimension
        faces = np.arange(n + 1) * dx
        area = faces ** (d - 1) if d > 1 else np.ones(n + 1)
        volume = (faces[1:] ** d - faces[:-1] ** d) / d
        inner = area[1:-1] / dx  # conductance of each inner face (times dx^-1)
        upper = inner / volume[:-1]  # flux into cell i from cell i+1
        lower = inner / volume[1:]  # flux into cell i+1 from cell i
        diagonal = np.zeros(n)
        diagonal[:-1] -= upper
        diagonal[1:] -= lower
        return sparse.diags([lower, diagonal, upper], [-1, 0, 1], format="csr")


@dataclass(frozen=True)
class System:
    """``u_t = Laplacian(D u) + R(u)`` for ``species`` fields, or one field with a potential.

    ``reaction(u)`` and ``jacobian(u)`` take ``u`` of shape (cells, species) and return
    shapes (cells, species) and (cells, species, species). With ``potential`` (one species
    only) the transport is ``Laplacian(w(u))`` with ``w`` and its slope ``potential_slope``
    (the fast-switching limit, ``w = D(rho) rho``); ``diffusion`` is then unused.
    """

    reaction: Callable
    jacobian: Callable
    diffusion: np.ndarray
    potential: Callable | None = None
    potential_slope: Callable | None = None

    @property
    def species(self) -> int:
        return int(np.size(self.diffusion))


@dataclass(frozen=True)
class Solution:
    times: np.ndarray
    fields: np.ndarray  # (times, cells, species)
    success: bool
    message: str
    steps: int


def integrate(system: System, grid: Grid, initial: np.ndarray, times: np.ndarray, *,
              rtol: float = 1e-6, atol: float = 1e-9) -> Solution:
    """Integrate ``system`` on ``grid`` from ``initial`` (cells, species), saving at ``times``."""
    from scipy import sparse
    from scipy.integrate import solve_ivp

    n, m = grid.cells, system.species
    lap = grid.laplacian()
    block_rows = (np.arange(n)[:, None, None] * m + np.arange(m)[None, :, None]).repeat(m, axis=2)
    block_cols = (np.arange(n)[:, None, None] * m + np.arange(m)[None, None, :]).repeat(m, axis=1)
    block_rows, block_cols = block_rows.ravel(), block_cols.ravel()

    if system.potential is None:
        transport = sparse.kron(lap, sparse.diags(np.asarray(system.diffusion, float)), format="csr")

        def rhs(_t, z):
            u = z.reshape(n, m)
            return transport @ z + system.reaction(u).ravel()

        def jac(_t, z):
            u = z.reshape(n, m)
            local = sparse.csr_matrix((system.jacobian(u).ravel(), (block_rows, block_cols)), shape=(n * m, n * m))
            return (transport + local).tocsc()
    else:
        if m != 1:
            raise ValueError("a transport potential needs exactly one species")

        def rhs(_t, z):
            u = z.reshape(n, 1)
            return lap @ system.potential(z) + system.reaction(u).ravel()

        def jac(_t, z):
            u = z.reshape(n, 1)
            local = sparse.diags(system.jacobian(u).ravel())
            return (lap @ sparse.diags(system.potential_slope(z)) + local).tocsc()

    solution = solve_ivp(rhs, (float(times[0]), float(times[-1])), np.asarray(initial, float).ravel(),
                         method="BDF", t_eval=times, jac=jac, rtol=rtol, atol=atol)
    fields = solution.y.T.reshape(-1, n, m)
    return Solution(solution.t, fields, bool(solution.success), str(solution.message), int(solution.nfev))
