"""Benchmark: long-run growth in fluctuating environments against what a user would write.

Three measurements, each printed side by side with ratios:

1. **Growth-rate curve over 200 betas** on a 3-environment, 3-phenotype problem seen through a
   noisy cue (symmetric, wrong 20 % of the time): ``switchlaw.growth.sensing_tradeoff`` (one
   warm-started ``tradeoff`` plus the exact growth formula) against a loop that calls
   ``switchlaw.solve`` at each beta and evaluates the growth with numpy. Both must agree to
   1e-9 nats per generation. Beside it, the growth-optimal policy with the cue by
   ``bet_hedging`` against scipy's SLSQP on each cue state's simplex.
2. **Exact periodic growth rate against ODE integration.** The spectral radius of the product
   of matrix exponentials against ``scipy.integrate.solve_ivp`` (DOP853, rtol 1e-10) run
   period after period, renormalised, until the growth over one period settles to 1e-9.
3. **Markov environment simulation.** Propagators over 20 000 environment epochs by one
   diagonalisation per state against ``scipy.linalg.expm`` per epoch.

Run::

    python benchmarks/bench_growth.py          # a few seconds on 2 cores
    python benchmarks/bench_growth.py --seed 3

Timings are medians of several repeats. BLAS is held to one thread unless
``OPENBLAS_NUM_THREADS`` (or ``OMP_NUM_THREADS``) is set. The exit status is 0 when every
accuracy target is met.
"""

from __future__ import annotations

import os

# Must happen before numpy loads its BLAS; a value set by the caller wins.
for _variable in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_variable, "1")

import argparse  # noqa: E402
import math  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402
from scipy.integrate import solve_ivp  # noqa: E402
from scipy.linalg import expm  # noqa: E402
from scipy.optimize import LinearConstraint, minimize  # noqa: E402

import switchlaw  # noqa: E402
import switchlaw.growth as growth  # noqa: E402
from switchlaw.growth._continuous import growth_matrices, propagators  # noqa: E402
from switchlaw.growth._products import principal_eigenvalue  # noqa: E402

#: Agreement required between switchlaw and each baseline (nats per generation or per time).
CURVE_TOLERANCE = 1e-9
HEDGING_TOLERANCE = 1e-7
ODE_TOLERANCE = 1e-7
SIMULATION_TOLERANCE = 1e-9


def median_seconds(fn, repeats: int):
    """Median wall-clock time of ``fn()`` over ``repeats`` calls, and the last result."""
    times, result = [], None
    for _ in range(repeats):
        start = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - start)
    return float(np.median(times)), result


def row(label: str, seconds: float, note: str = "") -> None:
    print(f"   {label:<52}{seconds * 1e3:>10.2f} ms  {note}")


def verdict(ok: bool) -> str:
    return "PASS" if ok else "FAIL"


# --------------------------------------------------------------------------- section 1


def sensing_problem(rng: np.random.Generator):
    """3 environments x 3 phenotypes: each phenotype thrives in one environment."""
    fitness = np.diag(rng.uniform(2.0, 3.0, size=3)) + rng.uniform(0.1, 0.6, size=(3, 3))
    habitat = rng.dirichlet(np.full(3, 3.0))
    return fitness, habitat, growth.symmetric_cue(3, 0.2)


def loop_of_solves(fitness, habitat, cue, betas):
    """Baseline: one cold ``switchlaw.solve`` per beta and the growth formula in numpy."""
    joint = habitat[:, None] * cue
    cue_probs = joint.sum(axis=0)
    payoff = (joint / cue_probs).T @ fitness
    curve = np.empty(betas.size)
    for i, beta in enumerate(betas):
        law = switchlaw.solve(payoff, cue_probs, float(beta)).probs
        curve[i] = float(np.sum(joint * np.log(fitness @ law.T)))
    return curve


