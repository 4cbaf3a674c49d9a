"""Run a study: derive the law, analyse the population, scan, export, report."""

from __future__ import annotations

import json
import math
import sys
import time
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import NamedTuple

import numpy as np

from ._caution import CAUTION
from ._study import Study, environment_function, payoff_functions


class Progress:
    """Stage messages with elapsed time on stderr; silent when quiet."""

    def __init__(self, stages: int, quiet: bool):
        self.stages, self.quiet, self.count = stages, quiet, 0
        self.start = self.stage_start = time.perf_counter()

    def stage(self, text: str) -> None:
        self.count += 1
        self.stage_start = time.perf_counter()
        if not self.quiet:
            elapsed = time.perf_counter() - self.start
            print(f"[{self.count}/{self.stages}] {text} (t = {elapsed:.1f} s)", file=sys.stderr, flush=True)

    def fraction(self, done: int, total: int, what: str) -> None:
        """A progress bar with the time left, redrawn in place (terminals only, not logs)."""
        if self.quiet or total <= 0 or not sys.stderr.isatty():
            return
        rate = (time.perf_counter() - self.stage_start) / max(done, 1)
        bar = "#" * int(30 * done / total)
        left = rate * (total - done) if done else float("nan")
        print(f"\r    {what} [{bar:<30}] {done}/{total}, about {left:.0f} s left ", end="",
              file=sys.stderr, flush=True)
        if done == total:
            print(file=sys.stderr, flush=True)


@dataclass
class Results:
    study: Study
    text: str
    law: object
    curve: object
    reference_density: float
    model: object = None
    diagram: object = None
    scan: object = None
    regime_map: object = None
    timings: dict = field(default_factory=dict)
    base_dir: Path | None = None
    stages: set = field(default_factory=set)
    extras: dict = field(default_factory=dict)
    variants: list = field(default_factory=list)


def _route(study: Study) -> dict:
    decision = study.decision
    for key in ("beta", "cost_per_bit", "bits"):
        value = getattr(decision, key)
        if value is not None:
            return {key: value}
    raise AssertionError("validated studies have exactly one route")


def run(study: Study, text: str, *, quiet: bool = False, jobs: int | None = None,
        scheduler: str | None = None, stages: set | None = None, base_dir=None) -> Results:
    """Compute everything the study asks for (no files written here).

    ``jobs`` (local processes) or ``scheduler`` (a Dask scheduler address or file) spread the
    scan over beta; results are identical whatever runs them. ``stages`` (from
    :func:`._stages.select`) limits the run to some stages; by default every stage the
    study has runs. ``base_dir`` is the folder relative paths of the study (data files) are
    read from (the study file's folder; the current folder when None).
    """
    import switchlaw as sl

    from . import _stages

    chosen = _stages.select(study) if stages is None else set(stages)
    extra = [s for s in chosen if s not in ("law", "population", "regime_map")]
    count = 2 + (2 if study.population and "population" in chosen else 0) + (
        1 if study.regime_map and "regime_map" in chosen else 0) + len(extra)
    progress = Progress(count, quiet)
    fit = None
    if study.calibration is not None and "calibration" in chosen:
        progress.stage("calibration: fitting beta and the payoff parameters to the data")
        fit = _stages.run_calibration(study, base_dir)
        study = _stages.fitted_study(study, fit)  # every later stage runs at the estimates
    payoff = payoff_functions(study)
    environment = environment_function(study)
    names = study.study.phenotypes

    progress.stage("deriving the switching law over densities")
    law = sl.derive_law(
        payoff, environment, densities=study.decision.densities.values(),
        objective=study.decision.objective, phenotypes=names, **_route(study),
    )

    progress.stage("information–payoff curve at the reference density")
    rho = study.decision.reference_density
    env = environment(rho)
    table = payoff(env)  # over true states; solvers apply the receptor themselves
    if study.population is not None:
        betas = study.population.betas.values()
    else:
        centre = float(np.nanmedian(law.betas[np.isfinite(law.betas)])) if np.isfinite(law.betas).any() else 1.0
        betas = np.linspace(0.0, 4.0 * max(centre, 1e-3), 81)
    curve = sl.tradeoff(table, env, betas, objective=study.decision.objective)
    results = Results(study=study, text=text, law=law, curve=curve, reference_density=rho, stages=chosen,
                      base_dir=None if base_dir is None else Path(base_dir))
    if fit is not None:
        results.extras["calibration"] = fit
    if study.population is None:
        _run_extras(results, payoff, environment, progress, jobs=jobs, scheduler=scheduler, quiet=quiet)
        return results

    pop = study.population
    model = sl.MeanField(
        payoff, environment,
        division=[pop.division[n] for n in names],
        death=[pop.death[n] for n in names],
        crowding=None if pop.crowding is None else [pop.crowding.get(n, 0.0) for n in names],
        tau=pop.tau, objective=study.decision.objective, phenotypes=names,
    )
    results.model = model
    if "population" in chosen:
        progress.stage("population regimes along beta (scan)")
        grid = pop.betas.values()
        executor = "serial"
        if scheduler is not None:
            executor = scheduler
        elif jobs is not None and jobs > 1:
            executor = "processes"
        dataset = sl.scan(
            sl.RegimeSummary(model), {"beta": grid}, executor=executor,
            jobs=jobs if executor == "processes" else None, seed=study.study.seed,
            progress=not quiet and sys.stderr.isatty(), study=study.study.title,
        )
        dataset.attrs["caution"] = CAUTION
        results.scan = dataset
        progress.stage("continuation of equilibrium branches in beta")
        results.diagram = model.continuation(
            pop.betas.start, pop.betas.stop,
            on_progress=lambda done, total: progress.fraction(done, total, "continuation"),
        )
    if study.regime_map is not None and "regime_map" in chosen:
        spec = study.regime_map
        progress.stage(f"regime map over beta x {spec.parameter}")
        results.regime_map = model.regime_map(
            np.linspace(pop.betas.start, pop.betas.stop, spec.beta_points), spec.parameter,
            spec.values.values(),
            on_row=lambda done, total: progress.fraction(done, total, spec.parameter),
        )
    _run_extras(results, payoff, environment, progress, jobs=jobs, scheduler=scheduler, quiet=quiet)
    return results


