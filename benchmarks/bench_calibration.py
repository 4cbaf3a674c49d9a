"""Benchmark: fitting beta plus two payoff parameters with profile intervals.

INVENTED data: 20 densities x 7 states (occupied neighbours of 6) x 2 phenotypes, simulated
with a seed from known parameters (``switchlaw.calibration.invented_colony_data``). Side by
side in one run, medians of several repeats, printed as a ratio:

1. ``switchlaw.calibrate`` (L-BFGS-B with exact gradients through the solver, Newton polish,
   profile intervals by brentq on re-maximised profiles);
2. what a competent user would otherwise write: the same multinomial likelihood in numpy,
   maximised by scipy's Nelder–Mead (derivative-free, bounded, tight tolerances), and the
   profile intervals by brentq on Nelder–Mead re-maximisations of the other parameters.

Both must reach the same optimum (log-likelihood within 1e-6 nats) and the same interval
ends (within 1e-3 of each parameter's interval width); the script says so.

Run:  python benchmarks/bench_calibration.py [--repeats 3]
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np
from scipy.optimize import brentq, minimize

import switchlaw as sl
from switchlaw.calibration import CUTOFF, invented_colony_data
from switchlaw.calibration._demo import colony_environment, colony_payoff

FREE = {"beta": (0.5, 30.0), "half": (0.1, 10.0), "roam_value": (0.0, 1.0)}
NAMES = tuple(FREE)
BOUNDS = [FREE[n] for n in NAMES]


def ours(data):
    return sl.calibrate(data.counts, colony_payoff, colony_environment, free=FREE,
                        densities=data.densities, starts=2)


def nelder_mead(data):
    """The baseline: the likelihood written out, Nelder–Mead fit and profiles."""
    y = np.arange(7.0)
    probs = np.stack([sl.occupancy(6, r).probs for r in data.densities])
    counts = data.counts

    def log_likelihood(theta):
        beta, half, roam = theta
        delta = y / (y + half) - roam
        p_divide = 1.0 / (1.0 + np.exp(-beta * delta))
        with np.errstate(divide="ignore"):
            return float(np.sum(counts[:, :, 0] * np.log(p_divide) + counts[:, :, 1] * np.log1p(-p_divide)))

    options = {"xatol": 1e-10, "fatol": 1e-12, "maxiter": 20000, "maxfev": 40000}
    start = np.array([np.mean(b) for b in BOUNDS])
    fit = minimize(lambda t: -log_likelihood(t), start, method="Nelder-Mead", bounds=BOUNDS, options=options)
    fit = minimize(lambda t: -log_likelihood(t), fit.x, method="Nelder-Mead", bounds=BOUNDS, options=options)
    best, l_max = fit.x, -fit.fun
    assert probs.shape[0] == counts.shape[0]

    def profile(j, value, warm):
        others = [k for k in range(3) if k != j]

        def negative(z):
            theta = np.empty(3)
            theta[j] = value
            theta[others] = z
            return -log_likelihood(theta)

        result = minimize(negative, warm[others], method="Nelder-Mead",
                          bounds=[BOUNDS[k] for k in others], options=options)
        theta = np.empty(3)
        theta[j], theta[others] = value, result.x
        return l_max + result.fun, theta

    intervals = {}
    for j, name in enumerate(NAMES):
        ends = []
        for side in (-1, 1):
            step = 0.05 * (BOUNDS[j][1] - BOUNDS[j][0])
            inside, warm = best[j], best.copy()
            value = best[j]
            while True:
                value = np.clip(value + side * step, *BOUNDS[j])
                drop, theta = profile(j, value, warm)
                if drop > CUTOFF or value in BOUNDS[j]:
                    break
                inside, warm = value, theta
            ends.append(brentq(lambda v: profile(j, v, warm)[0] - CUTOFF, inside, value, xtol=1e-9))
        intervals[name] = tuple(ends)
    return dict(zip(NAMES, best)), intervals, l_max


def median_seconds(task, repeats):
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        task()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    data = invented_colony_data(seed=7, densities=np.linspace(0.05, 0.95, 20), cells=500)
    fit = ours(data)  # also compiles the JAX functions once
    estimates, intervals, l_max = nelder_mead(data)
    same_optimum = abs(fit.log_likelihood - l_max) <= 1e-6
    same_ends = all(
        abs(a - b) <= 1e-3 * (fit.intervals[n][1] - fit.intervals[n][0])
        for n in NAMES for a, b in zip(fit.intervals[n], intervals[n])
    )
    print(f"data: {data.counts.shape[0]} densities x {data.counts.shape[1]} states x 2 phenotypes, "
          f"{int(data.counts.sum())} cells (invented)")
    for n in NAMES:
        print(f"  {n:>10}: calibrate {fit.estimates[n]:.6f} [{fit.intervals[n][0]:.5f}, {fit.intervals[n][1]:.5f}]"
              f"   Nelder-Mead {estimates[n]:.6f} [{intervals[n][0]:.5f}, {intervals[n][1]:.5f}]")
    print(f"  log-likelihood: calibrate {fit.log_likelihood:.8f}, Nelder-Mead {l_max:.8f}; "
          f"same optimum: {same_optimum}; same interval ends: {same_ends}")
    t_ours = median_seconds(lambda: ours(data), args.repeats)
    t_nm = median_seconds(lambda: nelder_mead(data), args.repeats)
    print(f"fit + profile intervals, median of {args.repeats}: calibrate {t_ours:.2f} s, "
          f"Nelder-Mead {t_nm:.2f} s; ratio Nelder-Mead / calibrate = {t_nm / t_ours:.2f}")


if __name__ == "__main__":
    main()
