"""Bifurcation diagrams of a mean-field model in one parameter: branches of positive
equilibria by pseudo-arclength continuation, transcritical points and folds."""

from __future__ import annotations

import numpy as np
from scipy.optimize import brentq

from .._errors import InputError
from ._continuation import BifurcationDiagram, Branch, locate_fold, trace_branch


def _fold_by_counting(family, value: float, rho: float, lo: float, hi: float):
    """A change in the number of positive equilibria near ``value``, located by bisection."""

    def count(v):
        return len(family.equilibria(v)) - 1

    width = 1e-3 * (hi - lo)
    for _ in range(8):
        a, b = max(lo, value - width), min(hi, value + width)
        n_a, n_b = count(a), count(b)
        if n_a != n_b:
            break
        width *= 3
    else:
        return None
    while b - a > 1e-11 * max(1.0, abs(a)):
        middle = 0.5 * (a + b)
        if count(middle) == n_a:
            a = middle
        else:
            b = middle
    more = a if n_a > n_b else b
    roots = sorted((e.density for e in family.equilibria(more)[1:]), key=lambda r: abs(r - rho))
    density = float(np.mean(roots[:2])) if len(roots) >= 2 else float(rho)
    return family.point(0.5 * (a + b), "fold", density)


def _clip_to_range(H, densities, betas, stable, lo, hi):
    """Replace a final step that left the range by the branch's crossing of its edge."""
    if betas.size >= 2 and not (lo <= betas[-1] <= hi):
        edge = hi if betas[-1] > hi else lo
        w = (edge - betas[-2]) / (betas[-1] - betas[-2])
        guess = densities[-2] + w * (densities[-1] - densities[-2])
        a, b = sorted((densities[-2], densities[-1]))
        a, b = max(a - 1e-3, 1e-12), min(b + 1e-3, 1.0)
        try:
            guess = brentq(lambda r: H(r, edge), a, b, xtol=1e-14)
        except ValueError:
            pass  # no sign change in the bracket: keep the interpolated point
        densities = np.r_[densities[:-1], guess]
        betas = np.r_[betas[:-1], edge]
        stable = np.r_[stable[:-1], stable[-2]]
    keep = (densities > 0) & (densities <= 1)
    return densities[keep], betas[keep], stable[keep]


def _near(branch, rho: float, beta: float, lo: float, hi: float) -> bool:
    """Whether ``(rho, beta)`` lies on an already traced branch (scaled distance < 1e-3)."""
    scaled = np.hypot(branch.densities - rho, (branch.betas - beta) / (hi - lo))
    return bool(scaled.min() < 1e-3)


