"""Study-file sections beyond the law and the mean-field model.

``[extinction]``, ``[lattice]``, ``[fluctuating]``, ``[schedule]``, ``[sensitivity]`` and
``[[variant]]``: their pydantic models and the rules that span several keys. Each problem is
``(key path, message, value)``, reported by :mod:`._study` as one line.
"""

from __future__ import annotations

import math
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True)


class Betas(_Strict):
    """An evenly spaced grid of betas (nats per payoff unit)."""

    start: float = Field(ge=0)
    stop: float
    points: int = Field(ge=2, le=10_000)


class Extinction(_Strict):
    """Extinction risk of a small founding population against its size."""

    sites: int = Field(ge=4, le=2_000, description="carrying capacity K in cells; density is n / K (the law is solved once per size)")
    founders: list[int] = Field(min_length=1, max_length=200, description="initial numbers of cells, increasing")
    established: int | None = Field(default=None, ge=2, description="size counted as established (default K / 2)")
    betas: list[float] = Field(default_factory=list, max_length=20, description="betas besides the study's")
    replicates: int = Field(default=0, ge=0, le=100_000, description="stochastic runs per founder size (0: exact only)")
    tau: float | None = Field(default=None, gt=0, description="decision timescale of the simulated cells (time units)")


class Lattice(_Strict):
    """Agents on a two-dimensional lattice that switch by the law."""

    neighbourhood: Literal["von-neumann", "moore", "hexagonal"] = "hexagonal"
    rows: int = Field(default=24, ge=4, le=512)
    columns: int = Field(default=24, ge=3, le=512)
    initial_density: float = Field(default=0.3, gt=0, le=1)
    t_end: float = Field(gt=0, le=10_000)
    tau: float = Field(default=0.5, ge=1e-6, le=1e6, description="decision timescale (time units)")
    motility: dict[str, float] = Field(default_factory=dict, description="per-phenotype move rate (per unit time)")
    replicates: int = Field(default=4, ge=1, le=256)
    snapshots: int = Field(default=3, ge=1, le=8)
    beta: float | None = Field(default=None, ge=0)


class Fluctuating(_Strict):
    """Environment states over generations, with a fitness per phenotype."""

    states: list[str] = Field(min_length=2, max_length=50)
    fitness: dict[str, list[float]] = Field(description="phenotype -> offspring per generation in each state")
    statistics: Literal["iid", "periodic", "markov"]
    probabilities: list[float] | None = None
    durations: list[float] | None = None
    transition: list[list[float]] | None = None
    cue_error: float = Field(default=0.0, ge=0, lt=1, description="chance the cue names a wrong state")
    cost_per_bit: float = Field(default=0.0, ge=0, description="nats of growth per generation per bit")
    betas: Betas | None = None


class Plan(_Strict):
    """One schedule: stress on for ``on`` time units, off for ``off``, ``cycles`` times."""

    name: str = Field(min_length=1, max_length=80)
    on: float = Field(gt=0)
    off: float = Field(ge=0)
    cycles: int = Field(ge=1, le=1000)
    delay: float = Field(default=0.0, ge=0, description="time before the first stress period")


class Stress(_Strict):
    """What the stress changes while it is on (overrides of the study's values)."""

    division: dict[str, float] = Field(default_factory=dict)
    death: dict[str, float] = Field(default_factory=dict)
    payoff: dict[str, str | float] = Field(default_factory=dict)


class Schedule(_Strict):
    """A time-varying environment for the mean-field model."""

    stress: Stress
    plans: list[Plan] = Field(min_length=1, max_length=12)
    t_end: float = Field(gt=0, le=1e6)
    tolerant: str | None = Field(default=None, description="phenotype whose fraction is reported")
    regrowth_density: float = Field(gt=0, le=1)
    initial_density: float | None = Field(default=None, gt=0, le=1)
    beta: float | None = Field(default=None, ge=0)
    treatment: bool = Field(default=False, description="the stress is a treatment (adds the research-use caution)")


class Sobol(_Strict):
    ranges: dict[str, list[float]]
    outputs: list[Literal["stable_density", "allee_threshold", "low_density_growth"]] = Field(
        default_factory=lambda: ["stable_density"], min_length=1)
    samples: int = Field(default=16, ge=2, le=4096, description="base samples, a power of 2")


class Sensitivity(_Strict):
    parameters: list[str] = Field(default_factory=list, description="beta, tau, division.X, death.X, crowding.X")
    sobol: Sobol | None = None
    beta: float | None = Field(default=None, ge=0)


