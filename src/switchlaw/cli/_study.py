"""Study files: one TOML file describes a whole study (validated with pydantic).

Every problem is reported as one line ``FILE: key.path: what is wrong (got VALUE)``.
"""

from __future__ import annotations

import dataclasses
import math
import tomllib
from pathlib import Path
from typing import Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError

from .._errors import InputError
from . import _expressions, _sections

PAYOFF_VARIABLES = _expressions.PAYOFF_VARIABLES
PARAMETER_VARIABLES = ("density",)

# Size bounds: what one machine can do in minutes. ``_estimate`` weighs the stages together.
#: Points of any grid (densities, betas, regime-map values).
MAX_POINTS = 10_000
#: Neighbours a cell counts (states of the sensed count: neighbours + 1).
MAX_NEIGHBOURS = 500
#: Sites of a finite lattice.
MAX_LATTICE_SITES = 10**7
#: Signal bins (edges - 1).
MAX_EDGES = 1_001
#: Phenotypes.
MAX_PHENOTYPES = 32
#: Characters of a phenotype name (it names columns, figures and SBML species).
MAX_NAME = 64
#: Largest magnitude of any number in a study (rates, betas, payoff constants, scales);
#: beyond it products of two of them overflow float64.
MAX_MAGNITUDE = 1e12
#: Smallest positive scale (receptor sd, tau) accepted.
MIN_SCALE = 1e-9


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True)


class Span(_Strict):
    """An evenly spaced grid: ``points`` values from ``start`` to ``stop``."""

    start: float
    stop: float
    points: int = Field(ge=2, le=MAX_POINTS)

    def values(self) -> np.ndarray:
        return np.linspace(self.start, self.stop, self.points)


class Meta(_Strict):
    title: str
    notes: str = ""
    seed: int = Field(default=0, ge=0, le=2**63 - 1)
    phenotypes: list[str] = Field(min_length=1, max_length=MAX_PHENOTYPES)
    #: The time unit of every rate and timescale in the study (exports declare it).
    time_unit: Literal["second", "minute", "hour", "day"] | None = None


class Receptor(_Strict):
    kind: Literal["gaussian", "poisson"]
    sd: float | None = Field(default=None, ge=MIN_SCALE, le=MAX_MAGNITUDE)
    gain: float | None = Field(default=None, gt=0, le=MAX_MAGNITUDE)


class Senses(_Strict):
    kind: Literal["neighbours", "signal"]
    neighbours: int | None = Field(default=None, ge=1, le=MAX_NEIGHBOURS)
    lattice_sites: int | None = Field(default=None, ge=2, le=MAX_LATTICE_SITES)
    distribution: str | None = Field(default=None, max_length=64)
    parameters: dict[str, str | float] = Field(default_factory=dict, max_length=16)
    edges: list[float] | None = Field(default=None, max_length=MAX_EDGES)
    receptor: Receptor | None = None


class Decision(_Strict):
    objective: Literal["min-information", "max-entropy"] = "min-information"
    beta: float | None = Field(default=None, ge=0, le=MAX_MAGNITUDE)
    cost_per_bit: float | None = Field(default=None, ge=1 / MAX_MAGNITUDE, le=MAX_MAGNITUDE)
    bits: float | None = Field(default=None, ge=0)
    densities: Span
    reference_density: float = Field(default=0.5, ge=0, le=1)


class Population(_Strict):
    division: dict[str, float]
    death: dict[str, float]
    crowding: dict[str, float] | None = None
    tau: float | None = Field(default=None, ge=MIN_SCALE, le=MAX_MAGNITUDE)
    betas: Span
    initial_density: float = Field(default=0.5, ge=0, le=1)


class RegimeMapSpec(_Strict):
    parameter: Literal["death_scale", "division_scale"]
    values: Span
    beta_points: int = Field(default=40, ge=2, le=2_000)


class Exports(_Strict):
    formats: list[str] = Field(default_factory=lambda: ["csv"], max_length=8)


class Study(_Strict):
    study: Meta
    senses: Senses
    payoff: dict[str, str | float] = Field(max_length=MAX_PHENOTYPES)
    decision: Decision
    population: Population | None = None
    regime_map: RegimeMapSpec | None = None
    exports: Exports = Field(default_factory=Exports)
    extinction: _sections.Extinction | None = None
    lattice: _sections.Lattice | None = None
    fluctuating: _sections.Fluctuating | None = None
    schedule: _sections.Schedule | None = None
    sensitivity: _sections.Sensitivity | None = None
    variant: list[_sections.Variant] | None = None
    calibration: _sections.Calibration | None = None
    front: _sections.Front | None = None


