"""Format ``python``: the closed-form fit as a Python function (sympy's Python printer)."""

from __future__ import annotations


from ._code import code_format, expression, header, identifier, names, parameter_table
from ._tables import number


def _printer():
    from sympy.printing.pycode import PythonCodePrinter

    class Printer(PythonCodePrinter):
        def _print_Float(self, expr):
            return number(expr)

    return Printer()


def _tuple(values) -> str:
    items = [number(v) for v in values]
    return "(" + ", ".join(items) + ("," if len(items) == 1 else "") + ")"


def source(fit, digest: str, law) -> str:
    """Python source defining ``q_<phenotype>(v)`` (or ``(v, i)`` per grid density)."""
    function = identifier(fit.phenotype)
    values = parameter_table(fit)
    lines = [f"# {line}" for line in header(fit, digest, law)]
    lines += ["import math", ""]
    if fit.per_density:
        lines.append(f"DENSITIES = {_tuple(fit.densities)}")
        rows = ",\n    ".join(_tuple(row) for row in values)
        lines.append(f"PARAMETERS = (  # one row per density: {', '.join(names(fit))}\n    {rows},\n)")
        signature, pick = f"{function}(v, i)", "PARAMETERS[i]"
        doc = f"Probability of adopting {fit.phenotype!r} at signal value v and density DENSITIES[i]."
    else:
        lines.append(f"PARAMETERS = {_tuple(values)}  # {', '.join(names(fit))}")
        signature, pick = f"{function}(v)", "PARAMETERS"
        doc = f"Probability of adopting {fit.phenotype!r} at signal value v."
    lines += [
        "", "",
        f"def {signature}:",
        f"    {doc!r}",
        f"    {', '.join(names(fit))}{',' if len(names(fit)) == 1 else ''} = {pick}",
        f"    return {_printer().doprint(expression(fit))}",
    ]
    return "\n".join(lines) + "\n"


FORMAT = code_format(
    "python", (".py",), source,
    "the closed-form fit as a Python function, with its error against the law",
)
