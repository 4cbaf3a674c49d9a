"""Benchmark: a 400-point scan, serial against 2 local processes, and Dask against processes.

Targets (issue: scans): on 2 cores, 2 local worker processes run a 400-point scan at least
1.6x faster than the serial executor (whole scan, worker start-up included); the same scan
through a Dask ``LocalCluster`` (2 worker processes, 1 thread each) against local processes:
the overhead ratio is printed. Each point is a law summary — the min-information law at 81
densities — about 10-20 ms of work. Scenario: invented go-or-grow cells on a hexagonal
lattice, scanning beta and the payoff of moving.

Run:  python benchmarks/bench_scan.py [--quick]   (about 1.5 min; --quick about 15 s)

The exit status is 0 when the datasets agree and (full run) the speed-up target is met. The
machine must be otherwise idle: other processes on 2 cores slow the parallel runs far more
than the serial one, so the load average is printed before and after.
"""

from __future__ import annotations

import argparse
import os
import time

# One BLAS thread per process, so that serial and parallel runs use the cores alike.
for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")

import numpy as np  # noqa: E402

import switchlaw as sl  # noqa: E402
from switchlaw import analysis as sa  # noqa: E402


def hexagonal(rho):
    return sl.occupancy(6, rho)


def go_or_grow(move_payoff=1.0):
    """The study: moving pays ``move_payoff`` when isolated, less as neighbours fill in."""
    payoff = {"divide": sl.Linear(1 / 6, 0.0), "move": sl.Linear(-move_payoff / 6, move_payoff)}
    return sl.MeanField(payoff, hexagonal, division=[1.0, 0.0], death=[0.2, 0.2],
                        objective="min-information")


def _ready(_):
    import switchlaw.analysis._points  # noqa: F401  (what a worker imports for the law summary)

    return os.getpid()


def start_pool() -> None:
    """Start 2 spawned workers and wait until both have imported the scan's modules."""
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor

    with ProcessPoolExecutor(2, mp_context=multiprocessing.get_context("spawn")) as pool:
        list(pool.map(_ready, range(2)))


def timed(function):
    start = time.perf_counter()
    result = function()
    return time.perf_counter() - start, result


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="160 points, one repeat")
    args = parser.parse_args()
    repeats = 1 if args.quick else 5
    point = sa.LawSummary(go_or_grow, densities=np.linspace(0.0, 1.0, 81))
    grid = {"beta": np.linspace(0.2, 8.0, 16 if args.quick else 20),
            "move_payoff": np.linspace(0.5, 1.5, 10 if args.quick else 20)}
    points = grid["beta"].size * grid["move_payoff"].size
    print(f"switchlaw {sl.__version__}: scan benchmark ({'quick' if args.quick else 'full'} run), "
          f"{points} points, {os.cpu_count()} cores, medians of {repeats}; load average before "
          f"the run {os.getloadavg()[0]:.2f} (other work on the machine slows both sides)")

    # Interleaved repeats, so that a change in the machine's load hits both sides alike.
    serial, local = [], []
    for _ in range(repeats):
        serial.append(timed(lambda: sa.scan(point, grid, progress=False)))
        local.append(timed(lambda: sa.scan(point, grid, executor="processes", jobs=2, progress=False)))
    reference = serial[0][1]
    t_serial = float(np.median([s for s, _ in serial]))
    t_local = float(np.median([s for s, _ in local]))
    t_start = float(np.median([timed(start_pool)[0] for _ in range(repeats)]))
    same = all(ds.identical(reference) for _, ds in local)
    speedup = t_serial / t_local
    print(f"1. serial {t_serial:.2f} s ({1000 * t_serial / points:.1f} ms per point); 2 processes "
          f"{t_local:.2f} s, of which starting the 2 spawned workers (imports included) takes "
          f"about {t_start:.2f} s; identical datasets: {same}")
    verdict = ("checked on the full 400-point run only" if args.quick
               else "PASS" if speedup >= 1.6 else "FAIL")
    print(f"   speed-up {speedup:.2f}x (whole scan); {t_serial / max(t_local - t_start, 1e-9):.2f}x "
          f"once workers run; target >= 1.6x (whole scan): {verdict}")

    from distributed import LocalCluster

    t_start_cluster, cluster = timed(lambda: LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0"))
    with cluster:
        dask = [timed(lambda: sa.scan(point, grid, executor=cluster, progress=False))
                for _ in range(repeats)]
    t_dask = float(np.median([s for s, _ in dask]))
    same_dask = all(ds.identical(reference) for _, ds in dask)
    print(f"2. Dask LocalCluster, 2 worker processes x 1 thread: {t_dask:.2f} s per scan on the "
          f"running cluster (first scan, with the workers' imports, {dask[0][0]:.2f} s; starting "
          f"the cluster {t_start_cluster:.2f} s, not counted); identical datasets: {same_dask}")
    print(f"   overhead ratio Dask / processes: {t_dask / t_local:.2f} (whole scans), "
          f"{t_dask / max(t_local - t_start, 1e-9):.2f} (processes' worker start-up left out)")
    print(f"load average after the run: {os.getloadavg()[0]:.2f}")
    return 0 if (args.quick or speedup >= 1.6) and same and same_dask else 1


if __name__ == "__main__":
    raise SystemExit(main())