class StudyError(InputError):
    """A study file with problems; ``lines`` holds one line per problem."""

    def __init__(self, lines: list[str]):
        super().__init__("\n".join(lines))
        self.lines = lines


def _show(value) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _numbers(study: Study):
    """Every plain number of a study with its key path (scales and rates, not counts)."""
    spans = [("decision.densities", study.decision.densities)]
    for key in ("beta", "cost_per_bit", "bits", "reference_density"):
        value = getattr(study.decision, key)
        if value is not None:
            yield value, f"decision.{key}"
    for key, value in study.payoff.items():
        if isinstance(value, float):
            yield value, f"payoff.{key}"
    for key, value in study.senses.parameters.items():
        if isinstance(value, float):
            yield value, f"senses.parameters.{key}"
    pop = study.population
    if pop is not None:
        spans.append(("population.betas", pop.betas))
        for table in ("division", "death", "crowding"):
            for key, value in (getattr(pop, table) or {}).items():
                yield value, f"population.{table}.{key}"
    if study.regime_map is not None:
        spans.append(("regime_map.values", study.regime_map.values))
    for path, span in spans:
        yield span.start, f"{path}.start"
        yield span.stop, f"{path}.stop"


def _semantic(study: Study) -> list[tuple[str, str, object]]:
    """Checks that span several keys; each as (key path, message, value)."""
    problems = []
    names = study.study.phenotypes
    for i, name in enumerate(names):
        if not name.strip():
            problems.append((f"study.phenotypes[{i}]", "a phenotype name must not be empty", name))
        elif not name.isprintable():
            problems.append((f"study.phenotypes[{i}]", "a phenotype name must be printable text "
                             "(no control characters, tabs or line breaks)", name))
        elif len(name) > MAX_NAME:
            problems.append((f"study.phenotypes[{i}]", f"a phenotype name has at most {MAX_NAME} "
                             f"characters (got {len(name)})", name))
        elif name != name.strip():
            problems.append((f"study.phenotypes[{i}]", "a phenotype name must not start or end with "
                             "spaces", name))
        elif name in names[:i]:
            problems.append((f"study.phenotypes[{i}]", "phenotype names must be distinct", name))
    for number, path in _numbers(study):
        if not math.isfinite(number) or abs(number) > MAX_MAGNITUDE:
            problems.append((path, f"must be finite with magnitude at most {MAX_MAGNITUDE:g}", number))
    routes = [k for k in ("beta", "cost_per_bit", "bits") if getattr(study.decision, k) is not None]
    if len(routes) != 1:
        problems.append(("decision", "give exactly one of beta, cost_per_bit, bits", routes or None))
    if study.decision.bits is not None and study.decision.objective != "min-information":
        problems.append(("decision.bits", "a budget in bits needs objective = \"min-information\"", study.decision.bits))
    span = study.decision.densities
    if not (0 <= span.start < span.stop <= 1):
        problems.append(("decision.densities", "densities must satisfy 0 <= start < stop <= 1", [span.start, span.stop]))
    for key in names:
        if key not in study.payoff:
            problems.append((f"payoff.{key}", "missing payoff for a phenotype", None))
    for key, text in study.payoff.items():
        if key not in names:
            problems.append((f"payoff.{key}", f"unknown phenotype (phenotypes are {names})", text))
            continue
        if isinstance(text, str):
            try:
                _expressions.parse(text, PAYOFF_VARIABLES + tuple(_sections.payoff_parameters(study)))
            except _expressions.ExpressionError as error:
                problems.append((f"payoff.{key}", str(error), text))
    senses = study.senses
    if senses.kind == "neighbours":
        if senses.neighbours is None:
            problems.append(("senses.neighbours", "required when kind = \"neighbours\"", None))
        for extra in ("distribution", "edges", "receptor"):
            if getattr(senses, extra) not in (None, {}):
                problems.append((f"senses.{extra}", "only for kind = \"signal\"", getattr(senses, extra)))
        if senses.lattice_sites is not None and senses.neighbours is not None and senses.lattice_sites <= senses.neighbours:
            problems.append(("senses.lattice_sites", "must exceed senses.neighbours", senses.lattice_sites))
    else:
        from scipy import stats

        dist = getattr(stats, senses.distribution or "", None)
        if senses.distribution is None:
            problems.append(("senses.distribution", "required when kind = \"signal\"", None))
        elif not isinstance(dist, stats.rv_continuous):
            problems.append(("senses.distribution", "not a continuous scipy.stats distribution", senses.distribution))
        if senses.edges is None or len(senses.edges) < 2:
            problems.append(("senses.edges", "at least two increasing bin edges are required", senses.edges))
        elif not all(b > a for a, b in zip(senses.edges, senses.edges[1:])) or any(math.isnan(e) for e in senses.edges):
            problems.append(("senses.edges", "bin edges must be strictly increasing", senses.edges))
        for key, text in senses.parameters.items():
            if isinstance(text, str):
                try:
                    _expressions.parse(text, PARAMETER_VARIABLES)
                except _expressions.ExpressionError as error:
                    problems.append((f"senses.parameters.{key}", str(error), text))
        if senses.receptor is not None:
            need = "sd" if senses.receptor.kind == "gaussian" else "gain"
            if getattr(senses.receptor, need) is None:
                problems.append((f"senses.receptor.{need}", f"required for a {senses.receptor.kind} receptor", None))
    if study.population is not None:
        pop = study.population
        for table in ("division", "death", "crowding"):
            rates = getattr(pop, table)
            if rates is None:
                continue
            for key, value in rates.items():
                if key not in names:
                    problems.append((f"population.{table}.{key}", f"unknown phenotype (phenotypes are {names})", value))
                elif not (math.isfinite(value) and value >= 0):
                    problems.append((f"population.{table}.{key}", "rates must be finite and >= 0", value))
            if table != "crowding":
                for key in names:
                    if key not in rates:
                        problems.append((f"population.{table}.{key}", "missing rate for a phenotype", None))
        if not (0 <= pop.betas.start < pop.betas.stop):
            problems.append(("population.betas", "betas must satisfy 0 <= start < stop", [pop.betas.start, pop.betas.stop]))
    if study.regime_map is not None:
        if study.population is None:
            problems.append(("regime_map", "needs a [population] section", None))
        span = study.regime_map.values
        if not (0 < span.start < span.stop):
            problems.append(("regime_map.values", "scales must satisfy 0 < start < stop", [span.start, span.stop]))
    problems += _sections.semantic(study)
    from ._outputs import EXPORT_FORMATS

    for i, name in enumerate(study.exports.formats):
        if name not in EXPORT_FORMATS:
            problems.append((f"exports.formats[{i}]", f"unknown format (valid: {', '.join(EXPORT_FORMATS)})", name))
    return problems


