"""The study's optional stages: extinction, lattice, fluctuating, schedule, sensitivity, variants.

Each ``run_*`` function calls the numeric stages' public functions for one section of the
study and returns a plain dict of arrays and numbers (no files); :func:`summaries` turns them
into the JSON-ready ``summary.json`` keys and :func:`verdict` into the plain-sentence answer
at the top of the report.
"""

from __future__ import annotations

import math

import numpy as np

from ._caution import CAUTION  # noqa: F401  (one caution text for every output)

#: Stages a run can be limited to (``--only``) or spared (``--skip``), in the order they run.
STAGES = ("calibration", "law", "population", "regime_map", "extinction", "lattice", "front", "fluctuating",
          "schedule", "sensitivity", "variants")
#: The study section each optional stage needs.
SECTION = {"calibration": "calibration", "population": "population", "regime_map": "regime_map", "extinction": "extinction",
           "lattice": "lattice", "front": "front", "fluctuating": "fluctuating", "schedule": "schedule",
           "sensitivity": "sensitivity", "variants": "variant"}

BETA_UNIT = "nats per payoff unit"
DENSITY_UNIT = "fraction of sites"


class StageError(ValueError):
    """A bad ``--only``/``--skip`` list (one line)."""


def select(study, only=None, skip=None) -> set:
    """The stages to run: those the study has, limited by ``only`` and ``skip`` (comma lists)."""
    def parse(text, flag):
        names = [n.strip() for n in (text or "").split(",") if n.strip()]
        for name in names:
            if name not in STAGES:
                raise StageError(f"{flag}: unknown stage {name!r} (valid: {', '.join(STAGES)})")
        return names

    wanted = parse(only, "--only")
    spared = parse(skip, "--skip")
    if only is not None and not wanted:
        raise StageError("--only: name at least one stage")
    if "law" in spared:
        raise StageError("--skip: the law stage cannot be skipped (every other stage needs it)")
    present = {"law"} | {s for s, key in SECTION.items() if getattr(study, key) is not None}
    for name in wanted:
        if name not in present:
            raise StageError(f"--only: the study has no [{SECTION[name]}] section for stage {name!r}")
    if "calibration" in spared and calibration_required(study):
        raise StageError("--skip: the calibration stage cannot be skipped: the payoff names the parameters "
                         "it fits")
    chosen = set(wanted) | {"law"} if only is not None else set(present)
    if "calibration" in present and "calibration" not in spared:
        chosen.add("calibration")  # the fit comes first: every later stage runs at its estimates
    return chosen - set(spared)


def calibration_required(study) -> bool:
    """Whether the study's payoff names parameters only a fit gives values to."""
    from ._sections import FIT_ROUTES

    cal = getattr(study, "calibration", None)
    return cal is not None and any(name not in FIT_ROUTES for name in cal.free)


def own_beta(study, value=None) -> float | None:
    """A section's beta: its own, else the study's (from beta or cost per bit), else None."""
    import switchlaw as sl

    if value is not None:
        return float(value)
    if study.decision.beta is not None:
        return float(study.decision.beta)
    if study.decision.cost_per_bit is not None:
        return sl.beta_from_cost(study.decision.cost_per_bit)
    return None


def _law_on_unit_interval(study, payoff, environment, beta, points=51):
    """The law on densities 0..1 at ``beta``, or by the study's own route when ``beta`` is None."""
    import switchlaw as sl

    if beta is not None:
        route = {"beta": beta}
    else:
        route = {k: getattr(study.decision, k) for k in ("beta", "cost_per_bit", "bits")
                 if getattr(study.decision, k) is not None}
    return sl.derive_law(payoff, environment, densities=np.linspace(0.0, 1.0, points),
                         objective=study.decision.objective, phenotypes=study.study.phenotypes, **route)


def _rates(study, table):
    return [getattr(study.population, table)[n] for n in study.study.phenotypes]