def _run_extras(results, payoff, environment, progress, *, jobs, scheduler, quiet) -> None:
    """The optional stages of :mod:`._stages` that were chosen, then each variant."""
    from . import _stages
    from ._study import variants

    study, chosen, extras = results.study, results.stages, results.extras
    if "extinction" in chosen:
        progress.stage("extinction risk against founder size")
        extras["extinction"] = _stages.run_extinction(study, results.model, payoff, environment)
    if "lattice" in chosen:
        progress.stage("lattice agents with the law")
        extras["lattice"] = _stages.run_lattice(study, payoff, environment)
    if "front" in chosen:
        progress.stage("travelling fronts with diffusing phenotypes")
        extras["front"] = _stages.run_front(study, results.model)
    if "fluctuating" in chosen:
        progress.stage("long-run growth in the fluctuating environment")
        extras["fluctuating"] = _stages.run_fluctuating(study)
    if "schedule" in chosen:
        progress.stage("mean-field model under the stress schedules")
        extras["schedule"] = _stages.run_schedule(study, results.model)
    if "sensitivity" in chosen:
        progress.stage("local and Sobol' sensitivities")
        extras["sensitivity"] = _stages.run_sensitivity(study, results.model, results.diagram, jobs=jobs,
                                                        scheduler=scheduler, quiet=quiet)
    if "variants" in chosen:
        for name, variant in variants(study, results.text):
            progress.stage(f"variant {name!r}: every stage")
            inner = (chosen - {"variants"}) & _stages.select(variant)
            results.variants.append((name, run(variant, results.text, quiet=True, jobs=jobs,
                                               scheduler=scheduler, stages=inner, base_dir=results.base_dir)))


def _finite(value):
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else ("inf" if value > 0 else "-inf" if value < 0 else "nan")


def study_beta(results) -> float | None:
    """The study's own sensitivity (from beta or cost per bit); None for a budget in bits."""
    import switchlaw as sl

    decision = results.study.decision
    if decision.beta is not None:
        return float(decision.beta)
    if decision.cost_per_bit is not None:
        return sl.beta_from_cost(decision.cost_per_bit)
    return None


def _scan_rows(dataset) -> list[dict]:
    """Per-beta rows of the regime scan, JSON-ready (NaN becomes null)."""
    rows = []
    for i, beta in enumerate(dataset["beta"].values):
        def number(name):
            value = float(dataset[name].values[i])
            return value if math.isfinite(value) else None

        rows.append({
            "beta": float(beta),
            "regime": str(dataset["regime"].values[i]),
            "low_density_growth": number("low_density_growth"),
            "largest_stable_density": number("stable_density"),
            "allee_threshold": number("allee_threshold"),
            "positive_equilibria": int(dataset["positive_equilibria"].values[i]),
        })
    return rows


