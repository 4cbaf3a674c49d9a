"""Benchmark: stochastic simulation against the per-event / per-cell Python loops a user would write.

1. Well-mixed SSA: events per second of the vectorised exact engine (switchlaw.stochastic
   BirthDeathSwitching, replicates side by side) against a plain Python Gillespie loop of the
   same reactions, one replicate at a time; and of the exact jump chain behind
   simulate_hitting.
2. Lattice: cell turns ("site updates") per second of the vectorised sweep engine against a
   plain but sensible per-cell Python loop of the same sweep rules, written below in this file
   (:func:`python_sweeps`: lists, not arrays; one uniform per turn; neighbours looked up in a
   precomputed table; same classes, same per-turn probabilities, same law). Every ratio is
   printed. Targets: >= 20x at 64 x 64, on one lattice and with replicates batched in one array;
   >= 50x on the configurations users run at scale (batched replicates, large single
   lattices). The script exits with status 1 if a target is missed. The engine resolves all
   classes of a sweep at once (a fixed number of numpy passes per sweep), so a small single
   lattice pays that fixed cost over fewer sites than a batch does.
3. An extinction curve of 10 initial colony sizes x 1000 replicates on a 64 x 64 lattice
   (exact continuous-time engine). Target: a few minutes on 2 cores.
4. Install size: the bytes each installed distribution occupies in site-packages (from its
   RECORD, via importlib.metadata), for switchlaw's direct dependencies, each with everything
   it pulls in, and the whole site-packages folder.

Scenario (invented, demo values): go-or-grow cells on a von Neumann lattice; dividing pays in
crowded neighbourhoods, moving when isolated (max-entropy law, beta = 3).

Run:  python benchmarks/bench_stochastic.py [--quick]
"""

from __future__ import annotations

import argparse
import math
import time

import numpy as np

import switchlaw as sl
from switchlaw.stochastic import BirthDeathSwitching, Lattice, LatticeModel, hitting_probability, simulate_hitting

PAYOFF = {"divide": sl.Linear(1 / 4, 0.0), "move": sl.Linear(-1 / 4, 1.0)}


def make_law():
    return sl.derive_law(PAYOFF, lambda rho: sl.occupancy(4, rho), densities=np.linspace(0, 1, 21),
                         beta=3.0, objective="max-entropy")


def median_time(function, repeats):
    times, result = [], None
    for _ in range(repeats):
        start = time.perf_counter()
        result = function()
        times.append(time.perf_counter() - start)
    return float(np.median(times)), result


def side_by_side(first, second, repeats):
    """Median seconds of two functions timed in alternation (so both see the same machine load)."""
    times, results = ([], []), [None, None]
    for _ in range(repeats):
        for k, function in enumerate((first, second)):
            start = time.perf_counter()
            results[k] = function()
            times[k].append(time.perf_counter() - start)
    return float(np.median(times[0])), results[0], float(np.median(times[1])), results[1]


def default_dt(model: LatticeModel) -> float:
    """The sweep engine's default sweep: 0.1 / R, R the largest total rate of a cell."""
    return 0.1 / float(model.rules.rates().sum(axis=1).max())


def decided(model: LatticeModel, occupied: np.ndarray) -> np.ndarray:
    """Integer layouts whose phenotypes are the law's first decisions (read from a t = 0 snapshot)."""
    run = model.simulate(occupied, t_end=1.0, times=[0.0], snapshots=[0.0], replicates=occupied.shape[0], seed=11)
    return run.snapshots[0]