# ----------------------------------------------------------------------------- stages
def run_calibration(study, base_dir) -> dict:
    """Fit the [calibration] section (:func:`switchlaw.calibration.run_calibration_section`)."""
    from pathlib import Path

    from switchlaw.calibration import run_calibration_section

    from ._sections import FIT_ROUTES
    from ._study import environment_function, payoff_functions

    cal = study.calibration
    defaults = {k: v for k, v in cal.fixed.items() if k not in FIT_ROUTES}

    def payoff(**params):
        return payoff_functions(study, {**defaults, **{k: float(v) for k, v in params.items()}})

    section = {"data": cal.data, "free": {k: list(v) for k, v in cal.free.items()}, "fixed": dict(cal.fixed),
               "objective": cal.objective or study.decision.objective, "starts": cal.starts,
               "seed": study.study.seed if cal.seed is None else cal.seed, "bootstrap": cal.bootstrap,
               "population": cal.population and study.population is not None}
    pop = study.population
    out = run_calibration_section(
        section, payoff=payoff, environment=environment_function(study), phenotypes=study.study.phenotypes,
        base_dir=Path(".") if base_dir is None else Path(base_dir),
        division=None if pop is None else _rates(study, "division"),
        death=None if pop is None else _rates(study, "death"), tau=None if pop is None else pop.tau)
    out["data"] = cal.data
    return out


def fitted_study(study, fit: dict):
    """The study with the fitted beta and payoff parameters written in (no [calibration] left)."""
    import re

    from ._sections import FIT_ROUTES
    from ._study import Study

    result = fit["calibration"]
    values = {**{k: float(v) for k, v in study.calibration.fixed.items()},
              **{k: float(v) for k, v in result.estimates.items()}}
    data = study.model_dump()
    for name, spec in data["payoff"].items():
        if isinstance(spec, str):
            for param, value in values.items():
                if param not in FIT_ROUTES:
                    spec = re.sub(rf"(?<![\w.]){re.escape(param)}(?!\w)", f"({value!r})", spec)
            data["payoff"][name] = spec
    data["decision"].update(beta=values["beta"], cost_per_bit=None, bits=None,
                            objective=result.objective)
    data["calibration"] = None
    return Study.model_validate(data)


def run_extinction(study, model, payoff, environment) -> dict:
    """Exact chain risk at the study's beta and the chosen betas; simulated curves if asked."""
    import switchlaw as sl
    from switchlaw.stochastic._founders import chain_extinction

    ext = study.extinction
    upper = ext.established if ext.established is not None else ext.sites // 2
    first = own_beta(study)
    betas = ([first] if first is not None else []) + [float(b) for b in ext.betas if b != first]
    out = {"sites": ext.sites, "established": upper, "founders": list(ext.founders), "curves": []}
    for beta in betas:
        exact = chain_extinction(model, beta, sites=ext.sites, established=upper, sizes=ext.founders)
        entry = {"beta": beta, "exact": exact, "simulated": None}
        if ext.replicates:
            tau = ext.tau if ext.tau is not None else study.population.tau
            law = _law_on_unit_interval(study, payoff, environment, beta, points=min(ext.sites, 100) + 1)
            chain = sl.BirthDeathSwitching(division=_rates(study, "division"), death=_rates(study, "death"),
                                           carrying_capacity=ext.sites, law=law, tau=tau)
            entry["simulated"] = chain.extinction_curve(ext.founders, upper=upper, replicates=ext.replicates,
                                                        seed=study.study.seed)
            entry["tau"] = tau
        out["curves"].append(entry)
    return out


def run_lattice(study, payoff, environment) -> dict:
    """Lattice agents with the law at the section's beta, beside the law's mean-field trajectory."""
    import switchlaw as sl
    from switchlaw.stochastic._founders import neighbour_clustering

    lat = study.lattice
    beta = own_beta(study, lat.beta)  # None with a budget in bits: the law follows the study's route
    names = study.study.phenotypes
    lattice = sl.Lattice((lat.rows, lat.columns), neighbourhood=lat.neighbourhood)
    law = _law_on_unit_interval(study, payoff, environment, beta)
    model = sl.LatticeModel(lattice, division=_rates(study, "division"), death=_rates(study, "death"),
                            motility=[lat.motility.get(n, 0.0) for n in names], law=law, tau=lat.tau)
    initial = lattice.scatter(lat.initial_density, seed=study.study.seed, replicates=lat.replicates)
    shots = np.linspace(0.0, lat.t_end, lat.snapshots + 1)[1:] if lat.snapshots > 1 else np.array([lat.t_end])
    shots = np.concatenate([[0.0], shots])
    run = model.simulate(initial, t_end=lat.t_end, snapshots=shots, replicates=lat.replicates,
                         seed=study.study.seed)
    comparison = model.mean_field(run)
    clustering = [neighbour_clustering(lattice, run.snapshots[k]) for k in range(shots.size)]
    return {"beta": beta, "lattice": lattice, "run": run, "comparison": comparison,
            "clustering": clustering, "snapshot_times": shots}


