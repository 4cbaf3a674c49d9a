"""Benchmark: ``switchlaw.tradeoff`` against a per-beta cvxpy solve, and how it scales.

Eight measurements, printed side by side with ratios (benchmarks/README.md describes each):

1. **Trade-off curve vs cvxpy.** ``switchlaw.tradeoff`` over 100 betas on a random 300-state,
   4-phenotype problem against the plain cvxpy formulation a user would write (policy ``Q``
   and an explicit marginal variable ``r == env @ Q``, exponential cones through ``rel_entr``,
   Clarabel), solved once per beta. cvxpy is timed on an evenly spaced subset of the betas and
   its time per point is extrapolated to the whole grid. Both must agree on ``E[u]`` to 1e-6
   relative (equal accuracy); the target is a 300x speed-up (issue 13).
2. **Scaling.** One curve of 20 betas on 1e5 states x 8 phenotypes.
3. **Iterations near and away from phase transitions**, Newton vs plain Blahut–Arimoto:
   Bernoulli(0.2) source with Hamming distortion (critical beta ``ln 4``) and a random
   8-phenotype problem at one of its critical betas.
4. **Memory-bandwidth floor.** One evaluation of ``F(r)``, ``c(r)`` (the pass that dominates a
   Newton iteration) and one Newton iteration against a plain numpy pass that reads the same
   matrix once (at 1e5 x 8 the matrix is 6.4 MB, so part of it may be served from cache).
5. **Streaming passes** at 1e4 and 1e5 states; 6. **cold solves** at 100 x 4; 7. **cvxpy at
   1000 x 8**; 8. **peak memory** of a 100-beta curve on 1e5 x 8 (tracemalloc) against the
   previous approach of keeping every policy.

Run::

    python benchmarks/bench_tradeoff.py            # full run, a few minutes on 2 cores
    python benchmarks/bench_tradeoff.py --quick    # smaller run, well under a minute

Timings of switchlaw are medians of several repeats (the machine may be shared and noisy).
BLAS runs on one thread unless ``OPENBLAS_NUM_THREADS`` (or ``OMP_NUM_THREADS``) is set:
Clarabel's direct solver uses one core, so both sides get the same, and on a busy machine
multithreaded BLAS stalls on short calls (measured 10x slower per evaluation).
"""

from __future__ import annotations

import os

# Must happen before numpy loads its BLAS; a value set by the caller wins.
for _variable in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_variable, "1")

import argparse  # noqa: E402
import gc  # noqa: E402
import time  # noqa: E402
import tracemalloc  # noqa: E402
import warnings  # noqa: E402
from dataclasses import dataclass  # noqa: E402

import numpy as np  # noqa: E402

import switchlaw  # noqa: E402
from switchlaw.decision._marginal_newton import newton_marginal  # noqa: E402
from switchlaw.decision._problem import Gaps, Reduced, evaluate  # noqa: E402

#: Clarabel settings under which cvxpy reaches 1e-6 relative accuracy in ``E[u]`` (with its
#: defaults, 1e-8, the error exceeds 1e-6 at some betas).
EQUAL_ACCURACY = {"tol_gap_abs": 1e-10, "tol_gap_rel": 1e-10, "tol_feas": 1e-10}
#: Clarabel's own defaults, spelled out: cvxpy reuses the cached solver between solves and
#: keeps any setting that is not passed again.
CLARABEL_DEFAULTS = {"tol_gap_abs": 1e-8, "tol_gap_rel": 1e-8, "tol_feas": 1e-8}
#: Required agreement of ``E[u]`` between switchlaw and cvxpy (relative).
ACCURACY_TARGET = 1e-6
#: Required speed-up of a 100-point curve over cvxpy at equal accuracy (issue 13).
SPEEDUP_TARGET = 300.0


@dataclass(frozen=True)
class Sizes:
    """Problem sizes and repeat counts of one benchmark run."""

    cvxpy_points: int
    cvxpy_repeats: int
    switchlaw_repeats: int
    scaling_states: int
    scaling_repeats: int
    transition_states: int
    bandwidth_repeats: int
    memory_states: int
    curve_rounds: int


FULL = Sizes(
    cvxpy_points=10, cvxpy_repeats=3, switchlaw_repeats=15, scaling_states=100_000,
    scaling_repeats=3, transition_states=500, bandwidth_repeats=21, memory_states=100_000,
    curve_rounds=9,
)
QUICK = Sizes(
    cvxpy_points=4, cvxpy_repeats=1, switchlaw_repeats=7, scaling_states=20_000,
    scaling_repeats=3, transition_states=200, bandwidth_repeats=11, memory_states=20_000,
    curve_rounds=5,
)