# --------------------------------------------------------------------------- baselines
def python_gillespie(model: BirthDeathSwitching, initial, t_end, replicates, seed):
    """Plain Gillespie direct method, one replicate and one event at a time (the baseline)."""
    rng = np.random.default_rng(seed)
    b, d = model.division.tolist(), model.death.tolist()
    size = len(b)
    capacity = model.capacity
    fractions = model._fractions  # law.fractions at n / K, as a user would tabulate them
    tau = model.tau
    events = 0
    for _ in range(replicates):
        x = list(initial)
        t = 0.0
        while True:
            n = sum(x)
            crowd = max(1.0 - n / capacity, 0.0)
            f = fractions[min(n, capacity)]
            rates = [b[i] * x[i] * crowd for i in range(size)] + [d[i] * x[i] for i in range(size)]
            pairs = [(i, j) for i in range(size) for j in range(size) if i != j]
            rates += [x[i] * f[j] / tau for i, j in pairs]
            total = sum(rates)
            if total == 0:
                break
            t += -math.log1p(-rng.random()) / total
            if t > t_end:
                break
            target = rng.random() * total
            k, acc = 0, rates[0]
            while acc <= target and k < len(rates) - 1:
                k += 1
                acc += rates[k]
            if k < size:
                x[k] += 1
            elif k < 2 * size:
                x[k - size] -= 1
            else:
                i, j = pairs[k - 2 * size]
                x[i] -= 1
                x[j] += 1
            events += 1
    return events


def python_sweeps(model: LatticeModel, codes: np.ndarray, sweeps: int, dt: float, seed: int):
    """Per-cell Python loop of the sweep rules for one lattice (the baseline).

    Same rules as the vectorised engine: each sweep visits the classes in random order; every
    cell present at the start takes one turn, acting with probability 1 - exp(-R_x dt) and then
    choosing an event in proportion to its rates; dividers and movers pick a random neighbour
    and succeed if it is free; deciders count occupied neighbours and draw from the law at the
    density at the start of the class. Cells born or moved in a sweep are marked (negative)
    and wait for the next sweep.
    """
    rules, lattice = model.rules, model.lattice
    rng = np.random.default_rng(seed)
    S, N = lattice.sites, lattice.size
    grid = codes.astype(int).tolist() + [0]
    neighbours = lattice.neighbours.tolist()
    classes = [c.tolist() for c in lattice.classes]
    rates = rules.rates().tolist()
    totals = [sum(r) for r in rates]
    chance = [-math.expm1(-total * dt) for total in totals]
    law = rules.law
    cells = sum(1 for v in grid if v)
    turns = 0
    for _ in range(sweeps):
        grid = [abs(v) for v in grid]
        for c in rng.permutation(len(classes)):
            density = cells / S
            for s in classes[c]:
                code = grid[s]
                if code <= 0:
                    continue
                turns += 1
                x = code - 1
                if rng.random() >= chance[x]:
                    continue
                b, d, m, k = rates[x]
                pick = rng.random() * totals[x]
                if pick < b or b + d <= pick < b + d + m:
                    t = neighbours[s][int(rng.random() * N)]
                    if t != S and grid[t] == 0:
                        grid[t] = -code
                        if pick < b:
                            cells += 1
                        else:
                            grid[s] = 0
                elif pick < b + d:
                    grid[s] = 0
                    cells -= 1
                elif law is not None:
                    y = sum(1 for t in neighbours[s] if grid[t] != 0)
                    q = law.probs(density)[y]
                    grid[s] = int(rng.choice(q.size, p=q)) + 1
    final = sum(1 for v in grid[:S] if v)
    return turns, final


# ------------------------------------------------------------------------------ sections
def section_ssa(law, quick: bool) -> None:
    print("1. Well-mixed SSA (exact), 2 phenotypes, capacity 500, law with tau = 1")
    model = BirthDeathSwitching(division=[1.0, 0.2], death=[0.3, 0.3], carrying_capacity=500, law=law, tau=1.0)
    replicates = 200 if quick else 1000
    seconds, run = median_time(lambda: model.simulate([20, 20], t_end=10.0, times=[10.0],
                                                       replicates=replicates, seed=1), 3)
    vector_rate = run.events / seconds
    loop_reps = 5 if quick else 20
    loop_seconds, loop_events = median_time(lambda: python_gillespie(model, [20, 20], 10.0, loop_reps, 2), 3)
    loop_rate = loop_events / loop_seconds
    print(f"   vectorised: {run.events} events in {seconds:.2f} s = {vector_rate:,.0f} events/s "
          f"({replicates} replicates side by side)")
    print(f"   Python loop: {loop_events} events in {loop_seconds:.2f} s = {loop_rate:,.0f} events/s")
    print(f"   ratio {vector_rate / loop_rate:.1f}x")
    b = lambda n: 1.2 * n**2 / (n + 20.0)  # noqa: E731
    d = lambda n: 0.5 * n  # noqa: E731
    reps = 20000 if quick else 100000
    seconds, result = median_time(lambda: simulate_hitting(b, d, 20, 200, replicates=reps, seed=3), 3)
    exact = hitting_probability(b, d, 20, 200)
    print(f"   jump chain (simulate_hitting, exact): {result.events / seconds:,.0f} jumps/s; "
          f"estimate {result.estimate:.4f} [{result.interval[0]:.4f}, {result.interval[1]:.4f}] vs exact {exact:.4f}")


