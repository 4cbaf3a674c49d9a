"""A safe evaluator for arithmetic payoff expressions in study files.

Only numbers, the named variables, ``+ - * / **``, parentheses and a few functions are
allowed; the expression is parsed with :mod:`ast` and evaluated by walking the tree, so a
study file can never execute code.
"""

from __future__ import annotations

import ast
import operator

import numpy as np

#: The names a payoff expression may use: the sensed state and the population density.
PAYOFF_VARIABLES = ("y", "density")

FUNCTIONS = {
    "exp": np.exp,
    "log": np.log,
    "sqrt": np.sqrt,
    "abs": np.abs,
    "min": np.minimum,
    "max": np.maximum,
    "tanh": np.tanh,
}
#: How many arguments each function takes.
_ARITY = {"exp": 1, "log": 1, "sqrt": 1, "abs": 1, "min": 2, "max": 2, "tanh": 1}
_BINARY = {
    ast.Add: operator.add,
    ast.Sub: operator.sub,
    ast.Mult: operator.mul,
    ast.Div: operator.truediv,
    ast.Pow: operator.pow,
}
_UNARY = {ast.USub: operator.neg, ast.UAdd: operator.pos}


from .._errors import InputError


class ExpressionError(InputError):
    """An expression uses something outside the allowed arithmetic, or cannot be evaluated."""


def parse(text: str, variables) -> ast.Expression:
    """Parse ``text`` and check that it only uses allowed constructs and ``variables``."""
    if len(text) > 2000:
        raise ExpressionError(f"is too long ({len(text)} characters; at most 2000)")
    try:
        tree = ast.parse(text, mode="eval")
    except SyntaxError as error:
        raise ExpressionError(f"not an arithmetic expression ({error.msg})") from None
    except (RecursionError, MemoryError):
        raise ExpressionError("is nested too deeply") from None
    calls = {id(node.func) for node in ast.walk(tree) if isinstance(node, ast.Call)}
    allowed = set(variables)
    for node in ast.walk(tree):
        if isinstance(node, (ast.Expression, ast.Load)) or type(node) in _BINARY or type(node) in _UNARY:
            continue
        if isinstance(node, (ast.BinOp, ast.UnaryOp)):
            op = node.op
            if type(op) not in _BINARY and type(op) not in _UNARY:
                raise ExpressionError(f"operator {type(op).__name__} is not allowed")
            continue
        if isinstance(node, ast.Constant):
            if isinstance(node.value, bool) or not isinstance(node.value, (int, float)):
                raise ExpressionError(f"only numbers are allowed as constants (got {node.value!r})")
            continue
        if isinstance(node, ast.Name):
            if node.id in FUNCTIONS and id(node) not in calls:
                raise ExpressionError(f"{node.id} is a function: call it, e.g. {node.id}(y)")
            if node.id not in allowed and node.id not in FUNCTIONS:
                raise ExpressionError(
                    f"unknown name {node.id!r} (allowed: {', '.join(sorted(allowed))}, "
                    f"functions {', '.join(sorted(FUNCTIONS))})"
                )
            continue
        if isinstance(node, ast.Call):
            if not isinstance(node.func, ast.Name) or node.func.id not in FUNCTIONS or node.keywords:
                raise ExpressionError("only calls like exp(x), log(x), sqrt(x), abs, min, max, tanh are allowed")
            wanted = _ARITY[node.func.id]
            if len(node.args) != wanted:
                raise ExpressionError(
                    f"{node.func.id}() takes {wanted} argument{'s' if wanted > 1 else ''} "
                    f"(got {len(node.args)})"
                )
            continue
        raise ExpressionError(f"{type(node).__name__} is not allowed in an expression")
    return tree


def evaluate(tree: ast.Expression, values: dict):
    """Evaluate a parsed expression with numpy semantics."""

    def walk(node):
        if isinstance(node, ast.Expression):
            return walk(node.body)
        if isinstance(node, ast.Constant):
            return np.float64(node.value)  # numpy scalars: overflow gives inf, not an exception
        if isinstance(node, ast.Name):
            return values[node.id]
        if isinstance(node, ast.BinOp):
            return _BINARY[type(node.op)](walk(node.left), walk(node.right))
        if isinstance(node, ast.UnaryOp):
            return _UNARY[type(node.op)](walk(node.operand))
        if isinstance(node, ast.Call):
            return FUNCTIONS[node.func.id](*[walk(arg) for arg in node.args])
        raise ExpressionError(f"{type(node).__name__} is not allowed")  # unreachable after parse

    with np.errstate(all="ignore"):
        try:
            return walk(tree)
        except (ArithmeticError, TypeError, ValueError, LookupError, RecursionError) as error:
            raise ExpressionError(f"cannot be evaluated ({error})") from None
