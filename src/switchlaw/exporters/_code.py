"""What the code formats (``python``, ``c``, ``latex``) share: the fit to export, its sympy
expression, and the header lines stating its provenance and its error against the law.

Every exported expression stays in [0, 1]: the logistic form cannot leave it, and the Hill
form is written as ``min(1, max(0, hill))``."""

from __future__ import annotations

import math
import re

import numpy as np

from .._errors import InputError
from ._provenance import CAUTION, sha256_of_fit, sha256_of_law, version
from ._registry import Format, register

#: Options of every code format (used when a law, not a fit, is exported).
OPTIONS = {"phenotype": None, "kind": "logistic", "per_density": False}


def resolve(obj, *, phenotype, kind, per_density) -> tuple:
    """``(fit, inputs_sha256, law or None)`` for a FormulaFit, or a law fitted here."""
    from ..laws._formula import FormulaFit, fit_formula

    if isinstance(obj, FormulaFit):
        if phenotype is not None or kind != "logistic" or per_density:
            raise InputError(
                "`phenotype`, `kind` and `per_density` apply when exporting a SwitchingLaw; "
                "a FormulaFit already fixes them"
            )
        fit, digest, law = obj, sha256_of_fit(obj), None
    else:
        if phenotype is None:
            raise InputError("exporting a SwitchingLaw as code needs `phenotype` (the one whose q is fitted)")
        fit, digest, law = fit_formula(obj, phenotype, kind=kind, per_density=per_density), sha256_of_law(obj), obj
    values = parameter_table(fit)
    if not np.isfinite(values).all() or not math.isfinite(fit.max_abs_error):
        raise InputError(f"`obj` must have finite fitted parameters to export (got {fit.parameters})")
    return fit, digest, law


def names(fit) -> tuple:
    from ..laws._formula import _SHAPES

    return _SHAPES[fit.kind][1]


def parameter_table(fit) -> np.ndarray:
    """Fitted values, shape (densities, parameters) per density or (parameters,) otherwise."""
    return np.stack([np.asarray(fit.parameters[name], dtype=float) for name in names(fit)], axis=-1)


def expression(fit, symbols: dict | None = None):
    """The fit as a sympy expression in ``v`` and its parameters (symbols renamed by ``symbols``)."""
    import sympy

    v = sympy.Symbol("v", real=True)
    p = {name: sympy.Symbol((symbols or {}).get(name, name), real=True) for name in names(fit)}
    if fit.kind == "logistic":
        return 1 / (1 + sympy.exp(-(p["a"] + p["b"] * v)))
    # A fitted Hill curve can leave [0, 1] away from the fitted range (low < 0, high > 1):
    # the exported probability is clipped to [0, 1], so no caller gets an impossible value.
    hill = p["low"] + (p["high"] - p["low"]) * v ** p["n"] / (p["half"] ** p["n"] + v ** p["n"])
    return sympy.Min(sympy.Float(1.0), sympy.Max(sympy.Float(0.0), hill, evaluate=False), evaluate=False)


def identifier(name: str) -> str:
    ident = re.sub(r"\W", "_", str(name), flags=re.ASCII)
    return "q_" + ident


def header(fit, digest: str, law) -> list:
    """Lines (without comment markers) stating what the code is and how far off it is."""
    where = "one parameter set per grid density" if fit.per_density else "one formula for every density"
    lines = [
        f"q({fit.phenotype} | v): {fit.kind} fit ({where}) exported by switchlaw {version()}",
        f"max abs error against the exact law: {float(fit.max_abs_error)!r} "
        f"(over every state and density of the law's grid)",
        "v: signal value of the sensed state (e.g. occupied neighbours); result: probability (1)",
        f"inputs sha256: {digest}",
    ]
    if fit.kind == "hill":
        lines.append("the signal v must be >= 0; the Hill curve is clipped to [0, 1]")
    if law is not None and not np.all(law.converged):
        failed = int(np.sum(~np.asarray(law.converged, dtype=bool)))
        lines.insert(0, f"WARNING: the law did NOT converge at {failed} of {law.densities.size} "
                        "densities (exported on request)")
    lines.append(CAUTION)
    return lines


def require_sympy(format_name: str) -> None:
    """Refuse a code format in one line when the optional ``[code]`` extra is not installed."""
    import importlib.util

    if importlib.util.find_spec("sympy") is None:
        raise InputError(
            f"format {format_name!r} needs the optional package sympy "
            "(install it with: pip install 'switchlaw[code]')"
        )


def code_format(name: str, suffixes: tuple, source, description: str) -> Format:
    """Register a code format whose ``source(fit, digest, law)`` gives the file's text."""

    def write(obj, path, *, phenotype, kind, per_density) -> tuple:
        require_sympy(name)
        fit, digest, law = resolve(obj, phenotype=phenotype, kind=kind, per_density=per_density)
        return {path: source(fit, digest, law).encode()}, digest

    return register(Format(
        name=name,
        suffixes=suffixes,
        accepts=("FormulaFit", "SwitchingLaw"),
        options=dict(OPTIONS),
        write=write,
        description=description,
    ))
