"""Format ``latex``: the closed-form fit as a LaTeX equation (sympy's LaTeX printer) with its
parameter values, for a paper's methods section."""

from __future__ import annotations


from ._code import code_format, expression, header, names, parameter_table
from ._tables import number

#: Single-letter symbols for the parameters (multi-letter names would read as products).
SYMBOLS = {"a": "a", "b": "b", "low": "L", "high": "H", "half": "K", "n": "n"}
MEANINGS = {"a": "intercept", "b": "slope per signal unit", "low": "value at v = 0",
            "high": "value as v grows", "half": "half-saturation signal", "n": "Hill exponent"}


def latex_number(value: float) -> str:
    """Shortest round-trip decimal, with ``\\times 10^{e}`` for an exponent."""
    text = number(value)
    if "e" not in text:
        return text
    mantissa, exponent = text.split("e")
    return f"{mantissa} \\times 10^{{{int(exponent)}}}"


def _escaped(name: str) -> str:
    for char in "\\&%$#_{}":
        name = name.replace(char, "\\" + char)
    return name


def source(fit, digest: str, law) -> str:
    import sympy

    body = sympy.latex(expression(fit, SYMBOLS)).replace("\\left(", "(").replace("\\right)", ")")
    symbols = [SYMBOLS[name] for name in names(fit)]
    values = parameter_table(fit)
    lines = [f"% {line}" for line in header(fit, digest, law)]
    lines += [
        "\\begin{equation}",
        f"  q(\\mathrm{{{_escaped(fit.phenotype)}}} \\mid v) = {body}",
        "\\end{equation}",
    ]
    meaning = ", ".join(f"${s}$: {MEANINGS[n]}" for s, n in zip(symbols, names(fit)))
    if fit.per_density:
        lines += [
            f"with one parameter set per population density $\\rho$ ({meaning}):",
            "\\begin{tabular}{" + "r" * (len(symbols) + 1) + "}",
            " & ".join(["$\\rho$", *(f"${s}$" for s in symbols)]) + " \\\\",
            "\\hline",
        ]
        for rho, row in zip(fit.densities, values):
            lines.append(" & ".join(f"${latex_number(x)}$" for x in (rho, *row)) + " \\\\")
        lines.append("\\end{tabular}")
    else:
        pairs = ", ".join(f"${s} = {latex_number(x)}$" for s, x in zip(symbols, values))
        lines.append(f"with {pairs} ({meaning}).")
    return "\n".join(lines) + "\n"


FORMAT = code_format(
    "latex", (".tex",), source,
    "the closed-form fit as a LaTeX equation with its parameter values",
)