# --------------------------------------------------------------------------- helpers


def random_problem(
    n_states: int, n_phenotypes: int, rng: np.random.Generator
) -> tuple[np.ndarray, np.ndarray]:
    """Standard-normal payoff ``u[y, x]`` and a flat-Dirichlet environment ``p(y)``.

    Parameters
    ----------
    n_states, n_phenotypes : int
        Shape of the payoff table.
    rng : numpy.random.Generator
        Source of randomness.

    Returns
    -------
    payoff : ndarray, shape (n_states, n_phenotypes)
    env : ndarray, shape (n_states,)
    """
    payoff = rng.normal(size=(n_states, n_phenotypes))
    env = rng.dirichlet(np.ones(n_states))
    return payoff, env


def median_times(fn, repeats: int) -> tuple[float, float, object]:
    """Median wall-clock and CPU time of ``fn()`` over ``repeats`` calls, and the last result.

    Parameters
    ----------
    fn : callable
        Called with no arguments.
    repeats : int
        Number of timed calls.

    Returns
    -------
    wall : float
        Median wall-clock time of one call (s).
    cpu : float
        Median CPU time of this process for one call (s); unlike the wall-clock time it does
        not grow while other processes hold the cores.
    result : object
        What the last call returned.
    """
    walls, cpus = [], []
    result = None
    for _ in range(repeats):
        wall, cpu = time.perf_counter(), time.process_time()
        result = fn()
        cpus.append(time.process_time() - cpu)
        walls.append(time.perf_counter() - wall)
    return float(np.median(walls)), float(np.median(cpus)), result


def median_seconds(fn, repeats: int) -> tuple[float, object]:
    """Median wall-clock time of ``fn()`` (s) over ``repeats`` calls, and the last result."""
    wall, _, result = median_times(fn, repeats)
    return wall, result


def payoff_and_objective(
    payoff: np.ndarray, env: np.ndarray, probs: np.ndarray, beta: float
) -> tuple[float, float]:
    """``E[u]`` (payoff units) and ``F = I(X;Y) - beta E[u]`` (nats) of a policy.

    Parameters
    ----------
    payoff : ndarray, shape (m, n)
    env : ndarray, shape (m,)
    probs : ndarray, shape (m, n)
        ``q(x | y)``; rows sum to one.
    beta : float
        Sensitivity (nats per payoff unit).
    """
    expected = float(env @ (probs * payoff).sum(axis=1))
    information = switchlaw.mutual_information(env, probs, unit="nats")
    return expected, information - beta * expected


def format_seconds(seconds: float) -> str:
    """Seconds in the unit that reads best (us, ms or s)."""
    if seconds < 1e-3:
        return f"{seconds * 1e6:.0f} us"
    if seconds < 1.0:
        return f"{seconds * 1e3:.1f} ms"
    return f"{seconds:.2f} s"


def verdict(passed: bool) -> str:
    """``"PASS"`` or ``"FAIL"``."""
    return "PASS" if passed else "FAIL"


# --------------------------------------------------------------------------- cvxpy baseline


@dataclass(frozen=True)
class ConicProgram:
    """The per-beta cvxpy program, compiled once with ``beta`` as a parameter."""

    problem: object
    policy: object
    beta: object
    compile_seconds: float


def build_conic_program(payoff: np.ndarray, env: np.ndarray) -> ConicProgram:
    """Maximise ``beta E[u] - I(X;Y)`` over policies ``Q`` with an explicit marginal ``r``.

    The objective is multiplied by the number of states (weights ``m p(y)`` of mean one): the
    optimum is the same, and Clarabel's stopping rules then reach 1e-6 in ``E[u]`` at more
    betas. ``beta`` is a cvxpy parameter, so the program is compiled once (first solve, timed
    separately) and each later solve only refreshes the data.

    Parameters
    ----------
    payoff : ndarray, shape (m, n)
    env : ndarray, shape (m,)
        All entries positive.

    Returns
    -------
    ConicProgram
    """
    import cvxpy as cp

    m, n = payoff.shape
    weights = m * env
    q = cp.Variable((m, n), nonneg=True)
    r = cp.Variable(n, nonneg=True)
    beta = cp.Parameter(nonneg=True)
    columns = np.ones((m, 1)) @ cp.reshape(r, (1, n), order="C")
    information = cp.sum(cp.multiply(weights[:, None], cp.rel_entr(q, columns)))
    expected = cp.sum(cp.multiply(weights[:, None] * payoff, q))
    problem = cp.Problem(
        cp.Maximize(beta * expected - information),
        [cp.sum(q, axis=1) == 1, r == env @ q],
    )
    beta.value = 1.0
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        problem.solve(solver="CLARABEL")
    return ConicProgram(problem, q, beta, time.perf_counter() - start)