def units(time_unit: str | None = None, route: str = "beta") -> dict:
    """The unit of every number of summary.json's core keys, by dotted key path.

    Each optional section's key carries its own ``units`` (or ``unit``) beside its values; the
    verdict quotes each number with its unit. Rates are per the study's time unit.
    """
    from ._stages import BETA_UNIT, DENSITY_UNIT

    per_time = f"per {time_unit}" if time_unit else "per time unit"
    return {
        "law.betas": BETA_UNIT, "law.densities": DENSITY_UNIT, "law.information_bits": "bits",
        "law.expected_payoff": "payoff units",
        "law.setting": {"beta": BETA_UNIT, "cost_per_bit": "payoff units per bit", "bits": "bits"}[route],
        "tradeoff.reference_density": DENSITY_UNIT, "tradeoff.critical_betas.beta": BETA_UNIT,
        "at_study_beta.beta": BETA_UNIT, "at_study_beta.allee_threshold": DENSITY_UNIT,
        "population.regimes.beta": BETA_UNIT, "population.regimes.low_density_growth": per_time,
        "population.regimes.largest_stable_density": DENSITY_UNIT,
        "population.regimes.allee_threshold": DENSITY_UNIT,
        "population.critical_betas.beta": BETA_UNIT, "population.critical_betas.density": DENSITY_UNIT,
        "regime_map.betas": BETA_UNIT, "regime_map.values": "scale factor (dimensionless)",
        "sensitivity.beta": BETA_UNIT,
        "sensitivity.equilibria.derivatives": "fraction of sites per unit of the parameter",
        "sensitivity.critical_betas.derivatives": "nats per payoff unit per unit of the parameter",
        "sensitivity.sobol": "dimensionless (share of variance)",
        "time": time_unit or "time units",
    }


def summary(results: Results) -> dict:
    """The machine-readable summary written as summary.json."""
    import switchlaw as sl

    law = results.law
    out = {
        "switchlaw_version": sl.__version__,
        "caution": CAUTION,
        "study": {"title": results.study.study.title, "notes": results.study.study.notes,
                  "seed": results.study.study.seed, "time_unit": results.study.study.time_unit},
        "law": {
            "objective": law.objective,
            "route": law.route,
            "setting": law.setting,
            "phenotypes": list(law.phenotypes),
            "densities": {"start": float(law.densities[0]), "stop": float(law.densities[-1]),
                          "points": int(law.densities.size)},
            "information_bits": [float(v) for v in law.information_bits],
            "expected_payoff": [float(v) for v in law.expected_payoff],
            "converged": bool(law.converged.all()),
        },
        "tradeoff": {
            "reference_density": results.reference_density,
            "critical_betas": [
                {"beta": c.beta, "entering": [law.phenotypes[x] for x in c.entering],
                 "leaving": [law.phenotypes[x] for x in c.leaving], "exact": c.exact}
                for c in results.curve.critical_betas
            ],
        },
    }
    out["law"]["betas"] = [_finite(b) for b in law.betas]
    beta = study_beta(results)
    if beta is not None and results.model is not None:
        out["at_study_beta"] = {
            "beta": beta,
            "regime": results.model.regime(beta),
            "allee_threshold": _finite(results.model.allee_threshold(beta)),
        }
    if results.scan is not None:
        out["population"] = {
            "regimes": _scan_rows(results.scan),
            "critical_betas": [
                {"beta": c.beta, "kind": c.kind, "density": c.density}
                for c in results.diagram.critical_points
            ],
            "continuation_complete": results.diagram.complete,
        }
    from . import _stages

    out.update(_stages.summaries(results.extras, law.phenotypes))
    if results.variants:
        out["variants"] = [{"name": name, **{k: v for k, v in summary(inner).items()
                                             if k not in ("switchlaw_version", "caution", "study")}}
                           for name, inner in results.variants]
    out["verdict"] = _stages.verdict(out, law.phenotypes)
    out["stages"] = [s for s in _stages.STAGES if s in results.stages]
    out["units"] = units(results.study.study.time_unit, law.route)
    if results.regime_map is not None:
        rm = results.regime_map
        out["regime_map"] = {
            "parameter": rm.parameter,
            "betas": [float(b) for b in rm.betas],
            "values": [float(v) for v in rm.values],
            "regimes": [[str(r) for r in row] for row in rm.regimes],
        }
    return out


class Figure(NamedTuple):
    """A figure written into ``figures/``: what it shows, for whom, and its PNG."""

    kind: str
    label: str
    path: Path


def figure_stem(index: int, name: str) -> str:
    """A short, safe, unique file stem for phenotype ``index`` named ``name``.

    Only ASCII letters, digits, ``-`` and ``_`` of the name are kept (at most 24), after the
    phenotype's 1-based position, which alone makes the stem unique.

    >>> figure_stem(0, "divide")
    'law-1-divide'
    >>> figure_stem(2, "../<b>évite</b>")
    'law-3-bviteb'
    """
    slug = re.sub(r"[^A-Za-z0-9_-]", "", name)[:24]
    return f"law-{index + 1}" + (f"-{slug}" if slug else "")