def slsqp_hedging(fitness, habitat, cue):
    """Baseline: scipy SLSQP on the simplex for each cue state."""
    joint = habitat[:, None] * cue
    total = 0.0
    n = fitness.shape[1]
    for c in range(cue.shape[1]):
        weights = joint[:, c]
        result = minimize(
            lambda pi: -float(weights @ np.log(fitness @ pi)), np.full(n, 1.0 / n),
            method="SLSQP", bounds=[(1e-12, 1.0)] * n,
            constraints=[LinearConstraint(np.ones((1, n)), 1.0, 1.0)],
            options={"ftol": 1e-14, "maxiter": 1000},
        )
        total += -result.fun
    return total


def section_curve(rng: np.random.Generator, repeats: int) -> bool:
    fitness, habitat, cue = sensing_problem(rng)
    betas = np.geomspace(0.01, 100.0, 200)
    fast, scan = median_seconds(
        lambda: growth.sensing_tradeoff(fitness, habitat, cue, betas, cost_per_bit=0.02), repeats)
    slow, curve = median_seconds(lambda: loop_of_solves(fitness, habitat, cue, betas), repeats)
    error = float(np.abs(scan.growth_rate - curve).max())
    print("1. Growth-rate curve over 200 betas, 3 environments x 3 phenotypes, noisy cue "
          f"(I(E;C) = {switchlaw.mutual_information(habitat, cue, unit='bits'):.3f} bits)")
    row("sensing_tradeoff (warm-started tradeoff + formula)", fast)
    row("loop: switchlaw.solve per beta + numpy growth", slow,
        f"= {slow / fast:.1f}x sensing_tradeoff")
    print(f"   max |growth difference| {error:.1e} nats/generation "
          f"(target {CURVE_TOLERANCE:g}): {verdict(error <= CURVE_TOLERANCE)}")
    print(f"   best beta {scan.best_beta:.4g} at 0.02 nats/bit: growth "
          f"{scan.best_growth_rate:.6f}, I {scan.best_information_bits:.4f} bits")
    hedge_fast, optimum = median_seconds(lambda: growth.bet_hedging(fitness, habitat, cue=cue), repeats)
    hedge_slow, reference = median_seconds(lambda: slsqp_hedging(fitness, habitat, cue), repeats)
    gap = optimum.growth_rate - reference
    print(f"   growth-optimal policy with the cue: {optimum.growth_rate:.10f} nats/generation "
          f"(best law reaches {scan.best_growth_rate / optimum.growth_rate:.4f} of it)")
    row("bet_hedging (Newton on the marginal, certified)", hedge_fast)
    row("scipy SLSQP per cue state", hedge_slow, f"= {hedge_slow / hedge_fast:.1f}x bet_hedging")
    print(f"   bet_hedging - SLSQP growth {gap:+.1e} (target >= -{HEDGING_TOLERANCE:g}): "
          f"{verdict(gap >= -HEDGING_TOLERANCE)}")
    return error <= CURVE_TOLERANCE and gap >= -HEDGING_TOLERANCE


# --------------------------------------------------------------------------- section 2


def ode_rate(matrices, habitat, *, settle: float, max_periods: int = 400):
    """Baseline: integrate period after period until the per-period growth settles."""
    n = np.full(matrices.shape[1], 1.0 / matrices.shape[1])
    previous, rate, periods = math.inf, math.nan, 0
    for periods in range(1, max_periods + 1):
        log_growth = 0.0
        for e, duration in zip(habitat.states, habitat.durations):
            solution = solve_ivp(lambda t, y, a=matrices[e]: a @ y, (0.0, duration), n,
                                 method="DOP853", rtol=1e-10, atol=1e-12)
            n = solution.y[:, -1]
            log_growth += math.log(n.sum())
            n = n / n.sum()
        rate = log_growth / habitat.period
        if abs(rate - previous) < settle:
            break
        previous = rate
    return rate, periods


