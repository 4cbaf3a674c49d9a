"""Format ``sbml``: the mean-field model as SBML Level 3 Version 2.

With a finite decision timescale ``tau`` there is one species per phenotype and the model is

    rho_x' = b_x rho_x (1 - rho) - (d_x + c_x rho) rho_x + sum_{i != x} rho_i f_x / tau
             - sum_{j != x} rho_x f_j / tau,

which equals ``a_x rho_x + (rho f_x - rho_x) / tau`` (compartment model with re-decisions at rate 1/tau, common practice, no source) because the fractions
``f_x(rho)`` sum to one. Division, death and every switch ``i -> j`` are separate
irreversible reactions with non-negative rates. In the fast-switching limit (``tau=None``)
the one species is the total density and ``rho' = rho g(rho)`` is split into a birth and a
death reaction.

That is the ``density`` variant, for ODE clients. The ``counts`` variant, for stochastic
(Gillespie) clients, has cell counts ``n_x`` as species in a population of ``system_size = N``
cells at density 1: each propensity is ``N`` times the rate above with ``rho = sum n / N``
written out inside it (no rules), the interpolant is written with hinges ``(r + abs(r)) / 2``
instead of comparisons, and numbers are named dimensionless constants (some stochastic
clients parse neither relational operators nor literals with units).

``f_x(rho)`` is written either as the exact piecewise-linear interpolant of the law's
fractions on its density grid (one piece per grid interval, selected by a balanced binary
search so the expression depth grows as ``log2`` of the grid size) or, for two phenotypes, as a
closed form in ``rho`` fitted to them when its largest error is within ``tolerance``.

Every quantity carries units: densities are dimensionless amounts in a compartment of size
1, rates are per time unit, and every numeric literal has ``sbml:units``. libsbml writes
numbers with 15 significant digits, so literals are written as placeholders and replaced by
their shortest round-trip decimal form afterwards; the finished text is read back and
checked (all consistency checks, units included) before it is returned.
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from xml.sax.saxutils import escape, quoteattr

import numpy as np

from .._errors import InputError
from .._validate import as_array, as_nonnegative, as_positive, choice
from ._provenance import TIME_UNITS, law_metadata, sha256_of_law, study_text
from ._registry import REQUIRED, Format, register

FRACTIONS = ("table", "logistic", "hill")
#: ``density``: species are densities (ODE clients); ``counts``: cell counts (stochastic clients).
VARIANTS = ("density", "counts")
NAMESPACE = "urn:switchlaw:provenance:1"
#: Placeholder literals are SENTINEL + index: 15-digit integers libsbml prints exactly.
SENTINEL = 987_654_321_000_000
_TOKEN = re.compile(r"9876543210\d{5}")


class _Literals:
    """Numbers to write exactly: each gets a placeholder token, replaced after writing."""

    def __init__(self):
        self.values: dict[str, float] = {}

    def __call__(self, value) -> str:
        number = float(value)
        if not math.isfinite(number):
            raise InputError(f"SBML literals must be finite (got {number!r})")
        token = str(SENTINEL + len(self.values))
        self.values[token] = number
        return token

    def substitute(self, text: str) -> str:
        found = _TOKEN.findall(text)
        if sorted(found) != sorted(self.values):
            raise RuntimeError("SBML placeholders were not written exactly once each")

        def exact(match):
            value = self.values[match.group(0)]
            positional = np.format_float_positional(value, unique=True, trim="-")
            return positional if match.string[match.end()] == " " else repr(value)

        return _TOKEN.sub(exact, text)


def _ok(status: int, what: str) -> None:
    import libsbml

    if status != libsbml.LIBSBML_OPERATION_SUCCESS:
        raise RuntimeError(f"libsbml could not {what}: {libsbml.OperationReturnValue_toString(status)}")


def _identifiers(names) -> list:
    """SBML SIds (letters, digits, underscores; not starting with a digit), unique."""
    out = []
    for name in names:
        ident = re.sub(r"\W", "_", str(name), flags=re.ASCII) or "phenotype"
        if ident[0].isdigit():
            ident = "p_" + ident
        while ident in out:
            ident += "_"
        out.append(ident)
    return out


def _math(formula: str, literal_units: bool = True):
    """Parse an L3 formula (``log`` read as natural log); give every literal units unless
    ``literal_units`` is false (the count variant, for clients that cannot parse them)."""
    import libsbml

    settings = libsbml.L3ParserSettings()
    settings.setParseLog(libsbml.L3P_PARSE_LOG_AS_LN)
    node = libsbml.parseL3FormulaWithSettings(formula, settings)
    if node is None:
        raise RuntimeError(f"libsbml could not parse {formula!r}: {libsbml.getLastParseL3Error()}")

    def units(ast):
        if ast.isNumber():
            _ok(ast.setValue(float(ast.getReal())), "set a literal")
            if literal_units:
                _ok(ast.setUnits("dimensionless"), "set the units of a literal")
        for i in range(ast.getNumChildren()):
            units(ast.getChild(i))

    units(node)
    return node


def _piecewise_linear(grid: np.ndarray, values: np.ndarray, literal) -> str:
    """``f(rho)``: linear on each grid interval, equal to ``values`` at the grid points.

    The intervals are chosen by a balanced binary search, ``piecewise(left, rho < split,
    right)`` nested about the middle grid point, so the expression is ``ceil(log2(n - 1))``
    piecewise levels deep for ``n`` grid points rather than one long chain: clients that
    compile the expression tree recursively (COPASI) read every grid size.
    """

    def piece(i: int) -> str:
        slope = (f"({literal(values[i + 1])} - {literal(values[i])}) / "
                 f"({literal(grid[i + 1])} - {literal(grid[i])})")
        return f"{literal(values[i])} + {slope} * (rho - {literal(grid[i])})"

    def search(first: int, stop: int) -> str:
        if stop - first == 1:
            return piece(first)
        middle = (first + stop) // 2
        return f"piecewise({search(first, middle)}, rho < {literal(grid[middle])}, {search(middle, stop)})"

    return search(0, grid.size - 1)


def _hinge_linear(grid: np.ndarray, values: np.ndarray, literal) -> str:
    """The same interpolant as :func:`_piecewise_linear` without comparisons: the first
    piece's line plus, at each interior grid point, the change of slope times the hinge
    ``max(0, rho - rho_i) = (rho - rho_i + abs(rho - rho_i)) / 2``. For stochastic clients
    whose expression readers drop relational operators."""
    slopes = [f"(({literal(values[i + 1])} - {literal(values[i])}) / ({literal(grid[i + 1])} - {literal(grid[i])}))"
              for i in range(grid.size - 1)]
    terms = [f"{literal(values[0])} + {slopes[0]} * (rho - {literal(grid[0])})"]
    for i in range(1, grid.size - 1):
        gap = f"(rho - {literal(grid[i])})"
        terms.append(f"({slopes[i]} - {slopes[i - 1]}) * ({gap} + abs{gap}) / {literal(2.0)}")
    return " + ".join(terms)


def piecewise_depth(node) -> int:
    """Largest number of nested ``piecewise`` nodes on a path of a libsbml math tree."""
    import libsbml

    below = max((piecewise_depth(node.getChild(i)) for i in range(node.getNumChildren())), default=0)
    return below + (node.getType() == libsbml.AST_FUNCTION_PIECEWISE)


def _closed_form(law, fractions: np.ndarray, kind: str, tolerance: float):
    """A closed form in ``rho`` for ``f`` of the first phenotype (two phenotypes only)."""
    from ..laws._formula import fit_formula
    from ..laws._law import SwitchingLaw

    if len(law.phenotypes) != 2:
        raise InputError(
            f"`fractions`={kind!r} needs a law with 2 phenotypes (got {len(law.phenotypes)}); "
            "use fractions='table'"
        )
    # The grid fractions seen as a one-density "law" whose signal value is the density, so
    # that fit_formula's least squares fits f(rho) itself.
    grid = law.densities
    as_signal = SwitchingLaw(
        densities=np.zeros(1), states=np.arange(grid.size), state_values=grid,
        phenotypes=law.phenotypes, table=fractions[None], state_probs=np.full((1, grid.size), 1 / grid.size),
        betas=np.zeros(1), information_bits=np.zeros(1), expected_payoff=np.zeros(1),
        converged=np.ones(1, dtype=bool), objective=law.objective, route=law.route, setting=law.setting,
    )
    fit = fit_formula(as_signal, 0, kind=kind)
    if fit.max_abs_error > tolerance:
        raise InputError(
            f"`fractions`={kind!r}: the closed form is off by {fit.max_abs_error:.3g} at a grid "
            f"density, more than `tolerance`={tolerance!r}; use fractions='table' or a larger tolerance"
        )
    dense = fit.evaluate(np.linspace(0.0, 1.0, 10001))
    if dense.min() < 0.0 or dense.max() > 1.0:
        raise InputError(f"`fractions`={kind!r}: the closed form leaves [0, 1] on [0, 1]; use fractions='table'")
    return fit


def _closed_form_text(fit, literal) -> str:
    p = {name: literal(float(value)) for name, value in fit.parameters.items()}
    if fit.kind == "logistic":
        return f"{literal(1.0)} / ({literal(1.0)} + exp(-({p['a']} + {p['b']} * rho)))"
    return (f"{p['low']} + ({p['high']} - {p['low']}) * rho^{p['n']} / "
            f"({p['half']}^{p['n']} + rho^{p['n']})")


def grid_fractions(law) -> np.ndarray:
    """``f_x`` at each grid density: ``sum_y p(y | rho) q(x | y, rho)``, shape (k, n)."""
    return np.einsum("ky,kyx->kx", law.state_probs, law.table)


def _initial(model, law, initial, f_of):
    if model.tau is None:
        rho = as_nonnegative(initial, "initial")
        if rho > 1:
            raise InputError(f"`initial` must be a density in [0, 1] (got {rho!r})")
        return np.array([rho])
    if np.ndim(initial) == 0:
        rho = as_nonnegative(initial, "initial")
        if rho > 1:
            raise InputError(f"`initial` must be a density in [0, 1] (got {rho!r})")
        return rho * f_of(rho)
    start = as_array(initial, "initial", ndim=1)
    if start.size != len(law.phenotypes) or (start < 0).any() or start.sum() > 1:
        raise InputError(
            f"`initial` must be a density or {len(law.phenotypes)} non-negative compartments "
            f"with total <= 1 (got {start})"
        )
    return start


def _check(model, law, time_unit, fractions, tolerance):
    choice(time_unit, "time_unit", tuple(TIME_UNITS))
    choice(fractions, "fractions", FRACTIONS)
    tolerance = as_positive(tolerance, "tolerance")
    if model.division.size != len(law.phenotypes):
        raise InputError(
            f"`law` must have one phenotype per rate of the model ({model.division.size}) "
            f"(got {len(law.phenotypes)})"
        )
    if model.objective != law.objective:
        raise InputError(f"`law` must use the model's objective {model.objective!r} (got {law.objective!r})")
    grid = law.densities
    if grid.size < 2 or grid[0] != 0.0 or grid[-1] != 1.0:
        raise InputError(
            f"`law` must be derived on a density grid from 0 to 1 for an SBML model "
            f"(got [{float(grid[0])!r}, {float(grid[-1])!r}] with {grid.size} points)"
        )
    return tolerance


def _unit(model, ident: str, multiplier: float, exponent: int, kind: str = "second") -> None:
    import libsbml

    definition = model.createUnitDefinition()
    _ok(definition.setId(ident), f"name the unit {ident}")
    unit = definition.createUnit()
    _ok(unit.setKind(getattr(libsbml, f"UNIT_KIND_{kind.upper()}")), "set a unit kind")
    _ok(unit.setExponent(exponent), "set a unit exponent")
    _ok(unit.setScale(0), "set a unit scale")
    _ok(unit.setMultiplier(multiplier), "set a unit multiplier")


def _parameter(model, ident: str, units: str, value=None, name: str = "") -> None:
    p = model.createParameter()
    _ok(p.setId(ident), f"name the parameter {ident}")
    if name:
        _ok(p.setName(name), f"describe the parameter {ident}")
    _ok(p.setUnits(units), f"set the units of {ident}")
    _ok(p.setConstant(value is not None), f"set {ident} constant")
    if value is not None:
        _ok(p.setValue(value), f"set the value of {ident}")


def _rule(model, variable: str, formula: str) -> None:
    rule = model.createAssignmentRule()
    _ok(rule.setVariable(variable), f"assign {variable}")
    _ok(rule.setMath(_math(formula)), f"set the rule for {variable}")


def _reaction(model, ident: str, reactant, product, stoichiometry: float, formula: str, species,
              literal_units: bool = True) -> None:
    reaction = model.createReaction()
    _ok(reaction.setId(ident), f"name the reaction {ident}")
    _ok(reaction.setReversible(False), f"make {ident} irreversible")
    for target, create, amount in ((reactant, reaction.createReactant, 1.0),
                                   (product, reaction.createProduct, stoichiometry)):
        if target is None:
            continue
        ref = create()
        _ok(ref.setSpecies(target), f"attach {target} to {ident}")
        _ok(ref.setStoichiometry(amount), f"set a stoichiometry of {ident}")
        _ok(ref.setConstant(True), f"fix a stoichiometry of {ident}")
    for other in species:
        if other not in (reactant, product):
            ref = reaction.createModifier()
            _ok(ref.setSpecies(other), f"attach the modifier {other} to {ident}")
    law = reaction.createKineticLaw()
    _ok(law.setMath(_math(formula, literal_units)), f"set the rate of {ident}")


def _notes(model, law, fit, tolerance, time_unit, metadata, size=None) -> str:
    limit = model.tau is None
    if fit is None:
        how = (f"the exact piecewise-linear interpolant of the law's fractions on its "
               f"{law.densities.size}-point density grid from 0 to 1")
    else:
        how = (f"a {fit.kind} closed form in rho fitted to the law's fractions, largest error "
               f"{fit.max_abs_error:.3g} on the grid (tolerance {tolerance!r}); phenotype "
               f"{law.phenotypes[1]!r} takes 1 minus it")
    equation = ("rho' = rho sum_x f_x(rho) (b_x (1 - rho) - d_x - c_x rho) (fast switching)" if limit
                else "rho_x' = b_x rho_x (1 - rho) - (d_x + c_x rho) rho_x + (rho f_x(rho) - rho_x) / tau")
    lines = [
        f"Mean-field model of cells switching phenotype by a law derived with switchlaw "
        f"{metadata['switchlaw_version']}: {equation}.",
        f"Phenotypes: {', '.join(law.phenotypes)}. Densities are dimensionless; time is in {time_unit}s.",
        *([] if size is None else [
            f"Count variant for stochastic simulators: species are cell counts n_x, the density is "
            f"rho = (sum_x n_x) / system_size with system_size = {size} cells, and every propensity is "
            f"the rate above times system_size (no rules; each propensity states f_x(rho) itself)."]),
        f"Fractions f_x(rho): {how}.",
        f"Law: {metadata['objective']}, {metadata['route']} = {metadata['setting']!r}; "
        f"inputs sha256 {metadata['inputs_sha256']}.",
        metadata["note"],
    ]
    if not metadata["converged"]:
        lines.insert(0, "WARNING: the law did NOT converge at every density (exported on request).")
    body = "".join(f"<p>{escape(line)}</p>" for line in lines)
    return f'<body xmlns="http://www.w3.org/1999/xhtml">{body}</body>'


def _annotation(metadata, fit, time_unit, size=None) -> str:
    attributes = {
        "version": metadata["switchlaw_version"], "inputs_sha256": metadata["inputs_sha256"],
        "objective": metadata["objective"], "route": metadata["route"],
        "setting": repr(metadata["setting"]), "converged": str(metadata["converged"]).lower(),
        "fractions": "table" if fit is None else fit.kind, "time_unit": time_unit,
    }
    attributes["variant"] = "density" if size is None else "counts"
    if size is not None:
        attributes["system_size"] = str(size)
    if fit is not None:
        attributes["fit_max_abs_error"] = repr(float(fit.max_abs_error))
    text = " ".join(f"switchlaw:{key}={quoteattr(value)}" for key, value in attributes.items())
    study = metadata["study"]
    inner = "" if study is None else f"<switchlaw:study>{escape(study_text(study))}</switchlaw:study>"
    return (f'<annotation><switchlaw:provenance xmlns:switchlaw="{NAMESPACE}" {text}>{inner}'
            f"</switchlaw:provenance></annotation>")


def _system_size(variant, system_size):
    choice(variant, "variant", VARIANTS)
    if variant == "density":
        if system_size is not None:
            raise InputError("`system_size` applies only with variant='counts'")
        return None
    if system_size is None:
        raise InputError("variant='counts' needs `system_size` (cells at density 1, an integer >= 1)")
    if isinstance(system_size, bool) or not float(system_size).is_integer() or system_size < 1:
        raise InputError(f"`system_size` must be an integer >= 1 (got {system_size!r})")
    return int(system_size)


def _initial_counts(model, law, initial, size: int) -> np.ndarray:
    """Cell counts at time 0: one total (fast switching) or one count per phenotype."""
    wanted = 1 if model.tau is None else len(law.phenotypes)
    start = np.atleast_1d(np.asarray(initial, dtype=float))
    if (start.ndim != 1 or start.size != wanted or not np.isfinite(start).all() or (start < 0).any()
            or not all(float(c).is_integer() for c in start) or start.sum() > size):
        what = "one cell count" if wanted == 1 else f"{wanted} cell counts (one per phenotype)"
        raise InputError(
            f"`initial` must be {what}: non-negative integers totalling at most `system_size`={size} "
            f"(got {initial!r})"
        )
    return start


def sbml_text(model, law, *, initial, time_unit="second", fractions="table", tolerance=1e-3,
              study=None, variant="density", system_size=None) -> tuple:
    """The SBML document of ``model`` with the fractions of ``law``: ``(text, inputs_sha256)``.

    ``variant="density"`` writes densities (fractions of carrying capacity) for ODE clients;
    ``variant="counts"`` writes cell counts in a population of ``system_size`` cells at
    density 1, for stochastic (Gillespie) clients.
    """
    import libsbml

    tolerance = _check(model, law, time_unit, fractions, tolerance)
    size = _system_size(variant, system_size)
    counts = size is not None
    grid = law.densities
    table = grid_fractions(law)
    fit = None if fractions == "table" else _closed_form(law, table, fractions, tolerance)

    def f_of(rho):
        if fit is None:
            return np.array([np.interp(rho, grid, table[:, x]) for x in range(table.shape[1])])
        first = float(fit.evaluate(rho))
        return np.array([first, 1.0 - first])

    start = _initial_counts(model, law, initial, size) if counts else _initial(model, law, initial, f_of)
    digest = sha256_of_law(law)
    metadata = law_metadata(law, study, digest)
    literal = _Literals()
    ids = _identifiers(law.phenotypes)
    per_time = f"per_{time_unit}"
    amount = "item" if counts else "dimensionless"

    document = libsbml.SBMLDocument(3, 2)
    sbml = document.createModel()
    _ok(sbml.setId("switchlaw_cell_counts" if counts else "switchlaw_mean_field"), "name the model")
    _ok(sbml.setName("switchlaw cell-count model" if counts else "switchlaw mean-field model"), "describe the model")
    if time_unit != "second":
        _unit(sbml, time_unit, TIME_UNITS[time_unit], 1)
    _unit(sbml, per_time, TIME_UNITS[time_unit], -1)
    if counts:
        _unit(sbml, f"item_{per_time}", TIME_UNITS[time_unit], -1)
        definition = sbml.getUnitDefinition(f"item_{per_time}")
        item = definition.createUnit()
        for setter, value in (("Kind", libsbml.UNIT_KIND_ITEM), ("Exponent", 1), ("Scale", 0), ("Multiplier", 1.0)):
            _ok(getattr(item, "set" + setter)(value), "define items per time")
    for attribute, value in (("TimeUnits", time_unit), ("SubstanceUnits", amount),
                             ("ExtentUnits", amount), ("VolumeUnits", "dimensionless")):
        _ok(getattr(sbml, "set" + attribute)(value), f"set the model's {attribute}")
    space = sbml.createCompartment()
    _ok(space.setId("space"), "name the compartment")
    _ok(space.setConstant(True), "fix the compartment")
    _ok(space.setSpatialDimensions(3.0), "set the compartment's dimensions")
    _ok(space.setSize(1.0), "set the compartment's size")
    _ok(space.setUnits("dimensionless"), "set the compartment's units")

    if counts:
        species = ["cells"] if model.tau is None else [f"cells_{i}" for i in ids]
        names = ["cells"] if model.tau is None else [f"cells of {n}" for n in law.phenotypes]
    else:
        species = ["rho"] if model.tau is None else [f"cells_{i}" for i in ids]
        names = ["total density"] if model.tau is None else [f"density of {n}" for n in law.phenotypes]
    for ident, name, value in zip(species, names, start):
        s = sbml.createSpecies()
        _ok(s.setId(ident), f"name the species {ident}")
        _ok(s.setName(name), f"describe the species {ident}")
        _ok(s.setCompartment("space"), f"place {ident}")
        _ok(s.setInitialAmount(float(literal(value))), f"set the initial amount of {ident}")
        _ok(s.setSubstanceUnits(amount), f"set the units of {ident}")
        _ok(s.setHasOnlySubstanceUnits(True), f"make {ident} an amount")
        _ok(s.setBoundaryCondition(False), f"set the boundary of {ident}")
        _ok(s.setConstant(False), f"let {ident} change")

    for i, name in zip(ids, law.phenotypes):
        _parameter(sbml, f"division_{i}", per_time, float(literal(model.division[ids.index(i)])),
                   f"division rate into free space of {name}")
        _parameter(sbml, f"death_{i}", per_time, float(literal(model.death[ids.index(i)])), f"death rate of {name}")
        _parameter(sbml, f"crowding_{i}", per_time, float(literal(model.crowding[ids.index(i)])),
                   f"extra death per unit density of {name}")
        if not counts:
            _parameter(sbml, f"fraction_{i}", "dimensionless", None, f"mean-field fraction f of {name}")
    if model.tau is not None:
        _parameter(sbml, "tau", time_unit, float(literal(model.tau)), "decision timescale")
    if counts:
        _parameter(sbml, "system_size", "item", float(literal(size)), "cells at density 1 (carrying capacity)")
    elif model.tau is not None:
        _parameter(sbml, "rho", "dimensionless", None, "total density")
        _rule(sbml, "rho", " + ".join(species))

    # The count variant has no rules (stochastic clients do not all evaluate them): the
    # density and the fractions are written out inside each propensity. Its numbers are
    # named dimensionless constants, not literals with sbml:units, which some stochastic
    # clients cannot parse; units stay fully checkable.
    if counts:
        constants: dict = {}

        def number(value) -> str:
            key = float(value)
            if key not in constants:
                constants[key] = f"number_{len(constants)}"
                _parameter(sbml, constants[key], "dimensionless", float(literal(key)))
            return constants[key]
    else:
        number = literal
    rho = f"(({' + '.join(species)}) / system_size)" if counts else "rho"
    fraction = {}
    for x, i in enumerate(ids):
        if fit is None:
            formula = (_hinge_linear if counts else _piecewise_linear)(grid, table[:, x], number)
        elif x == 0:
            formula = _closed_form_text(fit, number)
        else:
            formula = f"{number(1.0)} - ({fraction[ids[0]]})" if counts else f"{number(1.0)} - fraction_{ids[0]}"
        if counts:
            fraction[i] = re.sub(r"\brho\b", rho, formula)
        else:
            fraction[i] = f"fraction_{i}"
            _rule(sbml, f"fraction_{i}", formula)

    units = not counts
    if model.tau is None:
        one, cells = number(1.0), species[0]
        birth = " + ".join(f"({fraction[i]}) * division_{i}" for i in ids)
        death = " + ".join(f"({fraction[i]}) * (death_{i} + crowding_{i} * {rho})" for i in ids)
        _reaction(sbml, "birth", cells, cells, 2.0, f"({birth}) * ({one} - {rho}) * {cells}", species, units)
        _reaction(sbml, "death", cells, None, 0.0, f"({death}) * {cells}", species, units)
    else:
        for i, cells in zip(ids, species):
            _reaction(sbml, f"division_of_{i}", cells, cells, 2.0,
                      f"division_{i} * {cells} * ({number(1.0)} - {rho})", species, units)
            _reaction(sbml, f"death_of_{i}", cells, None, 0.0,
                      f"(death_{i} + crowding_{i} * {rho}) * {cells}", species, units)
        for i, source in zip(ids, species):
            for j, target in zip(ids, species):
                if i != j:
                    _reaction(sbml, f"switch_{i}_to_{j}", source, target, 1.0,
                              f"{source} * ({fraction[j]}) / tau", species, units)

    _ok(sbml.setNotes(_notes(model, law, fit, tolerance, time_unit, metadata, size)), "set the notes")
    _ok(sbml.setAnnotation(_annotation(metadata, fit, time_unit, size)), "set the annotation")
    text = literal.substitute(libsbml.writeSBMLToString(document))
    problems = consistency_problems(text)
    if problems:
        raise RuntimeError("switchlaw wrote an SBML document that fails libsbml's checks: " + "; ".join(problems))
    return text, digest


def consistency_problems(text: str) -> list:
    """Every error or warning libsbml reports for an SBML text (all checks, units included)."""
    import libsbml

    document = libsbml.readSBMLFromString(text)
    for category in (libsbml.LIBSBML_CAT_UNITS_CONSISTENCY, libsbml.LIBSBML_CAT_MODELING_PRACTICE,
                     libsbml.LIBSBML_CAT_IDENTIFIER_CONSISTENCY, libsbml.LIBSBML_CAT_GENERAL_CONSISTENCY,
                     libsbml.LIBSBML_CAT_SBO_CONSISTENCY, libsbml.LIBSBML_CAT_MATHML_CONSISTENCY,
                     libsbml.LIBSBML_CAT_OVERDETERMINED_MODEL):
        document.setConsistencyChecks(category, True)
    document.checkConsistency()
    return [
        f"{error.getSeverityAsString()} {error.getErrorId()}: {error.getMessage().strip()}"
        for error in (document.getError(i) for i in range(document.getNumErrors()))
    ]


def write(model, path: Path, *, law, initial, time_unit, fractions, tolerance, study, variant,
          system_size) -> tuple:
    text, digest = sbml_text(model, law, initial=initial, time_unit=time_unit, fractions=fractions,
                             tolerance=tolerance, study=study, variant=variant, system_size=system_size)
    return {path: text.encode()}, digest


FORMAT = register(Format(
    name="sbml",
    suffixes=(".xml", ".sbml"),
    accepts=("MeanField",),
    options={"law": REQUIRED, "initial": REQUIRED, "time_unit": "second", "fractions": "table",
             "tolerance": 1e-3, "study": None, "variant": "density", "system_size": None},
    write=write,
    description="SBML Level 3 Version 2 of the mean-field model (units declared, provenance annotated)",
))
