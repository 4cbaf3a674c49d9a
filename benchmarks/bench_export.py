"""Benchmark: exporting a large law, against the code a user would otherwise write.

Invented scenario: a min-information law on 401 densities x 9 states (Moore neighbourhood)
x 2 phenotypes. Side by side in one run, medians of several repeats, printed as ratios:

1. ``export(law, "law.csv")`` (long table + sidecar, exact decimals, atomic write) against
   pandas ``DataFrame.to_csv(float_format="%.17g")`` of the same long table (no sidecar).
2. ``export(law, "law.nc")`` against ``law.to_xarray().to_netcdf(engine="h5netcdf")``.
3. ``read_table("law.csv")`` (with the hash check) against ``pandas.read_csv``.
4. SBML: writing the exact piecewise-linear table and loading it in libroadrunner, against the
   same model with the logistic closed form (what the exact table costs a simulator).
5. SBML at 1001 grid points (finite tau): export plus loading in COPASI (copasi-basico)
   against export plus loading in libroadrunner, and export alone against the latter.

Run:  python benchmarks/bench_export.py [--repeats 5]
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np

import switchlaw as sl
from switchlaw.exporters import export, read_table


def median_seconds(task, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        task()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def long_frame(law):
    import pandas as pd

    k, m, n = law.table.shape
    return pd.DataFrame({
        "density": np.repeat(law.densities, m * n),
        "state": np.tile(np.repeat(law.states, n), k),
        "state_value": np.tile(np.repeat(law.state_values, n), k),
        "phenotype": np.tile(np.array(law.phenotypes), k * m),
        "probability": law.table.ravel(),
        "state_probability": np.repeat(law.state_probs.ravel(), n),
    })


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--sbml-repeats", type=int, default=3, help="repeats of the 1001-point SBML rows")
    args = parser.parse_args()

    payoff = {"divide": sl.Linear(1 / 8, 0.0), "move": sl.Linear(-1 / 8, 1.0)}
    moore = lambda rho: sl.occupancy(8, rho)  # noqa: E731
    law = sl.derive_law(payoff, moore, densities=np.linspace(0, 1, 401), beta=3.0)
    folder = Path(tempfile.mkdtemp(prefix="bench-export-"))
    rows = []

    frame = long_frame(law)
    ours = median_seconds(lambda: export(law, folder / "law.csv", overwrite=True), args.repeats)
    theirs = median_seconds(lambda: frame.to_csv(folder / "pandas.csv", index=False, float_format="%.17g"),
                            args.repeats)
    rows.append(("CSV write (export vs pandas.to_csv %.17g)", ours, theirs))

    ours = median_seconds(lambda: export(law, folder / "law.nc", overwrite=True), args.repeats)
    theirs = median_seconds(lambda: law.to_xarray().to_netcdf(folder / "plain.nc", engine="h5netcdf"),
                            args.repeats)
    rows.append(("netCDF write (export vs to_xarray().to_netcdf)", ours, theirs))

    import pandas as pd

    ours = median_seconds(lambda: read_table(folder / "law.csv"), args.repeats)
    theirs = median_seconds(lambda: pd.read_csv(folder / "pandas.csv"), args.repeats)
    rows.append(("CSV read (read_table + hash vs pandas.read_csv)", ours, theirs))

    import roadrunner

    grid_law = sl.derive_law(payoff, moore, densities=np.linspace(0, 1, 101), beta=3.0, objective="max-entropy")
    model = sl.MeanField(payoff, moore, division=[1.0, 0.0], death=[0.2, 0.2], objective="max-entropy")

    def sbml(fractions):
        def task():
            export(model, folder / f"{fractions}.xml", law=grid_law, initial=0.5, fractions=fractions,
                   tolerance=0.1, overwrite=True)
            runner = roadrunner.RoadRunner(str(folder / f"{fractions}.xml"))
            runner.simulate(0.0, 50.0, 501)
        return task

    ours = median_seconds(sbml("table"), args.repeats)
    theirs = median_seconds(sbml("logistic"), args.repeats)
    rows.append(("SBML write+load+simulate (101-point table vs logistic)", ours, theirs))

    # 1001-point table: export plus loading in COPASI (copasi-basico) against export plus
    # loading the same file in libroadrunner (the client switchlaw was first checked with).
    import basico

    big_law = sl.derive_law(payoff, moore, densities=np.linspace(0, 1, 1001), beta=3.0, objective="max-entropy")
    finite = sl.MeanField(payoff, moore, division=[1.0, 0.0], death=[0.2, 0.2], objective="max-entropy", tau=2.0)
    big = folder / "big.xml"
    write_only = median_seconds(lambda: export(finite, big, law=big_law, initial=0.5, overwrite=True),
                                args.sbml_repeats)

    def copasi():
        export(finite, big, law=big_law, initial=0.5, overwrite=True)
        basico.remove_datamodel(basico.load_model(str(big)))

    def libroadrunner():
        export(finite, big, law=big_law, initial=0.5, overwrite=True)
        roadrunner.RoadRunner(str(big))

    ours = median_seconds(copasi, args.sbml_repeats)
    theirs = median_seconds(libroadrunner, args.sbml_repeats)
    rows.append(("SBML 1001 points: export + COPASI load vs + roadrunner", ours, theirs))
    rows.append(("SBML 1001 points: export alone vs export + roadrunner", write_only, theirs))

    print(f"{'task':58s} {'switchlaw s':>12s} {'baseline s':>11s} {'ratio':>7s}")
    for name, a, b in rows:
        print(f"{name:58s} {a:12.4f} {b:11.4f} {a / b:7.2f}")
    print(f"(ratio = switchlaw / baseline; medians of {args.repeats} runs; law: {law!r})")


if __name__ == "__main__":
    main()