class Calibration(_Strict):
    """Fit beta and payoff parameters to observed phenotype counts before every other stage."""

    data: str = Field(min_length=1, max_length=4096,
                      description="tidy CSV (columns phenotype, count, state or signal, density), relative to the study file")
    free: dict[str, list[float]] = Field(min_length=1, max_length=16,
                                         description="parameter -> [low, high] bounds (beta in nats per payoff unit)")
    fixed: dict[str, float] = Field(default_factory=dict, max_length=16, description="parameters held at a value")
    objective: Literal["min-information", "max-entropy"] | None = Field(
        default=None, description="default: the [decision] objective")
    starts: int = Field(default=4, ge=1, le=64, description="optimiser starts (Latin hypercube)")
    seed: int | None = Field(default=None, ge=0, le=2**63 - 1, description="default: the study's seed")
    bootstrap: int = Field(default=0, ge=0, le=2_000, description="parametric bootstrap refits (0: none)")
    population: bool = Field(default=True, description="carry the fitted interval to the population regimes")


#: Grid cells of a front run (length / dx) and betas of its speed scan: each scan point is a run.
MAX_FRONT_CELLS = 20_000
MAX_FRONT_SCAN = 200


class FrontScanSpec(_Strict):
    """Betas of a front-speed scan (each point is one front run)."""

    start: float = Field(ge=0)
    stop: float
    points: int = Field(ge=2, le=MAX_FRONT_SCAN)


class Front(_Strict):
    """Travelling fronts of the mean-field model with diffusing phenotypes (needs [population])."""

    diffusion: dict[str, float] = Field(description="phenotype -> diffusion coefficient (length^2 per unit time)")
    length: float = Field(gt=0, le=1e6, description="domain length (length units)")
    dx: float = Field(gt=0, description="grid spacing (length units)")
    t_end: float = Field(gt=0, le=1e6, description="run time (time units)")
    dimension: Literal[1, 2, 3] = Field(default=1, description="1: a line; 2, 3: radial front in a disc or ball")
    betas: list[float] | None = Field(default=None, min_length=1, max_length=8,
                                      description="betas of the full runs (default: the study's)")
    frames: int = Field(default=201, ge=2, le=2_001, description="stored times per run")
    scan: FrontScanSpec | None = None


def front_problems(study, names) -> list:
    """Rules of [front] that span keys."""
    front = study.front
    problems = []
    if study.population is None:
        problems.append(("front", "needs a [population] section", None))
    for key, value in front.diffusion.items():
        if key not in names:
            problems.append((f"front.diffusion.{key}", f"unknown phenotype (phenotypes are {names})", value))
        elif not (math.isfinite(value) and 0 <= value <= 1e12):
            problems.append((f"front.diffusion.{key}", "diffusion coefficients must be finite and >= 0", value))
    for key in names:
        if key not in front.diffusion:
            problems.append((f"front.diffusion.{key}", "missing diffusion coefficient for a phenotype (0 for none)", None))
    if front.diffusion and not any(v > 0 for v in front.diffusion.values()):
        problems.append(("front.diffusion", "at least one phenotype must diffuse (a positive coefficient)", None))
    if not math.isfinite(front.dx) or front.dx >= front.length:
        problems.append(("front.dx", "the grid spacing must be finite and below front.length", front.dx))
    elif front.length / front.dx > MAX_FRONT_CELLS:
        problems.append(("front.dx", f"at most {MAX_FRONT_CELLS} grid cells (length / dx = "
                         f"{front.length / front.dx:.0f}): a larger dx or a shorter length", front.dx))
    for i, beta in enumerate(front.betas or ()):
        if not (math.isfinite(beta) and 0 <= beta <= 1e12):
            problems.append((f"front.betas[{i}]", "betas must be finite and >= 0", beta))
    if front.scan is not None and not (front.scan.start < front.scan.stop <= 1e12):
        problems.append(("front.scan", "betas must satisfy 0 <= start < stop", [front.scan.start, front.scan.stop]))
    problems += _needs_beta(study, front.betas, "front.betas")
    return problems


#: Names a [calibration] section fits besides payoff parameters.
FIT_ROUTES = ("beta",)