LENGTH_UNIT = "length units"
SPEED_UNIT = "length units per time unit"


def run_front(study, model) -> dict:
    """Front runs at the section's betas (default: the study's) and the speed scan, if asked."""
    import switchlaw as sl

    front = study.front
    betas = [float(b) for b in front.betas] if front.betas else [own_beta(study)]
    from .._errors import InputError

    try:
        found = sl.front_study(model, diffusion=dict(front.diffusion), length=front.length, dx=front.dx,
                               t_end=front.t_end, dimension=front.dimension, betas=betas, frames=front.frames,
                               scan=None if front.scan is None else front.scan.model_dump())
    except InputError as error:
        raise InputError(f"front: {str(error).replace('`front.', '`')}") from None
    return {"study": found}


def fluctuating_inputs(study):
    """``(fitness[e, x], long-run fraction of each state, cue[e, c])`` of the [fluctuating] section."""
    import switchlaw as sl

    flu = study.fluctuating
    n = len(flu.states)
    fitness = np.array([[flu.fitness[x][e] for x in study.study.phenotypes] for e in range(n)], dtype=float)
    if flu.statistics == "iid":
        probs = np.asarray(flu.probabilities, dtype=float)
    elif flu.statistics == "periodic":
        probs = sl.PeriodicHabitat(list(range(n)), [int(d) for d in flu.durations]).time_fractions(n)
    else:
        probs = sl.MarkovHabitat(np.asarray(flu.transition, dtype=float)).probs
    return fitness, probs, sl.symmetric_cue(n, flu.cue_error)


def run_fluctuating(study) -> dict:
    """Long-run growth of the law along beta, net of the sensing cost, against bet hedging."""
    import switchlaw as sl

    flu = study.fluctuating
    fitness, probs, cue = fluctuating_inputs(study)
    beta = own_beta(study)
    if flu.betas is not None:
        betas = np.linspace(flu.betas.start, flu.betas.stop, flu.betas.points)
    else:
        betas = np.linspace(0.0, 4.0 * max(beta, 1e-3), 41)
    curve = sl.sensing_tradeoff(fitness, probs, cue, betas, cost_per_bit=flu.cost_per_bit)
    at_beta = None
    if beta is not None:
        at_beta = sl.sensing_tradeoff(fitness, probs, cue, [beta], cost_per_bit=flu.cost_per_bit)
    return {"beta": beta, "curve": curve, "at_beta": at_beta, "probs": probs,
            "hedging": sl.bet_hedging(fitness, probs), "with_cue": sl.bet_hedging(fitness, probs, cue=cue),
            "cue_information_bits": float(sl.mutual_information(probs, cue, unit="bits"))}


def stressed_model(study, model):
    """The mean-field model while the [schedule] stress is on."""
    import switchlaw as sl

    from ._study import payoff_functions

    stress = study.schedule.stress
    names = study.study.phenotypes
    payoff = model.payoff
    if stress.payoff:
        changed = study.model_copy(update={"payoff": {**study.payoff, **stress.payoff}})
        payoff = payoff_functions(changed)
    pop = study.population
    return sl.MeanField(
        payoff, model.environment,
        division=[stress.division.get(n, pop.division[n]) for n in names],
        death=[stress.death.get(n, pop.death[n]) for n in names],
        crowding=model.crowding, tau=model.tau, objective=model.objective, phenotypes=names,
    )


def run_schedule(study, model) -> dict:
    """Each plan of the [schedule] section through the mean-field model."""
    from switchlaw.population._schedule import scheduled_run, stress_periods

    sch = study.schedule
    beta = own_beta(study, sch.beta)
    stress = stressed_model(study, model)
    initial = sch.initial_density if sch.initial_density is not None else study.population.initial_density
    plans = []
    for plan in sch.plans:
        periods = stress_periods(on=plan.on, off=plan.off, cycles=plan.cycles, delay=plan.delay)
        run = scheduled_run(model, stress, beta, initial, periods=periods, t_end=sch.t_end,
                            regrowth_density=sch.regrowth_density)
        if not run.success:
            from .._errors import InputError

            raise InputError(f"schedule.plans ({plan.name}): {run.message}")
        plans.append({"plan": plan, "run": run})
    tolerant = sch.tolerant if sch.tolerant is not None else study.study.phenotypes[-1]
    return {"beta": beta, "initial": initial, "plans": plans, "tolerant": tolerant,
            "tolerant_index": study.study.phenotypes.index(tolerant)}