#: Densities at which ``check`` builds the environment (all of the grid up to this many).
TRIAL_DENSITIES = 201


def _trial(study: Study, base_dir=None) -> list[tuple[str, str, object]]:
    """Build the environment and evaluate every payoff on the density grid.

    Problems that only show when numbers are computed (a payoff that overflows or divides by
    zero, distribution parameters scipy refuses, bins that miss the support, a budget beyond
    what the states allow) are reported here with their key, so ``check`` finds them before
    ``run`` does. Payoffs are evaluated at every density of the grid and at the reference
    density; the environment at every density up to :data:`TRIAL_DENSITIES` (evenly spread
    beyond that).
    """
    from .._errors import InputError
    from ..decision._budget import max_information_bits

    grid = study.decision.densities.values()
    pick = np.unique(np.linspace(0, grid.size - 1, min(grid.size, TRIAL_DENSITIES)).round().astype(int))
    densities = list(grid[pick]) + [study.decision.reference_density]
    environment = environment_function(study)
    problems = []
    largest_top, where = -math.inf, None
    for rho in densities:
        rho = float(rho)
        try:
            env = environment(rho)
        except (InputError, ValueError, TypeError, ArithmeticError, OverflowError) as error:
            return [("senses", f"cannot build the environment at density {rho:g}: {error}", None)]
        if not (np.all(np.isfinite(env.probs)) and np.all(np.isfinite(env.values))):
            return [("senses", f"the environment at density {rho:g} is not finite", None)]
        if study.decision.bits is not None:
            top = max_information_bits(env.probs, len(study.study.phenotypes))
            if top > largest_top:
                largest_top, where = top, rho
    if study.decision.bits is not None and study.decision.bits > largest_top + 1e-12:
        problems.append((
            "decision.bits",
            f"beyond the capacity: at most {largest_top:.6g} bits are possible (at density "
            f"{where:g}; min(H(Y), log2 of the number of phenotypes)), so no density would use it",
            study.decision.bits,
        ))
    env = environment(float(grid[0]))
    values = env.values if env.values.ndim == 1 else env.values[:, 0]
    rhos = np.concatenate([grid, [study.decision.reference_density]])
    for key, spec in study.senses.parameters.items():
        if isinstance(spec, str):
            with np.errstate(all="ignore"):
                column = np.broadcast_to(np.asarray(_expressions.evaluate(
                    _expressions.parse(spec, PARAMETER_VARIABLES), {"density": rhos}), dtype=float), rhos.shape)
            bad = ~np.isfinite(column) | (np.abs(column) > MAX_MAGNITUDE)
            if bad.any():
                r = int(np.argmax(bad))
                problems.append((f"senses.parameters.{key}", f"gives {column[r]} at density {rhos[r]:g}: "
                                 f"parameters must be finite with magnitude at most {MAX_MAGNITUDE:g}", spec))
    params = _sections.payoff_parameters(study)
    for name in study.study.phenotypes:
        spec = study.payoff[name]
        if not isinstance(spec, str):
            continue
        try:
            column = np.broadcast_to(
                np.asarray(_expressions.evaluate(_expressions.parse(spec, PAYOFF_VARIABLES + tuple(params)),
                                                 {"y": values[:, None], "density": rhos[None, :], **params}),
                           dtype=float),
                (values.size, rhos.size),
            )
        except (_expressions.ExpressionError, ValueError) as error:
            problems.append((f"payoff.{name}", str(error), spec))
            continue
        bad = ~np.isfinite(column) | (np.abs(column) > MAX_MAGNITUDE)
        if bad.any():
            y, r = np.argwhere(bad)[0]
            problems.append((
                f"payoff.{name}",
                f"gives {column[y, r]} at density {rhos[r]:g}, y = {values[y]:g}: payoffs must be "
                f"finite with magnitude at most {MAX_MAGNITUDE:g}",
                spec,
            ))
    if study.calibration is not None and base_dir is not None and not problems:
        problems += _calibration_data(study, environment, base_dir)
    return problems