def section_periodic(rng: np.random.Generator, repeats: int) -> bool:
    rates = rng.normal(0.0, 0.8, size=(3, 3))
    switching = rng.uniform(0.0, 0.1, size=(3, 3))
    np.fill_diagonal(switching, 0.0)
    habitat = growth.PeriodicHabitat([0, 1, 2, 1], [5.0, 2.0, 3.0, 1.5])
    fast, exact = median_seconds(lambda: growth.continuous_growth(rates, switching, habitat), repeats)
    generators = np.broadcast_to(switching - np.diag(switching.sum(axis=1)), (3, 3, 3))
    matrices = growth_matrices(rates, np.array(generators))
    slow, (reference, periods) = median_seconds(
        lambda: ode_rate(matrices, habitat, settle=1e-10), max(1, repeats // 3))
    difference = abs(exact.rate - reference)
    print("2. Periodic environment (3 states, 4 segments), 3 phenotypes with switching")
    row("exact: log spectral radius of product of expm / period", fast)
    row(f"solve_ivp DOP853 rtol 1e-10, {periods} periods to settle", slow,
        f"= {slow / fast:.0f}x the exact formula")
    print(f"   exact {exact.rate:.12f}, ODE {reference:.12f}, |difference| {difference:.1e} "
          f"(target {ODE_TOLERANCE:g}): {verdict(difference <= ODE_TOLERANCE)}")
    return difference <= ODE_TOLERANCE


# --------------------------------------------------------------------------- section 3


def section_markov(rng: np.random.Generator, repeats: int, epochs: int) -> bool:
    rates = rng.normal(0.0, 0.8, size=(3, 3))
    switching = rng.uniform(0.0, 0.2, size=(3, 3))
    np.fill_diagonal(switching, 0.0)
    habitat = growth.SwitchingHabitat(rng.uniform(0.05, 0.5, size=(3, 3)) * (1 - np.eye(3)))
    states, durations = habitat.sample(epochs, seed=rng)
    generators = np.broadcast_to(switching - np.diag(switching.sum(axis=1)), (3, 3, 3))
    matrices = growth_matrices(rates, np.array(generators))
    shifts = np.array([principal_eigenvalue(a) for a in matrices])
    eye = np.eye(3)
    fast, by_eigen = median_seconds(lambda: propagators(matrices, shifts, states, durations), repeats)
    slow, by_expm = median_seconds(
        lambda: np.array([expm((matrices[e] - shifts[e] * eye) * t) for e, t in zip(states, durations)]),
        max(1, repeats // 3))
    difference = float(np.abs(by_eigen - by_expm).max())
    whole, estimate = median_seconds(
        lambda: growth.continuous_growth(rates, switching, habitat, epochs=epochs, seed=1), repeats)
    print(f"3. Switching (Markov) environment, {epochs} epochs, 3 states x 3 phenotypes")
    row("propagators by one diagonalisation per state", fast)
    row("scipy.linalg.expm per epoch", slow, f"= {slow / fast:.0f}x diagonalisation")
    row("whole continuous_growth estimate", whole, f"rate {estimate.rate:.5f} ± "
        f"{estimate.standard_error:.1e}")
    print(f"   max |propagator difference| {difference:.1e} (target {SIMULATION_TOLERANCE:g}): "
          f"{verdict(difference <= SIMULATION_TOLERANCE)}")
    return difference <= SIMULATION_TOLERANCE


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--seed", type=int, default=0, help="seed of the random problems")
    parser.add_argument("--repeats", type=int, default=5, help="timed repeats (medians)")
    args = parser.parse_args(argv)
    seeds = np.random.SeedSequence(args.seed).spawn(3)
    start = time.perf_counter()
    print(f"switchlaw {switchlaw.__version__} growth benchmark (seed {args.seed}, "
          f"OPENBLAS_NUM_THREADS={os.environ['OPENBLAS_NUM_THREADS']}, {os.cpu_count()} CPUs)")
    print()
    passed = section_curve(np.random.default_rng(seeds[0]), args.repeats)
    print()
    passed &= section_periodic(np.random.default_rng(seeds[1]), args.repeats)
    print()
    passed &= section_markov(np.random.default_rng(seeds[2]), args.repeats, 20_000)
    print()
    print(f"total benchmark time {time.perf_counter() - start:.1f} s; accuracy targets: "
          f"{verdict(passed)}")
    return 0 if passed else 1


if __name__ == "__main__":
    raise SystemExit(main())
