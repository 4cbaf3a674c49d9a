"""Benchmark: many min-information problems solved as one stack against a loop of single solves.

Issue 13, section 3: "a tensorised batch path (many payoff tables or many densities at once:
the law over a density grid, the regime map) that amortises Python overhead".

1. **The law over a 257-density grid** (invented scenario: 50 states = occupied neighbours
   out of 49, Binomial(49, rho); 4 phenotypes with payoffs linear or Hill in the count), at
   three betas: ``decision._batch.solve_stack`` on the stacked problems against the loop a
   competent user would write (and the law cache ran before): ``minimum_information_marginal``
   per density, each warm-started from the previous density's certified marginal. Both get
   the same prepared problems; medians of repeats, the ratio, and the largest relative
   difference of any marginal mass (target 1e-10: both are certified to that).
2. **A 16 x 40 regime map** of a min-information go-or-grow colony (death scale x beta), fresh
   ``LawCache`` per run: the law cache's stacked path against the same map with the cache's
   former loop of warm-started single solves put back in its place; medians, ratio, and
   whether the two maps agree point for point. Continuation asks for one or two densities
   at a time, which stay single solves (the law cache stacks 16 or more), so only the map's
   density-grid calls change.

Run::

    python benchmarks/bench_batch.py            # about a minute on 2 shared cores
    python benchmarks/bench_batch.py --quick    # fewer repeats, a 6 x 40 map

BLAS runs on one thread unless ``OPENBLAS_NUM_THREADS`` (or ``OMP_NUM_THREADS``) is set: the
stack's matrices are small, and on a busy machine a multithreaded BLAS stalls on short calls.
"""

from __future__ import annotations

import os

# Must happen before numpy loads its BLAS; a value set by the caller wins.
for _variable in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_variable, "1")

import argparse  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402

import switchlaw as sl  # noqa: E402
from switchlaw.decision._batch import solve_stack  # noqa: E402
from switchlaw.decision._minimum_information import minimum_information_marginal  # noqa: E402
from switchlaw.laws._law import decision_problem  # noqa: E402
from switchlaw.population import _laws  # noqa: E402

NEIGHBOURS = 49
#: Invented payoffs (the scenario of bench_law.py).
PAYOFF = {
    "divide": sl.Linear(-1.0 / NEIGHBOURS, 1.0),
    "move": sl.Linear(0.6 / NEIGHBOURS, 0.2),
    "rest": sl.Linear(0.0, 0.45),
    "secrete": sl.Hill(top=0.9, half=0.5 * NEIGHBOURS, n=4.0, baseline=0.05),
}
#: Invented go-or-grow colony for the regime map (min-information law).
COLONY = {"divide": sl.Linear(1 / 6, 0.0), "move": sl.Linear(-1 / 6, 1.0)}


def median_time(function, repeats: int):
    times, result = [], None
    for _ in range(repeats):
        start = time.perf_counter()
        result = function()
        times.append(time.perf_counter() - start)
    return float(np.median(times)), result


def loop(payoffs, envs, beta):
    """The baseline: single solves along the grid, each warm-started from the last."""
    out, start = [], None
    for u, p in zip(payoffs, envs):
        r, record, _ = minimum_information_marginal(u, p, beta, start=start)
        if record.converged:
            start = r
        out.append(r)
    return np.stack(out), None


def relative_difference(a, b) -> float:
    if not np.array_equal(a > 0, b > 0):
        return float("inf")
    used = b > 0
    return float((np.abs(a - b)[used] / b[used]).max())


def looped_derive(objective, problems, beta, entry):
    """The law cache's former loop of single solves (the baseline of section 2)."""
    derived = []
    for p, u in problems:
        r, record, _ = minimum_information_marginal(u, p, beta, start=entry.last_marginal)
        if record.converged and r.size == u.shape[1]:
            entry.last_marginal = r
        derived.append(np.asarray(r, dtype=float))
    return derived