def _calibration_data(study: Study, environment, base_dir) -> list[tuple[str, str, object]]:
    """Read the [calibration] data file as the fit will (counts, names, states), or say why not."""
    from .._errors import InputError
    from ..calibration._data import from_table

    path = Path(base_dir) / study.calibration.data
    if not path.is_file():
        return [("calibration.data", f"names no readable file ({path})", study.calibration.data)]
    if path.stat().st_size > 50 * MAX_BYTES:
        return [("calibration.data", f"too large (more than {50 * MAX_BYTES} bytes)", study.calibration.data)]
    try:
        from_table(path, environment_at=lambda rho: environment(0.5 if rho is None else rho),
                   phenotype_names=list(study.study.phenotypes), densities=None)
    except (InputError, ValueError, TypeError) as error:
        return [("calibration.data", str(error).splitlines()[0], study.calibration.data)]
    return []


#: Largest study file read (bytes): a study is a page of TOML, not data.
MAX_BYTES = 1_000_000


def _validated(data: dict, source: str, prefix: str = "", base_dir=None) -> Study:
    try:
        study = Study.model_validate(data)
    except RecursionError:
        raise StudyError([f"{source}: (file): nested too deeply"]) from None
    except ValidationError as error:
        lines = []
        for item in error.errors():
            path = ".".join(str(p) if not isinstance(p, int) else f"[{p}]" for p in item["loc"]).replace(".[", "[")
            lines.append(f"{source}: {prefix}{path or '(top level)'}: {item['msg']} (got {_show(item.get('input'))})")
        raise StudyError(lines) from None
    problems = _semantic(study)
    if not problems:
        problems = _trial(study, base_dir)
    if problems:
        raise StudyError([f"{source}: {prefix}{path}: {message} (got {_show(value)})"
                          for path, message, value in problems])
    return study


def load_text(text: str, source: str, *, seed: int | None = None, base_dir=None) -> Study:
    """Parse and validate a study given as TOML text; raise :class:`StudyError`.

    This is every rule ``switchlaw run`` applies before computing, so ``switchlaw check``
    and ``run`` always agree. ``seed`` overrides ``[study] seed`` (the ``--seed`` option).
    Each ``[[variant]]`` is validated as the whole study it makes; its problems name the
    variant (``variant[i].key``). ``base_dir`` is the folder a ``[calibration]`` data file
    is read from (the study file's folder); without it the data file is not read here.
    """
    if len(text) > MAX_BYTES:
        raise StudyError([f"{source}: (file): too large ({len(text)} characters; at most {MAX_BYTES})"])
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise StudyError([f"{source}: (file): not valid TOML ({error})"]) from None
    except RecursionError:
        raise StudyError([f"{source}: (file): not valid TOML (nested too deeply)"]) from None
    if seed is not None and isinstance(data.get("study"), dict):
        data["study"]["seed"] = seed
    study = _validated(data, source, base_dir=base_dir)
    for i, variant in enumerate(study.variant or ()):
        _validated(_sections.variant_data(data, variant), source, prefix=f"variant[{i}].", base_dir=base_dir)
    return study