def write_outputs(results: Results, folder: Path) -> list[str]:
    """Write every output file into ``folder`` (a fresh temporary folder); returns their names."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    import switchlaw as sl

    from ._report import render

    figures = folder / "figures"
    figures.mkdir()
    made = []

    def save(fig, stem, kind, label=""):
        for suffix in ("png", "svg"):
            fig.savefig(figures / f"{stem}.{suffix}", dpi=110)
        plt.close(fig)
        made.append(Figure(kind, label, figures / f"{stem}.png"))

    names = list(results.law.phenotypes)
    shown = names[1:] if len(names) == 2 else names  # two phenotypes: one map says it all
    for name in shown:
        fig, axes = plt.subplots(1, 2, figsize=(10, 4), constrained_layout=True)
        sl.plot_law(results.law, phenotype=name, axes=axes)
        save(fig, "law" if len(shown) == 1 else figure_stem(names.index(name), name), "law", name)
    fig, ax = plt.subplots(figsize=(5.5, 4), constrained_layout=True)
    sl.plot_tradeoff(results.curve, ax=ax, phenotypes=names)
    save(fig, "tradeoff", "tradeoff")
    if results.diagram is not None:
        fig, ax = plt.subplots(figsize=(6.5, 4.2), constrained_layout=True)
        sl.plot_bifurcation(results.diagram, ax=ax)
        beta = study_beta(results)
        if beta is not None and results.diagram.value_range[0] <= beta <= results.diagram.value_range[1]:
            ax.axvline(beta, color="C2", lw=1, ls=":")
            ax.annotate("study's β", (beta, 0.97), xycoords=("data", "axes fraction"), fontsize=8,
                        color="C2", ha="left", va="top", xytext=(3, 0), textcoords="offset points")
        save(fig, "bifurcation", "bifurcation")
    if results.regime_map is not None:
        fig, ax = plt.subplots(figsize=(6.5, 4.5), constrained_layout=True)
        sl.plot_regime_map(results.regime_map, ax=ax)
        save(fig, "regime_map", "regime_map")

    extra = _extra_figures(results, save, made)
    data = summary(results)
    (folder / "summary.json").write_text(json.dumps(data, indent=2, allow_nan=False) + "\n", encoding="utf-8")
    (folder / "study.toml").write_text(results.text, encoding="utf-8")
    written = ["summary.json", "study.toml"]
    formats = results.study.exports.formats
    study_record = {"title": results.study.study.title, "toml": results.text}
    time_unit = results.study.study.time_unit
    if time_unit is not None:
        study_record["time_unit"] = time_unit
    if "csv" in formats:
        done = sl.export(results.law, folder / "law.csv", study=study_record)
        written += [Path(p).name for p in done.paths]
    if "netcdf" in formats:
        sl.export(results.law, folder / "law.nc", study=study_record)
        written.append("law.nc")
        if results.scan is not None:
            sl.save_scan(results.scan, folder / "scan.nc", time_unit=time_unit)
            written.append("scan.nc")
    if "sbml" in formats and results.model is not None:
        sl.export(results.model, folder / "model.sbml", format="sbml", law=results.law,
                  initial=results.study.population.initial_density, study=study_record,
                  time_unit=time_unit or "second")
        written.append("model.sbml")
    (folder / "report.html").write_text(render(results, data, made, extra), encoding="utf-8")
    written.append("report.html")
    return written + [f"figures/{p.name}" for p in sorted(figures.iterdir())]


def _extra_figures(results: Results, save, saved: list) -> dict:
    """Save the optional stages' figures; name -> (png path, caption)."""
    from . import _figures

    extras, made = results.extras, []
    names = list(results.law.phenotypes)
    if "calibration" in extras:
        made += _figures.calibration(extras["calibration"])
    if "extinction" in extras:
        made += _figures.extinction(extras["extinction"])
    if "lattice" in extras:
        made += _figures.lattice(extras["lattice"])
    if "front" in extras:
        made += _figures.front(extras["front"])
    if "fluctuating" in extras:
        made += _figures.fluctuating(extras["fluctuating"])
    if "schedule" in extras:
        made += _figures.schedule(extras["schedule"], names, results.study.schedule.treatment)
    if "sensitivity" in extras:
        made += _figures.sensitivity(extras["sensitivity"])
    if results.variants:
        made += _figures.variants(results.diagram, results.variants)
    out = {}
    for name, fig, caption in made:
        save(fig, name, name)
        out[name] = (saved[-1].path, caption)
    return out