def _local_value(result, parameter, names, prefix):
    if parameter in ("beta", "tau"):
        return float(getattr(result, f"{prefix}_{parameter}")) if hasattr(result, f"{prefix}_{parameter}") else None
    table, name = parameter.split(".", 1)
    return float(getattr(result, f"{prefix}_{table}")[names.index(name)])


def run_sensitivity(study, model, diagram, *, jobs=None, scheduler=None, quiet=True) -> dict:
    """Local derivatives at the study's beta and Sobol' indices over the declared ranges."""
    import sys

    import switchlaw as sl

    from .._errors import InputError

    sen = study.sensitivity
    names = list(study.study.phenotypes)
    beta = own_beta(study, sen.beta)
    out = {"beta": beta, "equilibria": [], "critical": [], "sobol": []}
    if sen.parameters and beta is not None:
        threshold = model.allee_threshold(beta)
        for eq in model.equilibria(beta)[1:]:
            try:
                result = sl.equilibrium_sensitivity(model, beta, eq.density)
            except InputError:
                continue  # a fold: its derivative is that of a critical beta
            out["equilibria"].append({
                "density": eq.density, "stable": eq.stable, "allee_threshold": eq.density == threshold,
                "derivatives": {p: _local_value(result, p, names, "d_density_d") for p in sen.parameters},
            })
        points = diagram.critical_points if diagram is not None else model.critical_betas(
            study.population.betas.start, study.population.betas.stop)
        for point in points:
            try:
                result = sl.critical_sensitivity(model, point)
            except InputError:
                continue
            out["critical"].append({
                "kind": point.kind, "beta": float(point.beta), "density": float(point.density),
                "derivatives": {p: _local_value(result, p, names, "d_beta_d") for p in sen.parameters
                                if p != "beta"},
            })
    if sen.sobol is not None:
        spec = sen.sobol
        design = sl.saltelli_design({k: tuple(v) for k, v in spec.ranges.items()}, spec.samples,
                                    seed=study.study.seed)
        fixed = {} if "beta" in spec.ranges else {"beta": beta}
        executor = scheduler if scheduler is not None else ("processes" if jobs and jobs > 1 else "serial")
        dataset = sl.scan(sl.RegimeSummary(model, fixed=fixed), design, executor=executor,
                          jobs=jobs if executor == "processes" else None, seed=study.study.seed,
                          progress=not quiet and sys.stderr.isatty())
        for output in spec.outputs:
            values = dataset[output].fillna(0.0)
            try:
                indices = sl.sobol_indices(values, design, seed=study.study.seed)
            except InputError as error:
                out["sobol"].append({"output": output, "indices": None, "note": str(error)})
                continue
            out["sobol"].append({"output": output, "indices": indices, "note": ""})
    return out


# ------------------------------------------------------------------------- summaries
def _num(value):
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _nums(values):
    return [_num(v) for v in np.asarray(values, dtype=float).ravel()]


def _pair(pair):
    return [_num(pair[0]), _num(pair[1])]


def calibration_summary(fit: dict) -> dict:
    """The ``"calibration"`` key of summary.json (null where a profile does not cross its cut-off)."""
    result, pop = fit["calibration"], fit["population"]
    units = {name: (BETA_UNIT if name == "beta" else "payoff units") for name in result.estimates}
    out = {
        "data": fit["data"], "objective": result.objective, "cells": int(result.cells),
        "status": result.status, "message": result.message, "converged": bool(result.converged),
        "estimates": {k: _num(v) for k, v in result.estimates.items()},
        "intervals_95": {k: _pair(v) for k, v in result.intervals.items()},
        "identifiable": {k: bool(v) for k, v in result.identifiable.items()},
        "log_likelihood": _num(result.log_likelihood), "aic": _num(result.aic), "bic": _num(result.bic),
        "deviance": _num(result.deviance), "deviance_df": int(result.deviance_df),
        "deviance_p_value": _num(result.deviance_p_value), "verdict": result.verdict,
        "units": {**units, "log_likelihood": "nats", "aic": "nats (2 k - 2 log L)",
                  "deviance": "nats (twice the log-likelihood gap to the saturated model)"},
        "population": None,
    }
    if pop is not None:
        out["population"] = {
            "beta": _num(pop.beta), "beta_interval": _pair(pop.beta_interval), "regime": pop.regime,
            "betas": _nums(pop.betas), "regimes": [str(r) for r in pop.regimes],
            "critical_betas": [{"beta": _num(c.beta), "kind": c.kind} for c in pop.critical_betas],
            "sentence": pop.sentence, "beta_unit": BETA_UNIT,
        }
    return out