def section_lattice(law, quick: bool) -> bool:
    print("2. Lattice sweeps: cell turns per second, vectorised engine vs per-cell Python loop")
    print("   (density 0.5 at the start, default sweep dt = 0.1 / R; medians of 5 runs, the two engines timed in turn)")
    # (shape, replicates, target ratio)
    cases = [((64, 64), 1, 20), ((64, 64), 16, 20), ((64, 64), 64, 50), ((60, 60), 64, 50), ((255, 255), 1, 50)]
    if not quick:
        cases += [((64, 64), 256, 50), ((510, 510), 1, 50), ((120, 120), 16, 50)]
    results = []
    for shape, replicates, target in cases:
        lattice = Lattice(shape)
        lattice.classes  # colour the lattice once (cached), outside the timings
        model = LatticeModel(lattice, division=[1.0, 0.0], death=[0.2, 0.2], motility=[0.0, 1.0], law=law, tau=0.5)
        dt = default_dt(model)
        start = decided(model, lattice.scatter(0.5, seed=1, replicates=replicates))
        sweeps = 100 if quick else 200
        t_end = sweeps * dt
        loop_sweeps = max(2, int(4 * 4096 / lattice.sites)) if quick else max(3, int(20 * 4096 / lattice.sites))
        seconds, run, loop_seconds, (turns, final) = side_by_side(
            lambda: model.simulate(start, t_end=t_end, times=[t_end], replicates=replicates, seed=2, engine="sweep",
                                   dt=dt),
            lambda: python_sweeps(model, start[0].ravel(), loop_sweeps, dt, 3), 5)
        vector_rate = run.site_updates / seconds
        loop_rate = turns / loop_seconds
        ratio = vector_rate / loop_rate
        results.append((f"{shape[0]} x {shape[1]} x {replicates}", ratio, target))
        verdict = "PASS" if ratio >= target else f"FAIL: below {target}x"
        print(f"   {shape[0]} x {shape[1]} x {replicates:>3} replicates: vectorised {vector_rate / 1e6:6.2f} M turns/s, "
              f"loop {loop_rate / 1e6:5.3f} M turns/s, ratio {ratio:6.1f}x  [target {target}x: {verdict}]")
    # Same rules: mean density after the same time from the same start, both engines.
    lattice = Lattice((48, 48))
    model = LatticeModel(lattice, division=[1.0, 0.0], death=[0.2, 0.2], motility=[0.0, 1.0], law=law, tau=0.5)
    dt = default_dt(model)
    reps = 4 if quick else 12
    start = decided(model, lattice.scatter(0.3, seed=5, replicates=1))[0]
    run = model.simulate(start, t_end=60 * dt, times=[60 * dt], replicates=reps, seed=6, engine="sweep", dt=dt)
    loops = [python_sweeps(model, start.ravel(), 60, dt, 100 + k)[1] / lattice.sites for k in range(reps)]
    print(f"   same rules, 48 x 48 after 60 sweeps: mean density vectorised {run.density[:, 0].mean():.4f} "
          f"(sd {run.density[:, 0].std(ddof=1):.4f}), loop {np.mean(loops):.4f} (sd {np.std(loops, ddof=1):.4f}), "
          f"{reps} runs each")
    missed = [f"{name} ({ratio:.0f}x < {target}x)" for name, ratio, target in results if ratio < target]
    print(f"   targets met on {len(results) - len(missed)} of {len(results)} configurations"
          + (f"; not on {', '.join(missed)}" if missed else ""))
    return not missed