def branch_stability(family, densities, values, slopes) -> np.ndarray:
    """Stability of each point of a finite-``tau`` branch from as few Jacobians as possible.

    At an equilibrium ``det J = (-1)^(n+1) rho prod_x (1/tau - a_x) dH/drho`` (the Jacobian is
    diagonal plus rank one; matrix determinant lemma), so a real eigenvalue crosses zero only
    where ``dH/drho`` changes sign. The branch is cut there; each stretch is judged by full
    Jacobians at its first, middle and last points and filled when they agree, else point by
    point (which also catches a complex pair crossing inside the stretch at those points).
    """
    stable = np.zeros(densities.size, dtype=bool)
    cuts = np.flatnonzero(np.diff(np.sign(slopes)) != 0) + 1
    for part in np.split(np.arange(densities.size), cuts):
        if part.size == 0:
            continue
        probe = sorted({part[0], part[part.size // 2], part[-1]})
        judged = {j: family.equilibrium(densities[j], values[j]).stable for j in probe}
        if len(set(judged.values())) == 1:
            stable[part] = judged[probe[0]]
        else:
            for j in part:
                stable[j] = judged[j] if j in judged else family.equilibrium(densities[j], values[j]).stable
    return stable


def diagram(
    family, start, stop, *, finite_tau: bool, samples: int = 41, ds: float = 0.01, on_progress=None
) -> BifurcationDiagram:
    """Branches of equilibria for ``family``'s parameter in ``[start, stop]`` (see
    :meth:`MeanField.continuation`). ``on_progress(done, total)`` after each sample of the
    zero state and each branch start (``total`` is known once the starts are)."""

    def report(done, total):
        if on_progress is not None:
            on_progress(done, total)

    lo = family.check(start, "start")
    hi = family.check(stop, "stop")
    if not hi > lo:
        raise InputError(f"`stop` must exceed `start` (got {lo!r} and {hi!r})")
    grid = np.linspace(lo, hi, samples)
    zero = np.empty(samples)
    for i, v in enumerate(grid):
        zero[i] = family.low_density_growth(v)
        report(i + 1, samples + 1)
    critical = []
    for i in range(samples - 1):
        if zero[i] == 0.0:
            critical.append(family.point(float(grid[i]), "transcritical", 0.0))
        elif zero[i] * zero[i + 1] < 0:
            value = brentq(family.low_density_growth, grid[i], grid[i + 1], xtol=1e-13,
                           rtol=4 * np.finfo(float).eps)
            critical.append(family.point(float(value), "transcritical", 0.0))
    H = family.reduced
    starts = []
    for value, direction in ((lo, (0.0, 1.0)), (hi, (0.0, -1.0))):
        for eq in family.equilibria(value)[1:]:
            starts.append((eq.density, value, direction))
    for point in critical:
        starts.append((1e-9, point.value, (1.0, 0.0)))
    branches = []
    for k, (rho, value, direction) in enumerate(starts):
        report(samples + k, samples + len(starts))
        if any(_near(branch, rho, value, lo, hi) for branch in branches):
            continue
        densities, values, slopes, ended = trace_branch(
            H, rho, value, direction=direction, beta_min=lo, beta_max=hi, ds=ds
        )
        if not finite_tau:
            # rho' = rho g(rho): the eigenvalue at a positive root is rho g'(rho).
            stable = slopes < 0
        else:
            stable = branch_stability(family, densities, values, slopes)
        densities, values, stable = _clip_to_range(H, densities, values, stable, lo, hi)
        if densities.size == 0:
            continue
        branches.append(Branch(densities, values, stable, ended))
        turns = np.sign(np.diff(values))
        for j in range(1, turns.size):
            if turns[j - 1] != 0 and turns[j] != 0 and turns[j - 1] != turns[j]:
                rho_f, value_f = locate_fold(
                    H, densities[j - 1], densities[j + 1], values[j], maximum=turns[j - 1] > 0
                )
                critical.append(family.point(value_f, "fold", rho_f))
    # A branch whose corrector failed usually ended at a kink of the law (a phenotype
    # entering or leaving), where two branches can meet in a non-smooth fold. Locate such
    # points by counting equilibria on either side and bisecting.
    for branch in branches:
        if branch.failed:
            found = _fold_by_counting(family, branch.values[-1], branch.densities[-1], lo, hi)
            # Two failed branches meeting at one kink give the same point (to ~1e-6).
            if found is not None and all(
                abs(found.value - c.value) > 1e-5 * max(1.0, abs(c.value)) for c in critical
            ):
                critical.append(found)
    report(samples + len(starts), samples + len(starts))
    critical.sort(key=lambda c: c.value)
    # Two branches traced from different starts can share a turning point: keep it once.
    unique = []
    for point in critical:
        if not any(
            point.kind == kept.kind and abs(point.value - kept.value) <= 1e-7 * max(1.0, abs(kept.value))
            for kept in unique
        ):
            unique.append(point)
    return BifurcationDiagram(
        parameter=family.parameter, value_range=(lo, hi), branches=tuple(branches),
        zero_values=grid, zero_stable=zero < 0, critical_points=tuple(unique),
    )
