"""Format ``c``: the closed-form fit as a C99 function (sympy's C printer), with an include
guard so the file can serve as a header."""

from __future__ import annotations


from ._code import code_format, expression, header, identifier, names, parameter_table
from ._tables import number


def _printer():
    from sympy.printing.c import C99CodePrinter

    class Printer(C99CodePrinter):
        def _print_Float(self, expr):
            return number(expr)

    return Printer()


def _braced(values) -> str:
    return "{" + ", ".join(number(v) for v in values) + "}"


def source(fit, digest: str, law) -> str:
    """C99 source defining ``double q_<phenotype>(double v)`` (or ``(double v, int i)``)."""
    function = identifier(fit.phenotype)
    values = parameter_table(fit)
    count = len(names(fit))
    lines = [f"/* {line.replace('*/', '* /')} */" for line in header(fit, digest, law)]
    guard = f"SWITCHLAW_{function.upper()}_H"
    lines += [f"#ifndef {guard}", f"#define {guard}", "", "#include <math.h>", ""]
    if fit.per_density:
        k = fit.densities.size
        lines.append(f"static const double {function}_densities[{k}] = {_braced(fit.densities)};")
        rows = ",\n    ".join(_braced(row) for row in values)
        lines.append(f"/* one row per density: {', '.join(names(fit))} */")
        lines.append(f"static const double {function}_parameters[{k}][{count}] = {{\n    {rows}\n}};")
        signature, row = f"double {function}(double v, int i)", f"{function}_parameters[i]"
    else:
        lines.append(f"/* {', '.join(names(fit))} */")
        lines.append(f"static const double {function}_parameters[{count}] = {_braced(values)};")
        signature, row = f"double {function}(double v)", f"{function}_parameters"
    lines += ["", f"/* Probability of adopting {fit.phenotype} at signal value v. */", signature, "{"]
    lines += [f"    const double {name} = {row}[{j}];" for j, name in enumerate(names(fit))]
    lines += [f"    return {_printer().doprint(expression(fit))};", "}", "", f"#endif /* {guard} */"]
    return "\n".join(lines) + "\n"


FORMAT = code_format(
    "c", (".c", ".h"), source,
    "the closed-form fit as a C99 function, with its error against the law",
)