def summaries(extras: dict, names) -> dict:
    """The summary.json keys of the stages that ran."""
    out = {}
    if "calibration" in extras:
        out["calibration"] = calibration_summary(extras["calibration"])
    if "extinction" in extras:
        ext = extras["extinction"]
        curves = []
        for entry in ext["curves"]:
            exact = entry["exact"]
            item = {"beta": entry["beta"], "beta_unit": BETA_UNIT,
                    "exact": {"probability": _nums(exact.probability), "half_at_founders": _num(exact.half),
                              "method": "first-step analysis of the mean-field birth-death chain (fast switching)"}}
            sim = entry["simulated"]
            if sim is not None:
                item["simulated"] = {
                    "probability": _nums(sim.probability), "interval_95": [_nums(r) for r in sim.interval],
                    "replicates": sim.replicates, "half_at_founders": _num(sim.threshold),
                    "tau": entry["tau"], "method": sim.method,
                }
            curves.append(item)
        out["extinction"] = {"sites": ext["sites"], "established": ext["established"],
                             "founders": ext["founders"], "unit": "probability of dying out before establishing",
                             "curves": curves}
    if "front" in extras:
        out["front"] = {**extras["front"]["study"].summary(), "units": {
            "beta": BETA_UNIT, "speed": SPEED_UNIT, "linear_speed": SPEED_UNIT, "decay_rate": "per length unit",
            "width": LENGTH_UNIT, "edge_fractions": "fraction of cells", "bulk_fractions": "fraction of cells",
            "bulk_density": DENSITY_UNIT}}
    if "lattice" in extras:
        lat = extras["lattice"]
        cmp_ = lat["comparison"]
        out["lattice"] = {
            "beta": lat["beta"], "sites": int(lat["run"].sites),
            "final_density": _num(cmp_.measured[-1]), "final_density_standard_error": _num(cmp_.standard_error[-1]),
            "mean_field_final_density": _num(cmp_.predicted[-1]), "largest_discrepancy": _num(cmp_.largest),
            "largest_discrepancy_at": _num(cmp_.largest_at), "discrepancy_significant": bool(cmp_.significant),
            "density_unit": DENSITY_UNIT,
            "clustering": [{"time": _num(t), "neighbour_pair_correlation": _num(c)}
                           for t, c in zip(lat["snapshot_times"], lat["clustering"])],
        }
    if "fluctuating" in extras:
        flu = extras["fluctuating"]
        curve = flu["curve"]
        at = flu["at_beta"]
        out["fluctuating"] = {
            "unit": "nats per generation",
            "state_fractions": _nums(flu["probs"]),
            "cue_information_bits": flu["cue_information_bits"],
            "cost_per_bit": curve.cost_per_bit,
            "betas": _nums(curve.betas), "growth_rate": _nums(curve.growth_rate),
            "net_growth": _nums(curve.net_growth), "information_bits": _nums(curve.information_bits),
            "best_beta": _num(curve.best_beta), "best_net_growth": _num(curve.best_net_growth),
            "best_information_bits": _num(curve.best_information_bits),
            "bet_hedging_growth": _num(flu["hedging"].growth_rate),
            "optimal_growth_with_cue": _num(flu["with_cue"].growth_rate),
            "at_study_beta": None if at is None else {
                "beta": flu["beta"], "growth_rate": _num(at.growth_rate[0]), "net_growth": _num(at.net_growth[0]),
                "information_bits": _num(at.information_bits[0])},
        }
    if "schedule" in extras:
        sch = extras["schedule"]
        plans = []
        for entry in sch["plans"]:
            plan, run = entry["plan"], entry["run"]
            plans.append({
                "name": plan.name, "on": plan.on, "off": plan.off, "cycles": plan.cycles, "delay": plan.delay,
                "total_stress": plan.on * plan.cycles,
                "growth_per_cycle": _nums(run.growth_per_cycle),
                "tolerant_fraction_after_stress": _nums(run.fraction_after_stress[:, sch["tolerant_index"]]),
                "regrowth_time": "never" if run.regrowth_time is None else run.regrowth_time,
                "final_density": _num(run.density[-1]),
            })
        out["schedule"] = {"beta": sch["beta"], "tolerant": sch["tolerant"], "initial_density": sch["initial"],
                           "regrowth_density": sch["plans"][0]["run"].regrowth_density,
                           "units": {"time": "time units", "growth_per_cycle": "nats per cycle",
                                     "density": DENSITY_UNIT},
                           "plans": plans}
    if "sensitivity" in extras:
        sen = extras["sensitivity"]
        out["sensitivity"] = {
            "beta": sen["beta"],
            "equilibria": [{"density": e["density"], "stable": e["stable"], "allee_threshold": e["allee_threshold"],
                            "derivatives": {k: _num(v) for k, v in e["derivatives"].items()}}
                           for e in sen["equilibria"]],
            "critical_betas": [{"kind": c["kind"], "beta": c["beta"], "density": c["density"],
                                "derivatives": {k: _num(v) for k, v in c["derivatives"].items()}}
                               for c in sen["critical"]],
            "sobol": [{"output": s["output"], "note": s["note"],
                       **({} if s["indices"] is None else {
                           "parameters": list(s["indices"].names),
                           "first_order": _nums(s["indices"].first_order),
                           "total_order": _nums(s["indices"].total_order),
                           "total_order_error": _nums(s["indices"].total_order_error)})}
                      for s in sen["sobol"]],
        }
    return out


