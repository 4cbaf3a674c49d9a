"""Benchmark: continuation of equilibrium branches and regime maps.

Targets (issue: population consequences): continuation of a 1000-point branch with its critical
points in under a second; a beta x death-rate regime map by critical-point continuation against
the same map by brute-force classification of every grid point (ratio printed). Issue 17 §4:
continuation against a vectorised numpy brute force over a density grid at the same accuracy
(target >= 5x). Issue 13 §4: finite-tau equilibria, continuation and regime maps at most 3x the
cost of the fast-switching ones. Scenario: invented go-or-grow cells on a hexagonal lattice
(max-entropy law).

Run:  python benchmarks/bench_population.py [--quick]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

import switchlaw as sl

PAYOFF = {"divide": sl.Linear(1 / 6, 0.0), "move": sl.Linear(-1 / 6, 1.0)}


def build(death: float = 0.27, tau=None) -> sl.MeanField:
    return sl.MeanField(PAYOFF, lambda rho: sl.occupancy(6, rho), division=[1.0, 0.0],
                        death=[death, death], objective="max-entropy", tau=tau)


def timed(function):
    start = time.perf_counter()
    result = function()
    return time.perf_counter() - start, result


def brute_force_map(model, betas, scales):
    family = model.along("death_scale", beta=betas[0])
    codes = np.empty((scales.size, betas.size), dtype=int)
    for i, scale in enumerate(scales):
        variant = family.model_at(scale)
        for j, beta in enumerate(betas):
            codes[i, j] = sl.REGIMES.index(variant.regime(beta))
    return codes


def median_time(function, runs: int = 3):
    times, result = [], None
    for _ in range(runs):
        seconds, result = timed(function)
        times.append(seconds)
    return float(np.median(times)), result


# ------------------------------------------------------------------ the brute-force baseline
def grid_roots(model, rho, beta, cache):
    """Positive roots of the reduced equation at ``beta``: sign changes on the density grid,
    placed by linear interpolation (one vectorised call over all densities)."""
    h = model.reduced(rho, beta, cache=cache)
    cells = np.flatnonzero(np.sign(h[1:]) * np.sign(h[:-1]) < 0)
    roots = rho[cells] - h[cells] * (rho[cells + 1] - rho[cells]) / (h[cells + 1] - h[cells])
    return roots[roots > 0]


def brute_force_diagram(model, lo, hi, *, betas, densities, tol=1e-6):
    """What a numpy user writes: the reduced equation on a densities x betas grid, roots by
    sign changes, and each change in the number of roots bisected in beta to ``tol``. One
    LawCache, so each density's decision problem is built once for all betas."""
    cache = sl.LawCache()
    rho = np.linspace(0.0, 1.0, densities)
    grid = np.linspace(lo, hi, betas)
    found = [grid_roots(model, rho, b, cache) for b in grid]
    counts = np.array([r.size for r in found])
    critical = []
    for i in np.flatnonzero(np.diff(counts)):
        a, b = grid[i], grid[i + 1]
        while b - a > tol:
            middle = 0.5 * (a + b)
            if grid_roots(model, rho, middle, cache).size == counts[i]:
                a = middle
            else:
                b = middle
        critical.append(0.5 * (a + b))
    return grid, found, critical