def variants(study: Study, text: str) -> list[tuple[str, Study]]:
    """``(name, study)`` for each ``[[variant]]`` of a validated study (seed carried over)."""
    data = tomllib.loads(text)
    out = []
    for variant in study.variant or ():
        one = Study.model_validate(_sections.variant_data(data, variant))
        one.study.seed = study.study.seed
        out.append((variant.name, one))
    return out


def read(path) -> str:
    """The text of a study file, or :class:`StudyError` (unreadable, not UTF-8, too large)."""
    path = Path(path)
    try:
        with open(path, "rb") as stream:
            raw = stream.read(MAX_BYTES + 1)
    except OSError as error:
        raise StudyError([f"{path}: (file): cannot be read ({error.strerror})"]) from None
    if len(raw) > MAX_BYTES:
        raise StudyError([f"{path}: (file): too large (more than {MAX_BYTES} bytes)"])
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as error:
        raise StudyError([f"{path}: (file): not UTF-8 text (byte {error.start}: {raw[error.start]:#04x})"]) from None


def load(path, *, seed: int | None = None) -> tuple[Study, str]:
    """Read and validate a study file; returns the study and its text."""
    text = read(path)
    return load_text(text, str(path), seed=seed, base_dir=Path(path).resolve().parent), text


def json_schema() -> dict:
    """The JSON Schema of study files (generated from the pydantic models)."""
    schema = Study.model_json_schema()
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["title"] = "switchlaw study file"
    return schema


# ------------------------------------------------------------------ building the objects
def payoff_functions(study: Study, params: dict | None = None) -> dict:
    """A function of an Environment giving the payoff table ``[state, phenotype]``.

    ``params`` gives values to the payoff parameters a ``[calibration]`` section names
    (default: the values ``check`` tries, :func:`._sections.payoff_parameters`).
    """
    params = {k: np.float64(v) for k, v in (_sections.payoff_parameters(study) if params is None else params).items()}
    columns = {}
    for name in study.study.phenotypes:
        spec = study.payoff[name]
        if isinstance(spec, str):
            tree = _expressions.parse(spec, PAYOFF_VARIABLES + tuple(params))
            columns[name] = tree
        else:
            columns[name] = float(spec)

    def table(env):
        values = env.values if env.values.ndim == 1 else env.values[:, 0]
        density = np.float64(env.density if env.density is not None else 0.0)
        out = []
        for name in study.study.phenotypes:
            spec = columns[name]
            column = (
                _expressions.evaluate(spec, {"y": values, "density": density, **params})
                if not isinstance(spec, float) else spec
            )
            out.append(np.broadcast_to(np.asarray(column, dtype=float), values.shape))
        return np.column_stack(out)

    return table


def environment_function(study: Study):
    """``density -> Environment`` for the study's [senses] section."""
    import switchlaw as sl

    senses = study.senses
    if senses.kind == "neighbours":
        def build(rho):
            return sl.occupancy(senses.neighbours, rho, lattice_sites=senses.lattice_sites)

        return build
    from scipy import stats

    family = getattr(stats, senses.distribution)
    parsed = {
        key: (_expressions.parse(value, PARAMETER_VARIABLES) if isinstance(value, str) else float(value))
        for key, value in senses.parameters.items()
    }
    receptor = None
    if senses.receptor is not None:
        receptor = (
            sl.GaussianReceptor(senses.receptor.sd) if senses.receptor.kind == "gaussian"
            else sl.PoissonReceptor(senses.receptor.gain)
        )
    edges = np.asarray(senses.edges, dtype=float)

    def build(rho):
        kwargs = {
            key: float(_expressions.evaluate(value, {"density": rho})) if not isinstance(value, float) else value
            for key, value in parsed.items()
        }
        env = sl.continuous_signal(family(**kwargs), edges, receptor=receptor)
        return dataclasses.replace(env, density=float(rho))

    return build