def solve_conic(
    program: ConicProgram, beta: float, settings: dict, repeats: int
) -> tuple[float, float, str, np.ndarray]:
    """Solve the compiled program at one beta.

    Parameters
    ----------
    program : ConicProgram
    beta : float
    settings : dict
        Clarabel options (tolerances).
    repeats : int
        Timed solves; the median is returned.

    Returns
    -------
    wall, cpu : float
        Median wall-clock and CPU time of ``problem.solve`` (s).
    status : str
        cvxpy status of the last solve.
    probs : ndarray
        Its policy, clipped at zero with rows renormalised.
    """
    program.beta.value = beta

    def run():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # "inaccurate" is recorded in the status
            program.problem.solve(solver="CLARABEL", **settings)

    wall, cpu, _ = median_times(run, repeats)
    probs = np.clip(np.asarray(program.policy.value, dtype=float), 0.0, None)
    probs /= probs.sum(axis=1, keepdims=True)
    return wall, cpu, program.problem.status, probs


@dataclass(frozen=True)
class BaselineRow:
    """cvxpy on the subset of betas under one set of Clarabel settings."""

    label: str
    seconds_per_point: float
    cpu_seconds_per_point: float
    relative_errors: np.ndarray
    objective_excess: np.ndarray
    statuses: tuple


def run_baseline(
    label: str,
    program: ConicProgram,
    payoff: np.ndarray,
    env: np.ndarray,
    betas: np.ndarray,
    reference: np.ndarray,
    *,
    settings: dict,
    repeats: int,
) -> BaselineRow:
    """Time cvxpy at ``betas`` and compare its ``E[u]`` and objective with switchlaw's.

    Parameters
    ----------
    label : str
    program : ConicProgram
    payoff, env : ndarray
    betas : ndarray, shape (k,)
    reference : ndarray, shape (k, 2)
        switchlaw's ``E[u]`` and ``F`` (nats) at ``betas``.
    settings : dict
        Clarabel options.
    repeats : int
        Timed solves per beta.

    Returns
    -------
    BaselineRow
        ``seconds_per_point`` (wall clock) and ``cpu_seconds_per_point`` are means over
        ``betas`` of the per-beta medians;
        ``objective_excess`` is ``F_cvxpy - F_switchlaw`` (nats; positive: switchlaw better).
    """
    seconds, cpu_seconds, errors, excess, statuses = [], [], [], [], []
    for beta, (ref_payoff, ref_objective) in zip(betas, reference):
        wall, cpu, status, probs = solve_conic(program, float(beta), settings, repeats)
        expected, objective = payoff_and_objective(payoff, env, probs, float(beta))
        seconds.append(wall)
        cpu_seconds.append(cpu)
        errors.append(abs(expected - ref_payoff) / abs(ref_payoff))
        excess.append(objective - ref_objective)
        statuses.append(status)
    return BaselineRow(
        label, float(np.mean(seconds)), float(np.mean(cpu_seconds)), np.array(errors),
        np.array(excess), tuple(statuses),
    )


# --------------------------------------------------------------------------- sections


@dataclass(frozen=True)
class CurveComparison:
    """Section 1 measurements: switchlaw's whole curve and cvxpy on a subset of its betas."""

    betas: np.ndarray
    subset: np.ndarray
    curve: switchlaw.Tradeoff
    first_critical_beta: float
    switchlaw_seconds: float
    switchlaw_cpu_seconds: float
    reference: np.ndarray
    rows: tuple
    compile_seconds: float