def section_extinction(law, quick: bool) -> bool:
    replicates = 200 if quick else 1000
    print(f"3. Extinction curve: 10 colony sizes x {replicates} replicates on 64 x 64 (exact engine, "
          "colony safe at 100 cells)")
    lattice = Lattice((64, 64))
    model = LatticeModel(lattice, division=[1.0, 0.0], death=[0.1, 0.1], motility=[0.0, 1.0], law=law, tau=0.5)
    start = time.perf_counter()
    curve = model.extinction_curve(np.arange(1, 11), upper=100, replicates=replicates, seed=1)
    seconds = time.perf_counter() - start
    print(f"   {seconds:.1f} s ({'PASS' if seconds < 180 else 'FAIL'}: target a few minutes, < 180 s)")
    print("   P(extinct): " + " ".join(f"{p:.3f}" for p in curve.probability))
    if curve.threshold is not None:
        lo, hi = curve.threshold_range
        print(f"   crosses 1/2 at initial size {curve.threshold:.2f} (range {lo:.2f}–{hi:.2f})")
    return seconds < 180


def section_install_size() -> None:
    """What each direct dependency costs on disk, and what leaving it out of the core set would free."""
    import sysconfig
    from importlib import metadata
    from pathlib import Path

    from packaging.requirements import Requirement  # installed with dask and xarray
    from packaging.utils import canonicalize_name

    print("4. Install size (site-packages of this environment; each distribution's files from its RECORD)")
    dists = {canonicalize_name(d.metadata["Name"]): d for d in metadata.distributions()}

    def size(name):
        total = 0
        for file in dists[name].files or ():
            path = file.locate()
            total += path.stat().st_size if path.is_file() else 0
        return total

    def closure(requirement: Requirement, found=None):
        """Installed distributions a requirement pulls in, its extras and markers honoured."""
        found = set() if found is None else found
        name = canonicalize_name(requirement.name)
        if name in found or name not in dists:
            return found
        found.add(name)
        for line in dists[name].requires or ():
            need = Requirement(line)
            wanted = [{"extra": extra} for extra in requirement.extras] or [{"extra": ""}]
            if need.marker is None or any(need.marker.evaluate(env) for env in wanted):
                closure(need, found)
        return found

    direct = [Requirement(line) for line in metadata.requires("switchlaw") or ()]
    groups = {}
    for requirement in direct:
        extra = next((str(m) for m in [requirement.marker] if m is not None), "")
        groups[requirement] = extra.split('"')[1] if '"' in extra else "core"
    pulled = {r: closure(r) for r in direct}
    core = set().union(*(pulled[r] for r in direct if groups[r] == "core"))
    rows = []
    for r in direct:
        others = set().union(*(pulled[o] for o in direct if groups[o] == "core" and o is not r))
        only = pulled[r] - others  # what no other core dependency needs
        rows.append((sum(size(n) for n in pulled[r]), sum(size(n) for n in only), r, groups[r]))
    print(f"   {'dependency':<28} {'group':>5} {'with all it pulls in':>21} {'needed by it alone':>19}")
    for total, alone, r, group in sorted(rows, key=lambda row: -row[1]):
        print(f"   {str(r.name) + ('[' + ','.join(sorted(r.extras)) + ']' if r.extras else ''):<28} {group:>5} "
              f"{total / 2**20:17.1f} MiB {alone / 2**20:15.1f} MiB")
    site = Path(sysconfig.get_paths()["purelib"])
    folder = sum(p.stat().st_size for p in site.rglob("*") if p.is_file() and not p.is_symlink())
    print(f"   core set (pip install switchlaw): {sum(size(n) for n in core) / 2**20:.0f} MiB in "
          f"{len(core)} distributions; the whole site-packages folder ({site}): {folder / 2**20:.0f} MiB")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller runs")
    parser.add_argument("--only", choices=("ssa", "lattice", "extinction", "install"), help="run one section")
    args = parser.parse_args()
    print(f"switchlaw {sl.__version__}: stochastic benchmark ({'quick' if args.quick else 'full'} run)")
    law = make_law()
    ok = True
    if args.only in (None, "ssa"):
        section_ssa(law, args.quick)
    if args.only in (None, "lattice"):
        ok &= section_lattice(law, args.quick)
    if args.only in (None, "extinction"):
        ok &= section_extinction(law, args.quick)
    if args.only in (None, "install"):
        section_install_size()
    raise SystemExit(0 if ok else 1)


if __name__ == "__main__":
    main()