def payoff_parameters(study) -> dict:
    """Payoff parameters a [calibration] section names -> the value ``check`` tries them at.

    Free parameters are tried at the middle of their bounds, fixed ones at their value; the
    run replaces them by the fitted values (:func:`fitted_study`).
    """
    cal = getattr(study, "calibration", None)
    if cal is None:
        return {}
    out = {name: 0.5 * (pair[0] + pair[1]) for name, pair in cal.free.items()
           if name not in FIT_ROUTES and len(pair) == 2}
    out.update({name: float(v) for name, v in cal.fixed.items() if name not in FIT_ROUTES})
    return out


def calibration_problems(study, names) -> list:
    """Rules of [calibration] that span keys (bounds, names, which payoffs use which names)."""
    import re

    from . import _expressions

    cal = study.calibration
    problems = []
    reserved = set(_expressions.PAYOFF_VARIABLES) | set(_expressions.FUNCTIONS)
    for table in ("free", "fixed"):
        for name, value in getattr(cal, table).items():
            key = f"calibration.{table}.{name}"
            if not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]{0,63}", name) or name in reserved or name == "cost_per_bit":
                problems.append((key, "a parameter name is a letter or _ then letters, digits or _, not y, "
                                 "density or a function name", name))
                continue
            pairs = [value] if table == "fixed" else value
            if table == "free" and len(value) != 2:
                problems.append((key, "bounds are [low, high]", value))
                continue
            if not all(math.isfinite(v) and abs(v) <= 1e12 for v in pairs):
                problems.append((key, "must be finite with magnitude at most 1e+12", value))
            elif table == "free" and not value[0] < value[1]:
                problems.append((key, "bounds must satisfy low < high", value))
            elif name == "beta" and min(pairs) < 0:
                problems.append((key, "beta is >= 0", value))
    both = set(cal.free) & set(cal.fixed)
    if both:
        problems.append((f"calibration.fixed.{sorted(both)[0]}", "a parameter is either free or fixed", None))
    if "beta" not in cal.free and "beta" not in cal.fixed:
        problems.append(("calibration.free", "fit beta (free.beta = [low, high]) or hold it (fixed.beta)", None))
    used = set()
    for text in study.payoff.values():
        if isinstance(text, str):
            used |= set(re.findall(r"(?<![\w.])([A-Za-z_]\w*)", text))
    for table in ("free", "fixed"):
        for name in getattr(cal, table):
            if name not in FIT_ROUTES and name not in used:
                problems.append((f"calibration.{table}.{name}", "no payoff expression names this parameter", name))
    return problems


#: Parameters a Sobol' range may name (scales of the model and the sensitivity).
SOBOL_PARAMETERS = ("beta", "death_scale", "division_scale")
#: Study sections a variant may not override.
FIXED_IN_VARIANTS = ("variant", "study")


class Variant(BaseModel):
    """A named alternative: any other keys override the study's (tables merge, values replace)."""

    model_config = ConfigDict(extra="allow", strict=True)
    name: str = Field(min_length=1, max_length=80)


def _rates(table: dict, names, where: str) -> list:
    problems = []
    for key, value in table.items():
        if key not in names:
            problems.append((f"{where}.{key}", f"unknown phenotype (phenotypes are {names})", value))
        elif not (math.isfinite(value) and value >= 0):
            problems.append((f"{where}.{key}", "rates must be finite and >= 0", value))
    return problems


def _needs_beta(study, own, key: str) -> list:
    """The section's own beta (``key``) is required when the study's decision is a budget in bits."""
    if own is None and study.decision.beta is None and study.decision.cost_per_bit is None:
        return [(key, "required when [decision] gives a budget in bits", None)]
    return []