def colony(death: float = 0.27) -> sl.MeanField:
    return sl.MeanField(COLONY, lambda rho: sl.occupancy(6, rho), division=[1.0, 0.0],
                        death=[death, death], objective="min-information")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repeats, a 6 x 40 map")
    args = parser.parse_args()
    repeats = 3 if args.quick else 7

    densities = np.linspace(0.0, 1.0, 257)
    problems = [decision_problem(PAYOFF, lambda rho: sl.occupancy(NEIGHBOURS, rho), float(rho))
                for rho in densities]
    envs = np.stack([np.asarray(env.probs, dtype=float) for env, _, _ in problems])
    payoffs = np.stack([np.asarray(u, dtype=float) for _, u, _ in problems])
    print(f"1. law over {densities.size} densities x {payoffs.shape[1]} states x "
          f"{payoffs.shape[2]} phenotypes (invented), median of {repeats} runs:")
    for beta in (3.0, 12.0, 40.0):
        stack_s, found = median_time(lambda: solve_stack(payoffs, envs, beta), repeats)
        loop_s, (looped, _) = median_time(lambda: loop(payoffs, envs, beta), repeats)
        difference = relative_difference(found.marginals, looped)
        print(f"   beta {beta:5.1f}: stack {1e3 * stack_s:7.2f} ms ({int(found.stacked.sum())} "
              f"certified in the stack, {int((found.status == 'closed-form').sum())} closed form, "
              f"{int((~found.stacked & (found.status != 'closed-form')).sum())} handed over); "
              f"loop {1e3 * loop_s:7.2f} ms; RATIO loop / stack = {loop_s / stack_s:5.1f}x; "
              f"max relative difference {difference:.1e} "
              f"({'PASS' if difference <= 1e-10 and found.converged.all() else 'FAIL'})")

    rows = 6 if args.quick else 16
    betas = np.linspace(0.05, 20.0, 40)
    scales = np.linspace(0.8, 1.2, rows)
    map_repeats = 3

    grid_seconds = {"stacked": [], "looped": []}

    def timed_derive(derive, label):
        """``derive`` with the time of its density-grid calls (16 densities or more) kept."""
        def wrapped(objective, problems, beta, entry):
            start = time.perf_counter()
            out = derive(objective, problems, beta, entry)
            if len(problems) >= 16:
                grid_seconds[label][-1] += time.perf_counter() - start
            return out
        return wrapped

    def regime_map(derive, label):
        former = _laws._derive
        _laws._derive = timed_derive(derive, label)
        grid_seconds[label].append(0.0)
        try:
            return colony().regime_map(betas, "death_scale", scales, cache=sl.LawCache())
        finally:
            _laws._derive = former

    # Interleaved repeats, so that a change in the machine's load hits both alike.
    stacked_times, looped_times = [], []
    for _ in range(map_repeats):
        seconds, stacked_map = median_time(lambda: regime_map(_laws._derive, "stacked"), 1)
        stacked_times.append(seconds)
        seconds, looped_map = median_time(lambda: regime_map(looped_derive, "looped"), 1)
        looped_times.append(seconds)
    stacked_s, looped_s = float(np.median(stacked_times)), float(np.median(looped_times))
    grid_stacked = float(np.median(grid_seconds["stacked"]))
    grid_looped = float(np.median(grid_seconds["looped"]))
    same = bool(np.array_equal(stacked_map.codes, looped_map.codes))
    print(f"2. min-information regime map {rows} x {betas.size} (death scale x beta), fresh "
          f"LawCache, median of {map_repeats} runs:")
    print(f"   stacked law {stacked_s:.2f} s, loop of single solves {looped_s:.2f} s; "
          f"RATIO {looped_s / stacked_s:.2f}x; maps agree point for point: {same}")
    print(f"   of which the law's density-grid calls: stacked {grid_stacked:.3f} s, loop "
          f"{grid_looped:.3f} s; RATIO {grid_looped / grid_stacked:.1f}x (the rest is "
          f"continuation's one- and two-density calls, single solves in both)")


if __name__ == "__main__":
    main()
