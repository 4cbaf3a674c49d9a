"""Benchmark: continuation of equilibrium branches and regime maps.

Targets (issue: population consequences): continuation of a 1000-point branch with its critical
points in under a second; a beta x death-rate regime map by critical-point continuation against
the same map by brute-force classification of every grid point (ratio printed). Scenario:
invented go-or-grow cells on a hexagonal lattice (max-entropy law).

Run:  python benchmarks/bench_population.py [--quick]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

import switchlaw as sl

PAYOFF = {"divide": sl.Linear(1 / 6, 0.0), "move": sl.Linear(-1 / 6, 1.0)}


def build(death: float = 0.27) -> sl.MeanField:
    return sl.MeanField(PAYOFF, lambda rho: sl.occupancy(6, rho), division=[1.0, 0.0],
                        death=[death, death], objective="max-entropy")


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


if __name__ == "__main__":
    main()
