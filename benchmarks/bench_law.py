"""Benchmark: deriving a switching law over many densities, warm-started vs cold starts.

Target (issue: switching laws): a min-information law on 1000 densities x 50 states x 4
phenotypes in seconds on 2 cores, compared side by side with solving each density from a
cold start (`switchlaw.solve` per density, no warm start). Prints medians and the ratio.

Run:  python benchmarks/bench_law.py [--quick]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

import switchlaw as sl


def scenario(neighbours: int):
    """Invented scenario: 4 phenotypes with payoffs linear in the occupied-neighbour count."""
    payoff = {
        "divide": sl.Linear(-1.0 / neighbours, 1.0),
        "move": sl.Linear(0.6 / neighbours, 0.2),
        "rest": sl.Linear(0.0, 0.45),
        "secrete": sl.Hill(top=0.9, half=0.5 * neighbours, n=4.0, baseline=0.05),
    }
    return payoff, (lambda rho: sl.occupancy(neighbours, rho))


def derive(payoff, environment, densities, beta):
    return sl.derive_law(payoff, environment, densities=densities, beta=beta)


def cold(payoff, environment, densities, beta):
    """The baseline: every density solved on its own from the default start."""
    out = []
    for rho in densities:
        env = environment(rho)
        table = np.column_stack([payoff[name](env.values) for name in payoff])
        out.append(sl.solve(table, env, beta).probs)
    return np.stack(out)


def median_time(function, repeats: int) -> tuple[float, object]:
    times, result = [], None
    for _ in range(repeats):
        start = time.perf_counter()
        result = function()
        times.append(time.perf_counter() - start)
    return float(np.median(times)), result


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer densities and repeats")
    args = parser.parse_args()
    n_dens = 200 if args.quick else 1000
    repeats = 2 if args.quick else 3
    neighbours = 49  # 50 states
    payoff, environment = scenario(neighbours)
    densities = np.linspace(0.0, 1.0, n_dens)
    beta = 12.0
    print(f"switchlaw {sl.__version__}: law over {n_dens} densities x {neighbours + 1} states x "
          f"{len(payoff)} phenotypes, beta = {beta} (median of {repeats} runs)")
    warm_s, law = median_time(lambda: derive(payoff, environment, densities, beta), repeats)
    cold_s, table = median_time(lambda: cold(payoff, environment, densities, beta), repeats)
    difference = float(np.abs(law.table - table).max())
    print(f"  derive_law (warm-started along density) : {warm_s:8.3f} s")
    print(f"  cold start per density (switchlaw.solve): {cold_s:8.3f} s")
    print(f"  RATIO cold / warm = {cold_s / warm_s:.2f}x; max |difference| of the laws {difference:.1e}")
    print(f"  all converged: {bool(law.converged.all())}; target 'seconds': "
          f"{'PASS' if warm_s < 10 else 'FAIL'}")


if __name__ == "__main__":
    main()