def _fmt(value, digits=3):
    return f"{value:.{digits}g}"


def verdict(data: dict, names) -> dict:
    """The answer in plain sentences, with the numbers and units they quote (from ``data``)."""
    sentences = []
    fields = {}

    def say(text, anchor):
        sentences.append({"text": text, "section": anchor})

    cal = data.get("calibration")
    if cal is not None and "beta" in cal["estimates"]:
        low, high = cal["intervals_95"]["beta"]
        fields["fitted_beta"] = {"value": cal["estimates"]["beta"], "interval_95": [low, high],
                                 "unit": BETA_UNIT, "identifiable": cal["identifiable"]["beta"]}
        ends = f"[{'–' if low is None else _fmt(low)}, {'–' if high is None else _fmt(high)}]"
        say(f"Fitted to the data: β = {_fmt(cal['estimates']['beta'])} {BETA_UNIT} (95% profile interval "
            f"{ends}); every later stage runs at the estimates. {cal['verdict']}", "calibration")
        if cal["population"] is not None:
            say(cal["population"]["sentence"], "calibration")
    at = data.get("at_study_beta")
    if at is not None:
        beta = at["beta"]
        fields["beta"] = {"value": beta, "unit": BETA_UNIT}
        fields["regime"] = at["regime"]
        whose = "fitted" if cal is not None else "study's"
        say(f"At the {whose} β = {_fmt(beta)} {BETA_UNIT}, the population is in the {at['regime']} regime.",
            "population")
        threshold = at["allee_threshold"]
        fields["allee_threshold"] = {"value": threshold if isinstance(threshold, float) else None,
                                     "unit": DENSITY_UNIT}
        if isinstance(threshold, float):
            say(f"Below an Allee threshold of {_fmt(threshold)} ({DENSITY_UNIT}) it declines.", "population")
        critical = (data.get("population") or {}).get("critical_betas", [])
        below = [c for c in critical if c["beta"] <= beta]
        above = [c for c in critical if c["beta"] > beta]
        nearest = ([max(below, key=lambda c: c["beta"])] if below else []) + (
            [min(above, key=lambda c: c["beta"])] if above else [])
        fields["nearest_critical_betas"] = [{"beta": c["beta"], "kind": c["kind"], "unit": BETA_UNIT}
                                            for c in nearest]
        if nearest:
            words = " and ".join(f"a {c['kind']} point at β = {_fmt(c['beta'])}" for c in nearest)
            say(f"The nearest critical betas are {words} {BETA_UNIT}.", "population")
    ext = data.get("extinction")
    if ext is not None and ext["curves"]:
        first = ext["curves"][0]
        n0 = ext["founders"][0]
        risk = first["exact"]["probability"][0]
        fields["extinction"] = {"founders": n0, "beta": first["beta"], "risk": risk, "unit": "probability",
                                "half_at_founders": first["exact"]["half_at_founders"],
                                "established": ext["established"]}
        half = first["exact"]["half_at_founders"]
        tail = (f"; the risk falls below one half from about {_fmt(half)} founders" if half is not None
                else "; it does not fall below one half for any founder size below the established size")
        say(f"A founding population of {n0} cell{'s' if n0 != 1 else ''} dies out before reaching "
            f"{ext['established']} cells with probability {_fmt(risk)} (exact, β = {_fmt(first['beta'])}){tail}.",
            "extinction")
    lat = data.get("lattice")
    if lat is not None:
        fields["lattice_final_density"] = {"value": lat["final_density"], "unit": DENSITY_UNIT,
                                           "mean_field": lat["mean_field_final_density"]}
        say(f"On the lattice the density ends at {_fmt(lat['final_density'])} against "
            f"{_fmt(lat['mean_field_final_density'])} in mean field ({DENSITY_UNIT}).", "lattice")
    front = data.get("front")
    if front is not None and front["runs"]:
        run = front["runs"][0]
        fields["front"] = {"beta": run["beta"], "speed": run["speed"], "linear_speed": run["linear_speed"],
                           "kind": run["kind"], "unit": SPEED_UNIT, "status": run["status"]}
        speed = "no measured speed" if run["speed"] is None else f"speed {_fmt(run['speed'])} {SPEED_UNIT}"
        linear = "" if run["linear_speed"] is None else f" (linear speed c* = {_fmt(run['linear_speed'])})"
        say(f"At β = {_fmt(run['beta'])} {BETA_UNIT} the front is {run['kind']} with {speed}{linear} "
            f"(status {run['status']}).", "front")
    flu = data.get("fluctuating")
    if flu is not None:
        fields["long_run_growth"] = {
            "value": None if flu["at_study_beta"] is None else flu["at_study_beta"]["growth_rate"],
            "unit": "nats per generation", "best_beta": flu["best_beta"],
            "best_net_growth": flu["best_net_growth"], "bet_hedging_growth": flu["bet_hedging_growth"]}
        if flu["at_study_beta"] is not None:
            say(f"In the fluctuating environment the law grows at {_fmt(flu['at_study_beta']['growth_rate'])} "
                f"nats per generation at the study's β, against {_fmt(flu['bet_hedging_growth'])} for the best "
                "bet hedging without a cue.", "fluctuating")
        say(f"Net of {_fmt(flu['cost_per_bit'])} nats per bit, the best β is {_fmt(flu['best_beta'])} {BETA_UNIT} "
            f"(net growth {_fmt(flu['best_net_growth'])} nats per generation).", "fluctuating")
    sch = data.get("schedule")
    if sch is not None:
        fields["regrowth"] = [{"plan": p["name"], "time": p["regrowth_time"], "unit": "time units"}
                              for p in sch["plans"]]
        parts = [f"{p['name']}: {'never' if p['regrowth_time'] == 'never' else _fmt(p['regrowth_time']) + ' time units'}"
                 for p in sch["plans"]]
        say(f"After the last stress period the density returns to {_fmt(sch['regrowth_density'])} "
            f"({DENSITY_UNIT}) after: " + "; ".join(parts) + ".", "schedule")
    sen = data.get("sensitivity")
    if sen is not None:
        ranked = []
        for s in sen["sobol"]:
            if "total_order" in s:
                ranked.append((s["output"], max(zip(s["total_order"], s["parameters"]),
                                                key=lambda t: -1 if t[0] is None else t[0])))
        if ranked:
            output, (value, name) = ranked[0]
            fields["most_influential"] = {"output": output, "parameter": name, "total_order_index": value,
                                          "unit": "1"}
            say(f"Over the declared ranges, {name} explains the most variance of {output.replace('_', ' ')} "
                f"(total-order Sobol' index {_fmt(value or 0.0, 2)}).", "sensitivity")
    variants = data.get("variants")
    if variants:
        parts = [f"{v['name']}: {v['verdict'].get('regime', '–')}" for v in variants]
        say("Variants — " + "; ".join(parts) + ".", "variants")
    return {"sentences": sentences, **fields}