def interpolation_error(model, grid, found, densities) -> float:
    """Largest distance of the brute force's roots from the roots polished by Brent's method."""
    from scipy.optimize import brentq

    step = 1.0 / (densities - 1)
    worst = 0.0
    for beta, roots in zip(grid[::5], found[::5]):
        for r in roots:
            a, b = step * np.floor(r / step), step * np.floor(r / step) + step
            exact = brentq(lambda x: model.reduced(x, beta), max(a, 0.0), min(b, 1.0), xtol=1e-15)
            worst = max(worst, abs(exact - r))
    return worst


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller grids")
    args = parser.parse_args()
    print(f"switchlaw {sl.__version__}: population benchmark ({'quick' if args.quick else 'full'} run)")

    # 1. A long branch: a fresh model each run (no cached laws), ds chosen for ~1000 points.
    runs = []
    for _ in range(3):
        seconds, diagram = timed(lambda: build().continuation(0.05, 20.0, ds=0.0012))
        runs.append(seconds)
    points = sum(b.densities.size for b in diagram.branches)
    median = float(np.median(runs))
    print(f"1. continuation in beta: {points} branch points, {len(diagram.critical_points)} critical "
          f"points ({', '.join(f'{c.kind} {c.value:.6g}' for c in diagram.critical_points)})")
    print(f"   median {median:.2f} s over 3 fresh runs; per 1000 points {1000 * median / points:.2f} s; "
          f"target < 1 s per 1000-point branch: {'PASS' if 1000 * median / points < 1 else 'FAIL'}")

    # 2. Regime maps: continuation of critical points vs classifying every point.
    rows = 40 if args.quick else 200
    betas = np.linspace(0.05, 20.0, 200)
    scales = np.linspace(0.6, 1.4, rows)
    cont_s, regime_map = timed(lambda: build(0.25).regime_map(betas, "death_scale", scales))
    sample = np.arange(0, rows, max(rows // 8, 1))
    brute_s, codes = timed(lambda: brute_force_map(build(0.25), betas, scales[sample]))
    brute_all = brute_s * rows / sample.size
    agree = float((regime_map.codes[sample] == codes).mean())
    print(f"2. regime map {rows} x {betas.size} (death scale x beta):")
    print(f"   by continuation of critical points: {cont_s:.1f} s for the whole map")
    print(f"   brute force (every point classified): {brute_s:.1f} s for {sample.size} rows, "
          f"~{brute_all:.0f} s extrapolated to {rows} rows")
    print(f"   RATIO brute force / continuation = {brute_all / cont_s:.1f}x; "
          f"cells agreeing on the sampled rows {100 * agree:.1f} %")


    # 3. Continuation vs the vectorised brute force, both to at least 1e-6 in density and beta.
    lo, hi = 0.05, 20.0
    cont_s, diagram = median_time(lambda: build().continuation(lo, hi))
    n_betas = sum(b.densities.size for b in diagram.branches)
    model = build()
    for densities in (201, 401, 801, 1601, 3201, 6401):
        grid, found, critical = brute_force_diagram(model, lo, hi, betas=n_betas, densities=densities)
        error = interpolation_error(model, grid, found, densities)
        if error <= 1e-6:
            break
    brute_s, (grid, found, critical) = median_time(
        lambda: brute_force_diagram(build(), lo, hi, betas=n_betas, densities=densities))
    located = [c.value for c in diagram.critical_points]
    gap = max((min(abs(c - v) for v in located) for c in critical), default=float("nan"))
    print(f"3. continuation in beta ({n_betas} branch points, critical points to ~1e-10) vs brute force "
          f"({n_betas} betas x {densities} densities, density error {error:.1e}, critical betas "
          f"bisected to 1e-6; largest gap to continuation's {gap:.1e}):")
    print(f"   continuation median {cont_s:.3f} s, brute force median {brute_s:.3f} s over 3 fresh runs")
    print(f"   RATIO brute force / continuation = {brute_s / cont_s:.2f}x (target >= 5x: "
          f"{'PASS' if brute_s / cont_s >= 5 else 'FAIL'})")

    # 4. Finite tau vs fast switching: equilibria, continuation, regime map (fresh models).
    rows = 6 if args.quick else 16
    map_betas = np.linspace(0.05, 20.0, 40)
    map_scales = np.linspace(0.8, 1.2, rows)
    eq_betas = np.linspace(0.05, 20.0, 40)
    print(f"4. finite tau (0.5) / fast switching, medians over 3 fresh runs (target <= 3x):")
    for name, job in (
        ("equilibria at 40 betas", lambda m: [m.equilibria(b) for b in eq_betas]),
        ("continuation in beta", lambda m: m.continuation(lo, hi)),
        (f"regime map {rows} x 40", lambda m: m.regime_map(map_betas, "death_scale", map_scales)),
    ):
        fast, _ = median_time(lambda: job(build()))
        slow, _ = median_time(lambda: job(build(tau=0.5)))
        print(f"   {name}: fast {fast:.2f} s, finite tau {slow:.2f} s; RATIO {slow / fast:.2f}x "
              f"({'PASS' if slow / fast <= 3 else 'FAIL'})")


if __name__ == "__main__":
    main()