"""Rough time and memory of a study's stages, judged before anything is computed.

The model counts evaluations of the sensed environment, which dominate every stage: one per
density for the law, about :data:`CALLS_PER_BETA` per beta for the regime scan and the
continuation, and as many per cell of the regime map. Each evaluation costs a few times
:data:`SECONDS_PER_CALL` (larger for a finite lattice, a continuous signal and many states).
The constants are rough orders of magnitude on a 2-core laptop-class machine (common
practice, no source): the estimate says "minutes or days", not seconds. Above
:data:`TIME_LIMIT` or :data:`MEMORY_LIMIT` ``check`` and ``run`` refuse the study unless
``--yes`` is given.
"""

from __future__ import annotations

#: Seconds of one evaluation of a Binomial neighbour count with few states.
SECONDS_PER_CALL = 2e-5
#: How much slower a finite lattice (hypergeometric) or a binned continuous signal is.
LATTICE_FACTOR = 50.0
SIGNAL_FACTOR = 100.0
#: Environment evaluations per beta of the scan and the continuation (equilibria, stability).
CALLS_PER_BETA = 200
#: Refuse above these without --yes.
TIME_LIMIT = 30 * 60.0
MEMORY_LIMIT = 4 * 2**30
#: float64 arrays of the law's size held at once (probabilities, payoffs, policies, marginals).
ARRAYS = 16


def states(study) -> int:
    """Sensed states of one environment (neighbour counts, or bins)."""
    senses = study.senses
    if senses.kind == "neighbours":
        return int(senses.neighbours) + 1
    return max(len(senses.edges or ()) - 1, 1)


#: Seconds per event of the lattice and birth-death simulations (one division, death, move or switch).
SECONDS_PER_EVENT = 2e-6
#: Seconds of the front solver per grid cell, phenotype and unit of simulated time (stiff BDF
#: with the law evaluated along the profile; measured order of magnitude on the demo fronts).
FRONT_SECONDS = 2e-4
#: Environment evaluations of one calibration likelihood and the evaluations of one fit
#: (starts, then two profile branches of about 30 points per parameter).
CALLS_PER_LIKELIHOOD = 20
FIT_EVALUATIONS = 300


def _per_call(study) -> float:
    n = states(study)
    phenotypes = len(study.study.phenotypes)
    per_call = SECONDS_PER_CALL * (1.0 + n * phenotypes / 100.0)
    if study.senses.kind == "signal":
        per_call *= SIGNAL_FACTOR
    elif study.senses.lattice_sites is not None:
        per_call *= LATTICE_FACTOR
    return per_call


def stages(study) -> dict:
    """Rough ``{stage: (seconds, bytes)}`` of one run of the study itself (variants not counted)."""
    n = states(study)
    phenotypes = len(study.study.phenotypes)
    per_call = _per_call(study)
    densities = study.decision.densities.points
    law_bytes = 8.0 * ARRAYS * densities * n * (n if study.senses.receptor else 1) * phenotypes
    out = {"law": ((densities + 81) * per_call, law_bytes)}
    pop = study.population
    if pop is not None:
        out["population"] = (2 * pop.betas.points * CALLS_PER_BETA * per_call, 0.0)
    if study.regime_map is not None:
        rm = study.regime_map
        out["regime_map"] = (rm.beta_points * rm.values.points * CALLS_PER_BETA * per_call,
                             8.0 * rm.beta_points * rm.values.points)
    cal = getattr(study, "calibration", None)
    if cal is not None:
        fits = cal.starts + 60 * len(cal.free) + cal.bootstrap * (cal.starts + 1)
        out["calibration"] = (fits * FIT_EVALUATIONS * CALLS_PER_LIKELIHOOD * per_call / 10.0, 0.0)
    ext = study.extinction
    if ext is not None:
        betas = len(ext.betas) + 1
        simulated = ext.replicates * len(ext.founders) * ext.sites * 20 * SECONDS_PER_EVENT
        out["extinction"] = (betas * (ext.sites + 1) * per_call + betas * simulated,
                             8.0 * ext.sites * ext.sites)
    lat = study.lattice
    if lat is not None:
        sites = lat.rows * lat.columns
        rate = 1.0 / lat.tau + 2.0 + max(lat.motility.values(), default=0.0)
        out["lattice"] = (sites * lat.replicates * lat.t_end * rate * SECONDS_PER_EVENT + 101 * per_call,
                          24.0 * sites * lat.replicates * (lat.snapshots + 2))
    front = getattr(study, "front", None)
    if front is not None:
        cells = front.length / front.dx
        runs = len(front.betas or [None]) + (front.scan.points if front.scan is not None else 0)
        out["front"] = (runs * cells * phenotypes * front.t_end * FRONT_SECONDS,
                        8.0 * front.frames * cells * phenotypes * len(front.betas or [None]) * 2)
    sen = study.sensitivity
    if sen is not None and sen.sobol is not None:
        points = sen.sobol.samples * (len(sen.sobol.ranges) + 2)
        out["sensitivity"] = (points * CALLS_PER_BETA * per_call, 8.0 * points * 4)
    elif sen is not None:
        out["sensitivity"] = (len(sen.parameters) * CALLS_PER_BETA * per_call, 0.0)
    if study.fluctuating is not None:
        out["fluctuating"] = (1.0, 0.0)
    if study.schedule is not None:
        out["schedule"] = (len(study.schedule.plans) * 2.0, 0.0)
    return out


def estimate(study) -> dict:
    """``{"seconds", "bytes", "stage"}`` for the whole study (rough): variants repeat every stage.

    ``stage`` names the stage that costs the most time.
    """
    parts = stages(study)
    copies = 1 + len(study.variant or ())
    seconds = copies * sum(t for t, _ in parts.values())
    memory = max(b for _, b in parts.values())
    stage = max(parts, key=lambda k: parts[k][0])
    return {"seconds": seconds, "bytes": memory, "stage": stage, "copies": copies,
            "memory_stage": max(parts, key=lambda k: parts[k][1])}


#: What to shrink when a stage is too costly.
ADVICE = {
    "law": "fewer decision.densities points, states or phenotypes",
    "population": "fewer points in population.betas, or fewer states",
    "regime_map": "fewer regime_map points or beta_points",
    "calibration": "fewer calibration.starts or bootstrap refits, or fewer free parameters",
    "extinction": "fewer extinction.sites, founders or replicates",
    "lattice": "a smaller lattice (rows x columns), fewer replicates or a shorter t_end",
    "front": "a larger front.dx, a shorter length or t_end, fewer betas or scan points",
    "sensitivity": "fewer sensitivity.sobol samples or ranges",
    "fluctuating": "fewer fluctuating betas",
    "schedule": "fewer schedule plans",
}


def over_limit(study) -> str | None:
    """Why the study is above the limits (one line naming the costliest stage), or None."""
    found = estimate(study)
    times = f" ({found['copies']} runs: the study and its variants)" if found["copies"] > 1 else ""
    if found["bytes"] > MEMORY_LIMIT:
        stage = found["memory_stage"]
        return (f"the {stage} stage needs about {found['bytes'] / 2**30:.1f} GiB of memory (limit "
                f"{MEMORY_LIMIT / 2**30:.0f} GiB): {ADVICE[stage]}")
    if found["seconds"] > TIME_LIMIT:
        stage = found["stage"]
        return (f"the study would take about {found['seconds'] / 60:.0f} minutes{times} (limit "
                f"{TIME_LIMIT / 60:.0f}), mostly the {stage} stage: {ADVICE[stage]}")
    return None