def semantic(study) -> list[tuple[str, str, object]]:
    """Rules of the new sections that span several keys."""
    problems = []
    names = list(study.study.phenotypes)
    if getattr(study, "calibration", None) is not None:
        problems += calibration_problems(study, names)
    if getattr(study, "front", None) is not None:
        problems += front_problems(study, names)
    ext = study.extinction
    if ext is not None:
        if study.population is None:
            problems.append(("extinction", "needs a [population] section", None))
        if any(b >= a for a, b in zip(ext.founders[1:], ext.founders)) or ext.founders[0] < 1:
            problems.append(("extinction.founders", "founder sizes must be >= 1 and increasing", ext.founders))
        upper = ext.established if ext.established is not None else ext.sites // 2
        if upper > ext.sites:
            problems.append(("extinction.established", f"must be at most extinction.sites ({ext.sites})", upper))
        if ext.founders and ext.founders[-1] >= upper:
            problems.append(("extinction.founders", f"every founder size must be below the established size ({upper})",
                             ext.founders))
        if any(not (math.isfinite(b) and b >= 0) for b in ext.betas):
            problems.append(("extinction.betas", "betas must be finite and >= 0", ext.betas))
        if ext.replicates > 0:
            pop = study.population
            if ext.tau is None and (pop is None or pop.tau is None):
                problems.append(("extinction.tau", "required for replicates > 0 unless population.tau is given", None))
            if pop is not None and pop.crowding and any(v for v in pop.crowding.values()):
                problems.append(("extinction.replicates",
                                 "the stochastic simulation has no crowding term: remove population.crowding or set 0",
                                 ext.replicates))
        problems += _needs_beta(study, None if not ext.betas else ext.betas[0], "extinction.betas")
    lat = study.lattice
    if lat is not None:
        if study.population is None:
            problems.append(("lattice", "needs a [population] section", None))
        size = {"von-neumann": 4, "moore": 8, "hexagonal": 6}[lat.neighbourhood]
        if study.senses.kind != "neighbours" or study.senses.neighbours != size:
            problems.append(("lattice.neighbourhood",
                             f"a {lat.neighbourhood} cell senses {size} neighbours: needs [senses] kind = "
                             f"\"neighbours\" with neighbours = {size}", lat.neighbourhood))
        if lat.neighbourhood == "hexagonal" and lat.rows % 2:
            problems.append(("lattice.rows", "a periodic hexagonal lattice needs an even number of rows", lat.rows))
        problems += _rates(lat.motility, names, "lattice.motility")
        if study.population is not None and study.population.crowding and any(study.population.crowding.values()):
            problems.append(("lattice", "lattice agents have no crowding term: remove population.crowding", None))
    flu = study.fluctuating
    if flu is not None:
        n = len(flu.states)
        if len(set(flu.states)) != n:
            problems.append(("fluctuating.states", "state names must be distinct", flu.states))
        for key, row in flu.fitness.items():
            if key not in names:
                problems.append((f"fluctuating.fitness.{key}", f"unknown phenotype (phenotypes are {names})", row))
            elif len(row) != n:
                problems.append((f"fluctuating.fitness.{key}", f"needs one value per state ({n})", row))
            elif any(not (math.isfinite(v) and v >= 0) for v in row):
                problems.append((f"fluctuating.fitness.{key}", "fitness must be finite and >= 0", row))
        for key in names:
            if key not in flu.fitness:
                problems.append((f"fluctuating.fitness.{key}", "missing fitness for a phenotype", None))
        owner = {"probabilities": "iid", "durations": "periodic", "transition": "markov"}
        for key, kind in owner.items():
            value = getattr(flu, key)
            if kind == flu.statistics and value is None:
                problems.append((f"fluctuating.{key}", f"required when statistics = \"{kind}\"", None))
            elif kind != flu.statistics and value is not None:
                problems.append((f"fluctuating.{key}", f"only for statistics = \"{kind}\"", value))
        if flu.probabilities is not None:
            p = flu.probabilities
            if len(p) != n or any(not (math.isfinite(v) and v >= 0) for v in p) or abs(sum(p) - 1) > 1e-9:
                problems.append(("fluctuating.probabilities", f"needs {n} probabilities >= 0 that sum to 1", p))
        if flu.durations is not None:
            d = flu.durations
            if len(d) != n or any(not (math.isfinite(v) and v > 0 and v == int(v)) for v in d):
                problems.append(("fluctuating.durations", f"needs {n} whole numbers of generations > 0", d))
        if flu.transition is not None:
            t = flu.transition
            if len(t) != n or any(len(r) != n for r in t) or any(
                    not (math.isfinite(v) and v >= 0) for r in t for v in r) or any(abs(sum(r) - 1) > 1e-9 for r in t):
                problems.append(("fluctuating.transition", f"needs {n} rows of {n} probabilities >= 0, each summing to 1", t))
        if flu.betas is not None and not flu.betas.start < flu.betas.stop:
            problems.append(("fluctuating.betas", "betas must satisfy 0 <= start < stop", [flu.betas.start, flu.betas.stop]))
        if flu.betas is None:
            problems += _needs_beta(study, None, "fluctuating.betas")
    sch = study.schedule
    if sch is not None:
        if study.population is None:
            problems.append(("schedule", "needs a [population] section", None))
        problems += _rates(sch.stress.division, names, "schedule.stress.division")
        problems += _rates(sch.stress.death, names, "schedule.stress.death")
        from . import _expressions
        from ._expressions import PAYOFF_VARIABLES

        for key, text in sch.stress.payoff.items():
            if key not in names:
                problems.append((f"schedule.stress.payoff.{key}", f"unknown phenotype (phenotypes are {names})", text))
            elif isinstance(text, str):
                try:
                    _expressions.parse(text, PAYOFF_VARIABLES)
                except _expressions.ExpressionError as error:
                    problems.append((f"schedule.stress.payoff.{key}", str(error), text))
        if not (sch.stress.division or sch.stress.death or sch.stress.payoff):
            problems.append(("schedule.stress", "name at least one of division, death, payoff that the stress changes", None))
        plan_names = [p.name for p in sch.plans]
        if len(set(plan_names)) != len(plan_names):
            problems.append(("schedule.plans", "plan names must be distinct", plan_names))
        for i, plan in enumerate(sch.plans):
            length = plan.delay + plan.cycles * (plan.on + plan.off)
            if length > sch.t_end:
                problems.append((f"schedule.plans[{i}]", f"lasts {length:g} time units, longer than schedule.t_end ({sch.t_end:g})", plan.name))
        if sch.tolerant is not None and sch.tolerant not in names:
            problems.append(("schedule.tolerant", f"unknown phenotype (phenotypes are {names})", sch.tolerant))
        problems += _needs_beta(study, sch.beta, "schedule.beta")
    sen = study.sensitivity
    if sen is not None:
        if study.population is None:
            problems.append(("sensitivity", "needs a [population] section", None))
        known = ["beta", "tau"] + [f"{t}.{n}" for t in ("division", "death", "crowding") for n in names]
        for i, name in enumerate(sen.parameters):
            if name not in known:
                problems.append((f"sensitivity.parameters[{i}]", f"unknown parameter (valid: {', '.join(known)})", name))
            elif name == "tau" and (study.population is None or study.population.tau is None):
                problems.append((f"sensitivity.parameters[{i}]", "tau needs population.tau", name))
        if not sen.parameters and sen.sobol is None:
            problems.append(("sensitivity", "give parameters, a [sensitivity.sobol] table, or both", None))
        if sen.sobol is not None:
            s = sen.sobol
            if s.samples & (s.samples - 1):
                problems.append(("sensitivity.sobol.samples", "must be a power of 2", s.samples))
            if not s.ranges:
                problems.append(("sensitivity.sobol.ranges", "name at least one parameter range", None))
            for key, pair in s.ranges.items():
                if key not in SOBOL_PARAMETERS:
                    problems.append((f"sensitivity.sobol.ranges.{key}", f"unknown parameter (valid: {', '.join(SOBOL_PARAMETERS)})", pair))
                elif len(pair) != 2 or not all(math.isfinite(v) for v in pair) or not 0 <= pair[0] < pair[1]:
                    problems.append((f"sensitivity.sobol.ranges.{key}", "needs [low, high] with 0 <= low < high", pair))
                elif key != "beta" and pair[0] <= 0:
                    problems.append((f"sensitivity.sobol.ranges.{key}", "scales must be > 0", pair))
        if sen.parameters or (sen.sobol is not None and "beta" not in sen.sobol.ranges):
            problems += _needs_beta(study, sen.beta, "sensitivity.beta")
    if study.variant is not None:
        seen = set()
        for i, variant in enumerate(study.variant):
            if variant.name in seen:
                problems.append((f"variant[{i}].name", "variant names must be distinct", variant.name))
            seen.add(variant.name)
            extra = dict(variant.model_extra or {})
            for key in FIXED_IN_VARIANTS:
                if key in extra:
                    problems.append((f"variant[{i}].{key}", "a variant cannot override this section", extra[key]))
            if not extra:
                problems.append((f"variant[{i}]", "overrides nothing: give the keys it changes", variant.name))
    return problems


def merge(base: dict, override: dict) -> dict:
    """``base`` with ``override`` laid over it: tables merge key by key, other values replace."""
    out = dict(base)
    for key, value in override.items():
        if isinstance(value, dict) and isinstance(out.get(key), dict):
            out[key] = merge(out[key], value)
        else:
            out[key] = value
    return out


def variant_data(data: dict, variant) -> dict:
    """The raw study table of one variant (without the ``variant`` list)."""
    base = {k: v for k, v in data.items() if k != "variant"}
    return merge(base, dict(variant.model_extra or {}))
