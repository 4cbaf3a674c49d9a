"""Invasion fronts: switchlaw.simulate_front against py-pde on the same equation and grid.

Invented go-or-grow scenario: cells sense how many of their 6 neighbour sites are occupied
(Binomial(6, rho)); dividing pays in crowded neighbourhoods, moving when isolated; the
max-entropy law at beta gives q(divide | y) = 1 / (1 + exp(-beta (y/3 - 1))), so the
fraction of dividers at density rho has the closed form
f(rho) = sum_y C(6, y) rho^y (1 - rho)^(6 - y) q(divide | y), which py-pde is given as an
expression (switchlaw derives the law itself). Equations (tau = 0.5, death 0.1, dividers
do not move, movers diffuse with D = 1):

    g_t = (1 - rho) g - 0.1 g + (rho f - g) / tau
    m_t = D m_xx - 0.1 m + (rho (1 - f) - m) / tau

Both solve on the same 2,000 cell-centred points with no-flux ends. switchlaw: BDF with the
exact sparse Jacobian, rtol 1e-6, atol 1e-9. py-pde: what a user of that package would write,
its adaptive Runge-Kutta 5(4) solver (numba backend) with tolerance 1e-6; compile time is timed
apart and not counted. Prints medians and ratios.

    python benchmarks/bench_fronts.py            # about 3-5 minutes on 2 busy cores
    python benchmarks/bench_fronts.py --quick    # t_end 60, a 10-point scan
"""

from __future__ import annotations

import argparse
import math
import statistics
import time

import numpy as np

import switchlaw as sl
from switchlaw.spatial._measure import crossing

PAYOFF = {"divide": sl.Linear(1 / 6, 0.0), "move": sl.Linear(-1 / 6, 1.0)}
TAU, DEATH, D = 0.5, 0.1, 1.0


def model():
    return sl.MeanField(PAYOFF, lambda rho: sl.occupancy(6, rho), division=[1.0, 0.0],
                        death=[DEATH, DEATH], tau=TAU, objective="max-entropy")


def fraction_expression(beta: float) -> str:
    terms = []
    for y in range(7):
        q = 1.0 / (1.0 + math.exp(-beta * (y / 3 - 1)))
        terms.append(f"{math.comb(6, y) * q!r} * (g + m)**{y} * (1 - g - m)**{6 - y}")
    return "(" + " + ".join(terms) + ")"


def pypde_front(beta, length, cells, t_end, start, bulk):
    import pde

    f = fraction_expression(beta)
    rho = "(g + m)"
    equation = pde.PDE({
        "g": f"(1 - {rho}) * g - {DEATH} * g + ({rho} * {f} - g) / {TAU}",
        "m": f"{D} * laplace(m) - {DEATH} * m + ({rho} * (1 - {f}) - m) / {TAU}",
    })
    grid = pde.CartesianGrid([[0.0, length]], cells)
    x = grid.axes_coords[0]
    fields = [pde.ScalarField(grid, np.where(x < start, value, 0.0), label=name)
              for name, value in zip(("g", "m"), bulk)]
    state = pde.FieldCollection(fields)
    begin = time.perf_counter()
    final = equation.solve(state, t_range=t_end, solver="runge-kutta", adaptive=True, tolerance=1e-6,
                           tracker=None, backend="numba")
    seconds = time.perf_counter() - begin
    total = final[0].data + final[1].data
    return x, total, seconds


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args(argv)
    t_end = 60.0 if args.quick else 150.0
    scan_points = 10 if args.quick else 50
    beta, cells = 1.5, 2000
    field = model()
    linear = sl.spreading_speed(field, beta, diffusion=[0.0, D])
    length = 400.0
    dx = length / cells
    start = length / 20
    print(f"1-D front, 2 phenotypes, {cells} points (dx = {dx:g}), t_end = {t_end:g}, beta = {beta}")
    print(f"  linear speed c* = {linear.speed:.6f}, lambda* = {linear.decay_rate:.4f}")

    ours = []
    for _ in range(args.repeats):
        begin = time.perf_counter()
        run = sl.simulate_front(field, beta, diffusion=[0.0, D], length=length, dx=dx, t_end=t_end, rtol=1e-6)
        ours.append(time.perf_counter() - begin)
    print(f"  switchlaw: {statistics.median(ours):.2f} s (median of {args.repeats}); {run}")

    bulk = run.profiles[0, 0]
    begin = time.perf_counter()
    pypde_front(beta, length, cells, 1.0, start, bulk)  # compiles the numba kernels
    compile_seconds = time.perf_counter() - begin
    theirs = []
    for _ in range(args.repeats):
        x, total, seconds = pypde_front(beta, length, cells, t_end, start, bulk)
        theirs.append(seconds)
    their_position = crossing(x, total, 0.5 * run.bulk_density)
    our_position = run.positions[-1]
    print(f"  py-pde (adaptive Runge-Kutta 5(4), numba): {statistics.median(theirs):.2f} s "
          f"(median of {args.repeats}; compile {compile_seconds:.1f} s not counted)")
    print(f"  ratio py-pde / switchlaw: {statistics.median(theirs) / statistics.median(ours):.2f}")
    print(f"  front position at t_end: switchlaw {our_position:.4f}, py-pde {their_position:.4f}, "
          f"difference {abs(our_position - their_position):.2e} (dx = {dx:g})")
    print(f"  largest density difference: {np.abs(run.density[-1] - total).max():.2e}")

    betas = np.linspace(0.5, 3.0, scan_points)
    begin = time.perf_counter()
    speeds, kinds = [], []
    for b in betas:
        result = sl.simulate_front(field, b, diffusion=[0.0, D], length=length, dx=dx, t_end=t_end)
        speeds.append(result.speed)
        kinds.append(result.kind)
    scan_seconds = time.perf_counter() - begin
    print(f"{scan_points}-point beta scan of front speed (beta {betas[0]:g} to {betas[-1]:g}): "
          f"{scan_seconds:.1f} s, {scan_seconds / scan_points:.2f} s per point; py-pde at its "
          f"median would take {scan_points * statistics.median(theirs):.0f} s "
          f"(ratio {scan_points * statistics.median(theirs) / scan_seconds:.1f})")
    print("  beta  speed  kind")
    for b, c, k in list(zip(betas, speeds, kinds))[:: max(1, scan_points // 10)]:
        print(f"  {b:5.2f} {c:7.4f} {k}")


if __name__ == "__main__":
    main()