def compare_with_cvxpy(seed: np.random.SeedSequence, sizes: Sizes) -> CurveComparison:
    """Section 1: 100-point curve on 300 states x 4 phenotypes, switchlaw vs cvxpy.

    Parameters
    ----------
    seed : numpy.random.SeedSequence
        Seed of the random problem.
    sizes : Sizes
        Number of cvxpy points and repeats.

    Returns
    -------
    CurveComparison
    """
    payoff, env = random_problem(300, 4, np.random.default_rng(seed))
    betas = np.geomspace(0.1, 30.0, 100)
    # switchlaw is timed in three blocks, before, between and after the two cvxpy rows, and
    # the median taken over all of them: on a shared machine a slow minute then weighs on
    # both sides alike instead of on whichever ran in it.
    walls, cpus = [], []

    def time_switchlaw():
        for _ in range(max(1, sizes.switchlaw_repeats // 3)):
            wall, cpu, found = median_times(lambda: switchlaw.tradeoff(payoff, env, betas), 1)
            walls.append(wall)
            cpus.append(cpu)
        return found

    curve = time_switchlaw()
    subset = np.unique(np.round(np.linspace(0, betas.size - 1, sizes.cvxpy_points)).astype(int))
    reference = np.array(
        [payoff_and_objective(payoff, env, curve.probs_at(i), betas[i]) for i in subset]
    )
    program = build_conic_program(payoff, env)
    rows = []
    for label, settings in (
        ("cvxpy+Clarabel, tol 1e-10 (equal accuracy)", EQUAL_ACCURACY),
        ("cvxpy+Clarabel, default tol (less accurate)", CLARABEL_DEFAULTS),
    ):
        rows.append(run_baseline(
            label, program, payoff, env, betas[subset], reference,
            settings=settings, repeats=sizes.cvxpy_repeats,
        ))
        time_switchlaw()
    return CurveComparison(
        betas, subset, curve, switchlaw.first_critical_beta(payoff, env),
        float(np.median(walls)), float(np.median(cpus)), reference, tuple(rows),
        program.compile_seconds,
    )


def print_comparison(result: CurveComparison, sizes: Sizes) -> bool:
    """Print section 1 and return whether the accuracy and speed-up targets are met."""
    k = result.betas.size
    curve = result.curve
    print(f"1. Trade-off curve: 300 states x 4 phenotypes, {k} betas in [0.1, 30] (geometric)")
    print(f"   first critical beta {result.first_critical_beta:.4g}; "
          f"{len(curve.critical_betas)} support changes located in the grid; "
          f"Newton iterations per point: median {np.median(curve.iterations):.0f}, "
          f"max {curve.iterations.max()}")
    runs = 3 * max(1, sizes.switchlaw_repeats // 3)
    print(f"   switchlaw: median of {runs} runs of the whole curve (including locating the "
          "critical betas), in three blocks before, between and after the cvxpy rows")
    print(f"   cvxpy: timed at {result.subset.size} of the {k} betas (median of "
          f"{sizes.cvxpy_repeats} solves each), per-point mean extrapolated to {k} points; "
          f"one-off compile {format_seconds(result.compile_seconds)} not counted")
    print()
    header = (f"   {'method':<46}{'per point':>11}{f'{k} points':>12}"
              f"{'max rel diff E[u]':>19}{'ratio':>9}")
    print(header)
    print("   " + "-" * (len(header) - 3))
    sl_seconds = result.switchlaw_seconds
    print(f"   {'switchlaw.tradeoff':<46}{format_seconds(sl_seconds / k):>11}"
          f"{format_seconds(sl_seconds):>12}{'(reference)':>19}{'1x':>9}")
    for row in result.rows:
        total = row.seconds_per_point * k
        print(f"   {row.label:<46}{format_seconds(row.seconds_per_point):>11}"
              f"{format_seconds(total):>12}{row.relative_errors.max():>19.2e}"
              f"{total / sl_seconds:>8.0f}x")
    print()
    exact = result.rows[0]
    print("   per-beta check at equal accuracy (dF = F_cvxpy - F_switchlaw in nats; "
          "> 0 means switchlaw's policy is better):")
    for i, beta in enumerate(result.betas[result.subset]):
        print(f"     beta {beta:8.4f}   E[u] {result.reference[i, 0]:+.8f}   rel diff "
              f"{exact.relative_errors[i]:.1e}   dF {exact.objective_excess[i]:+.1e}   "
              f"{exact.statuses[i]}")
    worst = exact.relative_errors.max()
    ratio = exact.seconds_per_point * k / sl_seconds
    accurate, fast = bool(worst <= ACCURACY_TARGET), bool(ratio >= SPEEDUP_TARGET)
    print()
    print(f"   accuracy: max rel diff in E[u] {worst:.2e} <= {ACCURACY_TARGET:g}: "
          f"{verdict(accurate)}")
    cpu_ratio = exact.cpu_seconds_per_point * k / result.switchlaw_cpu_seconds
    print(f"   speed: RATIO cvxpy/switchlaw for {k} points = {ratio:.0f}x (wall clock) "
          f">= {SPEEDUP_TARGET:.0f}x: {verdict(fast)}")
    print(f"          same in CPU time of this process (steadier on a busy machine): "
          f"{cpu_ratio:.0f}x")
    return accurate and fast


def scaling(
    seed: np.random.SeedSequence, sizes: Sizes
) -> tuple[np.ndarray, np.ndarray, float, float]:
    """Section 2: one 20-beta curve on ``sizes.scaling_states`` states x 8 phenotypes.

    Returns
    -------
    payoff, env : ndarray
        The problem (reused by the bandwidth section).
    beta : float
        A beta in the middle of the grid.
    seconds_per_iteration : float
        Curve time divided by the total number of Newton iterations (s).
    """
    m = sizes.scaling_states
    payoff, env = random_problem(m, 8, np.random.default_rng(seed))
    betas = np.geomspace(1e-3, 30.0, 20)
    seconds, curve = median_seconds(
        lambda: switchlaw.tradeoff(payoff, env, betas), sizes.scaling_repeats
    )
    total_iterations = int(curve.iterations.sum())
    per_iteration = seconds / max(total_iterations, 1)
    print(f"2. Scaling: {m:.0e} states x 8 phenotypes, 20 betas in [1e-3, 30] "
          f"(median of {sizes.scaling_repeats} curves)")
    print(f"   {format_seconds(seconds)} per curve, {format_seconds(seconds / betas.size)} per "
          f"point; {len(curve.critical_betas)} support changes located; all converged: "
          f"{bool(curve.converged.all())}")
    print(f"   Newton iterations per point: median {np.median(curve.iterations):.0f}, max "
          f"{curve.iterations.max()}, total {total_iterations} -> "
          f"{format_seconds(per_iteration)} of curve time per iteration (all per-point work "
          "included)")
    print(f"   curve in seconds, not minutes: {verdict(seconds < 60.0)}")
    return payoff, env, float(betas[betas.size // 2]), per_iteration


def iteration_pair(payoff: np.ndarray, env: np.ndarray, beta: float) -> tuple[str, str]:
    """Iteration counts of Newton and Blahut–Arimoto at one beta, as printable cells."""
    cells = []
    for method in ("newton", "blahut-arimoto"):
        start = time.perf_counter()
        policy = switchlaw.solve(payoff, env, beta, method=method)
        seconds = time.perf_counter() - start
        note = "" if policy.converged else " (limit, not converged)"
        cells.append(f"{policy.iterations}{note} in {format_seconds(seconds)}")
    return cells[0], cells[1]


def print_iteration_row(label: str, beta: float, cells: tuple[str, str]) -> None:
    """One row of the iteration table."""
    print(f"   {label:<34}{beta:>10.4f}   {cells[0]:<20}{cells[1]}")


def iterations_near_transitions(seed: np.random.SeedSequence, sizes: Sizes) -> None:
    """Section 3: iterations per point next to and away from phase transitions."""
    print("3. Iterations per point, Newton vs plain Blahut–Arimoto (tolerance 1e-12 nats, "
          "cold start)")
    print(f"   {'problem':<34}{'beta':>10}   {'newton':<20}blahut-arimoto")
    hamming = -(1.0 - np.eye(2))
    bernoulli = np.array([0.8, 0.2])
    for label, beta in (("Bernoulli(0.2)/Hamming, near ln 4", 1.39),
                        ("Bernoulli(0.2)/Hamming, away", 2.0)):
        print_iteration_row(label, beta, iteration_pair(hamming, bernoulli, beta))
    m = sizes.transition_states
    payoff, env = random_problem(m, 8, np.random.default_rng(seed))
    critical = switchlaw.tradeoff(payoff, env, np.geomspace(1e-3, 30.0, 40)).critical_betas
    if not critical:
        print(f"   random {m} x 8: no support change in [1e-3, 30]")
        return
    near = critical[len(critical) // 2].beta + 1e-3
    far = 5.0 * critical[-1].beta
    print_iteration_row(f"random {m} x 8, critical + 1e-3", near, iteration_pair(payoff, env, near))
    print_iteration_row(f"random {m} x 8, 5 x last critical", far, iteration_pair(payoff, env, far))
    print(f"   (critical betas of the random problem: "
          f"{', '.join(f'{c.beta:.4g}' for c in critical)})")


def bandwidth_floor(
    payoff: np.ndarray, env: np.ndarray, beta: float, curve_per_iteration: float, repeats: int
) -> None:
    """Section 4: the work of one Newton iteration against a single read of the same matrix.

    Parameters
    ----------
    payoff, env : ndarray
        The scaling problem.
    beta : float
    curve_per_iteration : float
        Curve time per Newton iteration from the scaling section (s).
    repeats : int
    """
    build_seconds, problem = per_beta_build_seconds(payoff, env, beta, repeats)
    n = problem.n_phenotypes
    uniform = np.full(n, 1.0 / n)
    newton_seconds, record = median_seconds(lambda: newton_marginal(problem, uniform), repeats)
    per_iteration = newton_seconds / max(record.iterations, 1)
    r = record.marginal
    expo = problem.expo
    evaluate_seconds, _ = median_seconds(lambda: evaluate(problem, r), repeats)
    floor_seconds, _ = median_seconds(lambda: (expo @ r, expo.sum()), repeats)
    megabytes = expo.nbytes / 1e6
    print(f"4. Memory-bandwidth floor: {expo.shape[0]:.0e} x {n} float64 matrix "
          f"({megabytes:.1f} MB), beta {beta:.3g}, medians of {repeats}")
    rows = (
        ("floor: numpy 'expo @ r' + 'expo.sum()'", floor_seconds,
         f"({2 * megabytes / 1e3 / floor_seconds:.1f} GB/s over two reads)"),
        ("one evaluation of F(r), c(r)", evaluate_seconds, None),
        (f"one Newton iteration ({record.iterations} from uniform r)", per_iteration, None),
        ("building exp(beta u) once per beta", build_seconds, None),
        ("whole curve (section 2) per iteration", curve_per_iteration, None),
    )
    for label, seconds, note in rows:
        note = note or f"= {seconds / floor_seconds:.1f}x the floor"
        print(f"   {label:<44}{format_seconds(seconds):>10}  {note}")


def per_beta_build_seconds(payoff: np.ndarray, env: np.ndarray, beta: float, repeats: int):
    """Median time to build ``exp(beta u)`` for a new beta as a curve does (the
    beta-independent gaps built once, the exponentials written into reused memory; two
    betas alternate so that no call finds the last one cached), and the problem at ``beta``."""
    gaps = Gaps.build(payoff, env)
    betas = [beta * (1 + 1e-9), beta]
    calls = [0]

    def build():
        calls[0] += 1
        return gaps.at(betas[calls[0] % 2])

    seconds, _ = median_seconds(build, repeats)
    return seconds, Reduced.build(payoff, env, beta)


def streaming_pass_seconds(m: int, n: int, repeats: int) -> float:
    """Median time of one streaming pass: ``(a * b).sum()`` over two ``m x n`` float64 arrays
    (the unit of issue 13's targets, measured in the same run)."""
    rng = np.random.default_rng(0)
    a, b = rng.random((m, n)), rng.random((m, n))
    seconds, _ = median_seconds(lambda: (a * b).sum(), repeats)
    return seconds


def in_passes(fn, m: int, n: int, rounds: int) -> tuple[float, float]:
    """Median of ``time(fn()) / time(one streaming pass)`` over ``rounds`` rounds, the pass
    timed (median of 7) right before each call: on a shared machine the speed of both moves
    from minute to minute, and a ratio of medians taken at different moments moves with it.
    Also returns the median time of ``fn()`` (s)."""
    rng = np.random.default_rng(0)
    a, b = rng.random((m, n)), rng.random((m, n))
    ratios, seconds = [], []
    for _ in range(rounds):
        unit, _ = median_seconds(lambda: (a * b).sum(), 7)
        spent, _ = median_seconds(fn, 1)
        ratios.append(spent / unit)
        seconds.append(spent)
    return float(np.median(ratios)), float(np.median(seconds))


def counted_iterations(fn) -> int:
    """Newton iterations of every solve that ``fn()`` runs (the grid points and the search for
    the critical betas alike), and the Newton steps that locate the critical betas
    (``kkt_root``), counted once, outside the timed runs."""
    from switchlaw.decision import _minimum_information, _tradeoff

    solver, root = _minimum_information.newton_marginal, _tradeoff.kkt_root
    total = [0]

    def counting_solver(*args, **kwargs):
        result = solver(*args, **kwargs)
        total[0] += result.iterations
        return result

    def counting_root(*args, **kwargs):
        found = root(*args, **kwargs)
        total[0] += found[2]
        return found

    _minimum_information.newton_marginal = counting_solver
    _tradeoff.kkt_root = counting_root
    try:
        fn()
    finally:
        _minimum_information.newton_marginal = solver
        _tradeoff.kkt_root = root
    return total[0]


def streaming_passes(seed: np.random.SeedSequence, sizes: Sizes) -> None:
    """Section 5: costs in streaming passes at 1e4 and 1e5 states x 8 phenotypes (issue 13:
    <= 3 per evaluation of F and its gradient, <= 10 per Newton iteration of a curve)."""
    rng = np.random.default_rng(seed)
    print("5. Streaming passes (1 pass = '(a * b).sum()' over states x phenotypes float64, "
          f"medians of {sizes.bandwidth_repeats})")
    print(f"   {'states x 8':<12}{'pass':>10}{'F,c eval':>10}{'build exp':>11}"
          f"{'Newton it.':>12}{'cold solve':>12}{'curve it.':>11}{'(grid only)':>13}"
          "   targets: eval <= 3, curve it. <= 10")
    for m in (10_000, 100_000):
        payoff, env = random_problem(m, 8, rng)
        beta = 3.0 * switchlaw.first_critical_beta(payoff, env) + 0.5
        unit = streaming_pass_seconds(m, 8, sizes.bandwidth_repeats)
        build, problem = per_beta_build_seconds(payoff, env, beta, 5)
        uniform = np.full(8, 1.0 / 8)
        newton, record = median_seconds(lambda: newton_marginal(problem, uniform), 3)
        per_iteration = newton / max(record.iterations, 1)
        evaluation, _ = median_seconds(lambda: evaluate(problem, record.marginal),
                                       sizes.bandwidth_repeats)
        cold, _ = median_seconds(lambda: switchlaw.solve(payoff, env, beta), 3)
        betas = np.geomspace(1e-2, 30, 10)
        curve = switchlaw.tradeoff(payoff, env, betas)
        curve_passes, _ = in_passes(lambda: switchlaw.tradeoff(payoff, env, betas), m, 8,
                                    sizes.curve_rounds)
        every = counted_iterations(lambda: switchlaw.tradeoff(payoff, env, betas))
        cells = [evaluation / unit, build / unit, per_iteration / unit, cold / unit,
                 curve_passes / max(every, 1),
                 curve_passes / max(int(curve.iterations.sum()), 1)]
        print(f"   {m:<12.0e}{format_seconds(unit):>10}"
              + "".join(f"{c:>10.1f}x" if i != 1 else f"{c:>10.1f}x "
                        for i, c in enumerate(cells)))
    print("   (curve it. = whole tradeoff() time, transitions located included, per Newton "
          "iteration of all its solves,\n    its pass timed right before each run, median of "
          f"{sizes.curve_rounds} runs;\n    grid only = the same time per iteration of the grid "
          "points alone, as if locating the transitions were free of iterations)")


def cold_solves(seed: np.random.SeedSequence) -> None:
    """Section 6: the public ``solve`` called cold at 100 x 4 (issue 13 target: < 1 ms)."""
    rng = np.random.default_rng(seed)
    problems = [random_problem(100, 4, rng) for _ in range(50)]
    betas = [3.0 * switchlaw.first_critical_beta(u, p) + 0.5 for u, p in problems]
    per_call = []
    for (u, p), beta in zip(problems, betas):
        seconds, _ = median_seconds(lambda: switchlaw.solve(u, p, beta), 5)
        per_call.append(seconds)
    median = float(np.median(per_call))
    print(f"6. Cold public solve at 100 x 4, 50 random problems: median "
          f"{format_seconds(median)} per call, 90th percentile "
          f"{format_seconds(float(np.quantile(per_call, 0.9)))}; target < 1 ms: "
          f"{verdict(median < 1e-3)}")


def cvxpy_large(seed: np.random.SeedSequence, points: int) -> None:
    """Section 7: the cvxpy ratio at 1000 x 8 (issue 13), Clarabel defaults, a few betas."""
    rng = np.random.default_rng(seed)
    payoff, env = random_problem(1000, 8, rng)
    betas = np.geomspace(0.1, 30, 100)
    sl_seconds, curve = median_seconds(lambda: switchlaw.tradeoff(payoff, env, betas), 3)
    program = build_conic_program(payoff, env)
    subset = betas[np.linspace(0, betas.size - 1, points).astype(int)]
    seconds = [solve_conic(program, float(b), CLARABEL_DEFAULTS, 1)[0] for b in subset]
    ratio = float(np.mean(seconds)) / (sl_seconds / betas.size)
    print(f"7. 1000 x 8, 100 betas: switchlaw {format_seconds(sl_seconds / betas.size)} per "
          f"point, cvxpy/Clarabel (defaults) {format_seconds(float(np.mean(seconds)))} per point "
          f"({points} betas): RATIO {ratio:.0f}x")


def previous_curve_memory(curve: switchlaw.Tradeoff) -> np.ndarray:
    """The previous curve's memory pattern: every beta's policy kept (a list of ``k`` arrays of
    ``states x phenotypes``) and stacked into one ``(k, states, phenotypes)`` array."""
    policies = [curve.probs_at(i) for i in range(curve.betas.size)]
    return np.stack(policies)


def traced_peak_megabytes(fn) -> tuple[float, object]:
    """Peak of the memory traced by :mod:`tracemalloc` while ``fn()`` runs (MB; numpy
    reports its array buffers to tracemalloc), and what ``fn`` returned."""
    tracemalloc.start()
    try:
        result = fn()
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    return peak / 1e6, result


def curve_memory(seed: np.random.SeedSequence, sizes: Sizes) -> bool:
    """Section 8: peak memory of a 100-beta curve on ``sizes.memory_states`` x 8 (issue 17:
    < 300 MB at 1e5 states), against the previous approach of keeping every policy."""
    m = sizes.memory_states
    payoff, env = random_problem(m, 8, np.random.default_rng(seed))
    betas = np.geomspace(1e-2, 30.0, 100)
    gc.collect()
    peak, curve = traced_peak_megabytes(lambda: switchlaw.tradeoff(payoff, env, betas))
    gc.collect()
    previous, probs = traced_peak_megabytes(lambda: previous_curve_memory(curve))
    table = payoff.nbytes / 1e6
    i = betas.size // 2
    rebuilt = switchlaw.solve(payoff, env, float(betas[i]))
    difference = float(np.max(np.abs(probs[i] - rebuilt.probs)))
    del probs
    print(f"8. Peak memory of a {betas.size}-beta curve on {m:.0e} states x 8 phenotypes "
          f"(tracemalloc; the payoff table is {table:.1f} MB)")
    print(f"   {'switchlaw.tradeoff (marginals kept, policies rebuilt on request)':<70}"
          f"{peak:>9.1f} MB")
    print(f"   {'previous approach (every policy kept and stacked), policies alone':<70}"
          f"{previous:>9.1f} MB  ({previous / peak:.1f}x)")
    print(f"   a rebuilt policy against a cold solve at beta {betas[i]:.3g}: max |diff| "
          f"{difference:.1e}")
    limit = 300.0 * m / 100_000
    passed = peak < limit
    print(f"   target < {limit:.0f} MB (300 MB at 1e5 states, scaled with the states): "
          f"{verdict(passed)}")
    return passed


# --------------------------------------------------------------------------- entry point


def parse_args(argv=None) -> argparse.Namespace:
    """Command-line options."""
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument(
        "--quick", action="store_true",
        help="smaller run: 4 cvxpy points, 2e4 states for the scaling (under a minute)",
    )
    parser.add_argument("--seed", type=int, default=0, help="seed of the random problems")
    return parser.parse_args(argv)


def main(argv=None) -> int:
    """Run every section and print the results; the exit status is 0 when all targets pass."""
    args = parse_args(argv)
    sizes = QUICK if args.quick else FULL
    seeds = np.random.SeedSequence(args.seed).spawn(3)
    start = time.perf_counter()
    print(f"switchlaw {switchlaw.__version__} tradeoff benchmark "
          f"({'quick' if args.quick else 'full'} run, seed {args.seed}, "
          f"OPENBLAS_NUM_THREADS={os.environ['OPENBLAS_NUM_THREADS']}, "
          f"{os.cpu_count()} CPUs)")
    print()
    passed = print_comparison(compare_with_cvxpy(seeds[0], sizes), sizes)
    print()
    payoff, env, beta, per_iteration = scaling(seeds[1], sizes)
    print()
    iterations_near_transitions(seeds[2], sizes)
    print()
    bandwidth_floor(payoff, env, beta, per_iteration, sizes.bandwidth_repeats)
    print()
    extra = np.random.SeedSequence(args.seed + 1).spawn(3)
    streaming_passes(extra[0], sizes)
    print()
    cold_solves(extra[1])
    print()
    cvxpy_large(extra[2], 2 if args.quick else 4)
    print()
    passed = curve_memory(np.random.SeedSequence(args.seed + 2), sizes) and passed
    print()
    print(f"total benchmark time {format_seconds(time.perf_counter() - start)}; "
          f"targets (accuracy, >= {SPEEDUP_TARGET:.0f}x, curve memory): {verdict(passed)}")
    return 0 if passed else 1


if __name__ == "__main__":
    raise SystemExit(main())
